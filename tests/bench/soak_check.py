"""Reads every log a gateway soak wrote and checks it (tests/bench/soak.sh).

Each log must open (`gleaner report --json`), hold no damaged bytes (a torn
last record where the recorder was killed is allowed; the garbage node's logs
may hold damaged frames), lose no frame while its port was connected but those its notes say a
full disk kept from being written (from
`gleaner watch --replay --json-lines`: frames lost before a message that is
not the first after the log starts or the port came back), and hold no
duplicate (out-of-order) frame. Prints per node and in all; exits 1 if a
check fails.

    python3 soak_check.py GLEANER LOGS_DIR WORK_DIR NODES
"""

import gzip
import json
import pathlib
import re
import subprocess
import sys
from collections import defaultdict

GARBAGE_NODE = "node-03"


def report(gleaner, log):
    done = subprocess.run([gleaner, "report", "--json", str(log)], capture_output=True, text=True)
    if done.returncode != 0:
        return None, done.stderr.strip()
    return json.loads(done.stdout), ""


def lost_while_connected(gleaner, log):
    """Frames lost between two messages with the port connected throughout."""
    done = subprocess.run(
        [gleaner, "watch", "--replay", str(log), "--json-lines"],
        capture_output=True,
        text=True,
        check=True,
    )
    lost, first_after_gap, messages = 0, True, 0
    for line in done.stdout.splitlines():
        item = json.loads(line)
        if item["kind"] == "link":
            first_after_gap = True
            continue
        messages += 1
        if not first_after_gap:
            lost += item.get("lost_before") or 0
        first_after_gap = False
    return lost, messages


def not_written(log):
    """Frames the recorder received but did not write while the disk was full (its notes)."""
    data = log.read_bytes()
    if log.suffix == ".gz":
        data = gzip.decompress(data)
    found = re.findall(rb"(\d+) frames received meanwhile were not written", data)
    return sum(int(n) for n in found)


def node_sent(work):
    """Frames each serving process sent whole and did not send, by node."""
    sent = defaultdict(lambda: [0, 0, 0.0])
    for out in pathlib.Path(work).glob("serve-*.out"):
        node = "node-" + out.stem.split("-")[1]
        found = re.search(r"frames sent whole (\d+), not sent (\d+).*; ([\d.]+) simulated hours", out.read_text())
        if found:
            sent[node][0] += int(found.group(1))
            sent[node][1] += int(found.group(2))
            sent[node][2] += float(found.group(3))
    return sent


def main():
    gleaner, logs_dir, work, nodes = sys.argv[1], sys.argv[2], sys.argv[3], int(sys.argv[4])
    logs = sorted(pathlib.Path(logs_dir).glob("*.gleanlog*"))
    failures = []
    per_node = defaultdict(lambda: defaultdict(int))
    torn = empty = 0
    for log in logs:
        node = re.match(r"(node-\d\d)", log.name).group(1)
        rep, why = report(gleaner, log)
        if rep is None and "holds no frames" in why:
            empty += 1  # a log the recorder started just before it was killed or rotated
            continue
        if rep is None:
            failures.append(f"{log.name} does not open: {why}")
            continue
        link = rep["link"]
        damaged = link["crc_errors"] + link["framing_errors"] + link["decode_errors"]
        warnings = rep["warnings"]
        torn += sum("last record is incomplete" in w for w in warnings)
        skipped = [w for w in warnings if "damaged bytes" in w]
        if skipped:
            failures.append(f"{log.name}: {skipped[0]}")
        if damaged and node != GARBAGE_NODE:
            failures.append(f"{log.name}: {damaged} damaged frames on a clean line")
        if link["duplicates"]:
            failures.append(f"{log.name}: {link['duplicates']} duplicate frames")
        lost, messages = lost_while_connected(gleaner, log)
        paused = not_written(log)
        if lost > paused:
            failures.append(f"{log.name}: {lost - paused} frames lost while connected")
        n = per_node[node]
        n["logs"] += 1
        n["frames"] += link["frames"]
        n["lost_at_gaps"] += link["lost_frames"] - lost
        n["lost_connected"] += lost - min(lost, paused)
        n["not_written"] += paused
        n["damaged"] += damaged
        n["reboots"] += link["reboots"]
        n["gaps"] += rep["recording_gaps"]
        n["clock_jumps"] += sum("host clock jumped" in w for w in warnings)
    sent = node_sent(work)
    print(f"{'node':10} {'logs':>5} {'frames':>9} {'sent':>9} {'not sent':>9} {'lost, gaps':>10} {'lost, conn.':>11} {'damaged':>8} {'gaps':>5} {'clock jumps':>11}")
    total = defaultdict(int)
    for node in sorted(per_node):
        n = per_node[node]
        s = sent.get(node, [0, 0, 0.0])
        print(f"{node:10} {n['logs']:5} {n['frames']:9} {s[0]:9} {s[1]:9} {n['lost_at_gaps']:10} {n['lost_connected']:11} {n['damaged']:8} {n['gaps']:5} {n['clock_jumps']:11}")
        for k, v in n.items():
            total[k] += v
        total["sent"] += s[0]
        total["not sent"] += s[1]
        total["hours"] += s[2]
    print(f"{'all':10} {total['logs']:5} {total['frames']:9} {total['sent']:9} {total['not sent']:9} {total['lost_at_gaps']:10} {total['lost_connected']:11} {total['damaged']:8} {total['gaps']:5} {total['clock_jumps']:11}")
    print(f"logs read: {len(logs)}, every one opens: {not any('does not open' in f for f in failures)}, of which {empty} hold no frame; torn last records (recorder killed): {torn}")
    if len(per_node) < nodes:
        failures.append(f"only {len(per_node)} of {nodes} nodes have logs")
    print(f"simulated: {total['hours'] / 24:.1f} node-days in all; frames a full disk kept from being written (noted in the logs): {total['not_written']}")
    for f in failures:
        print("FAILED:", f)
    sys.exit(1 if failures else 0)


if __name__ == "__main__":
    main()
