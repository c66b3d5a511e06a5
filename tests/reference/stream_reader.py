"""A reader of `gleaner record --json-lines` / `gleaner watch --json-lines`,
written from docs/stream-json-lines.md with the standard library only.

stream_reader.py < stream: checks every line against the documented schema
and prints JSON {lines, kinds: {kind: count}, node_ids: [...],
seq_steps_ok: bool, energy_nj: {drawn, delivered}, last_state}.
Exits non-zero with the offending line when a line breaks the schema.
"""
import json
import sys

SEQ_MODULO = 1 << 16  # the node's sequence number is a u16 (design notes)
COMMON = {"schema", "kind", "node_id", "node_name", "host_time_us"}
MESSAGE = COMMON | {"boot", "seq", "uptime_ms", "lost_before"}
REPORT = MESSAGE | {
    "interval_ms", "sample_count", "drawn_nj", "delivered_nj", "stored_nj",
    "state", "input_cutoff_in_ms", "brownout_in_ms", "load_nw", "net_nw",
    "load_powered", "load_shed", "flags",
} | {f"{ch}_{stat}" for ch in ("input_uv", "input_na", "output_uv", "output_na")
     for stat in ("min", "mean", "max")}
REQUIRED = {
    "report": REPORT,
    "event": MESSAGE | {"from_state", "to_state", "cause", "input_uv", "output_uv"},
    "load": MESSAGE | {"powered", "cause", "output_uv", "input_uv"},
    "hello": MESSAGE | {"firmware", "protocol", "boot_id", "settings"},
    "reply": MESSAGE | {"request_id", "outcome"},
    "harvest": MESSAGE | {"slot", "harvested_uj"},
    "samples": MESSAGE | {"first_index", "samples"},
    "link": COMMON | {"connected", "detail"},
}


def fail(why, line):
    print(f"{why}: {line}", file=sys.stderr)
    sys.exit(1)


def main():
    kinds, node_ids = {}, set()
    lines, drawn, delivered = 0, 0, 0
    last_seq, seq_ok, last_state = None, True, None
    for raw in sys.stdin:
        lines += 1
        obj = json.loads(raw)
        if obj.get("schema") != "gleaner.stream.v1":
            fail("wrong schema", raw)
        kind = obj["kind"]
        missing = REQUIRED.get(kind, COMMON) - obj.keys()
        if missing:
            fail(f"{kind} lacks {sorted(missing)}", raw)
        kinds[kind] = kinds.get(kind, 0) + 1
        if obj["node_id"] is not None:
            node_ids.add(obj["node_id"])
        if "seq" in obj:
            # Within a boot, sequence numbers step by one unless frames
            # were lost (and then the line says how many).
            here = (obj["boot"], obj["seq"])
            if last_seq is not None and here[0] == last_seq[0] \
                    and here[1] != (last_seq[1] + 1 + obj["lost_before"]) % SEQ_MODULO:
                seq_ok = False
            last_seq = here
        if kind == "report":
            drawn += obj["drawn_nj"]
            delivered += obj["delivered_nj"]
            last_state = obj["state"]
    print(json.dumps({
        "lines": lines,
        "kinds": kinds,
        "node_ids": sorted(node_ids),
        "seq_steps_ok": seq_ok,
        "energy_nj": {"drawn": drawn, "delivered": delivered},
        "last_state": last_state,
    }))


if __name__ == "__main__":
    main()
