"""Checks that three analyses of one log give the same figures: the report
(`gleaner report --json`), host/sql on DuckDB (fleet_sql.py --engine duckdb)
and the same questions in pandas (questions_pandas.py). The same checks as
tests/tests/fleet.rs, for the benchmark's one node.

agree.py REPORT_JSON DUCKDB_JSON PANDAS_JSON
exits non-zero and says which figure differs.
"""
import json
import math
import sys


def close(a, b):
    if a is None or b is None:
        return a is None and b is None
    return abs(a - b) <= 1e-9 * max(abs(a), abs(b), 1.0)


def nj(joules):
    return round(joules * 1e9)


def same_answers(duck, pandas):
    """Every query: the same rows, the same columns, the same values."""
    for query, want in duck.items():
        got = pandas.get(query)
        assert got is not None, f"pandas does not answer {query}"
        assert len(got) == len(want), f"{query}: pandas {len(got)} rows, duckdb {len(want)}"
        for i, (g, w) in enumerate(zip(got, want)):
            assert set(g) == set(w), f"{query} row {i}: columns {sorted(g)} vs {sorted(w)}"
            for key, value in w.items():
                other = g[key]
                if isinstance(value, (int, float)) and not isinstance(value, bool):
                    assert close(float(other), float(value)), f"{query} row {i} {key}: {other} vs {value}"
                else:
                    assert other == value, f"{query} row {i} {key}: {other} vs {value}"


def report_agrees(report, sql):
    """The report's figures against the SQL answers for its node."""
    t = sql["node_totals"][0]
    energy = report["energy"]
    assert t["drawn_nj"] == nj(energy["drawn_j"]), "drawn"
    assert t["delivered_nj"] == nj(energy["delivered_j"]), "delivered"
    assert t["stored_nj"] == nj(energy["stored_j"]), "stored"
    if energy["efficiency"] is not None:
        # The report rounds down to whole ppm.
        assert 0 <= t["efficiency"] - energy["efficiency"] < 1e-6 + 1e-12, "efficiency"
    for s in report["states"]:
        key = s["state"].replace("-", "_") + "_s"
        assert close(t[key], s["seconds"]), key
    bins = sql["efficiency_by_input"]
    assert len(bins) == len(report["efficiency_by_input"]), "bins"
    for b, r in zip(bins, report["efficiency_by_input"]):
        assert b["bin"] == round(r["input_v_low"] / 0.05), "bin"
        assert close(b["seconds"], r["seconds"]), "bin seconds"
        assert b["drawn_nj"] == nj(r["drawn_j"]) and b["converted_nj"] == nj(r["converted_j"]), "bin energy"
    days = sql["daily_budget"]
    assert len(days) == len(report["days"]), "days"
    for d, r in zip(days, report["days"]):
        assert d["day"] == r["day"] and d["drawn_nj"] == nj(r["drawn_j"]), "day"
        assert d["stored_nj"] == nj(r["stored_j"]) and close(d["outage_s"], r["outage_s"]), "day"
    o = sql["converter_outages"][0]
    outages = report["outages"]
    assert o["outages"] == len(outages), f"outages {o['outages']} vs {len(outages)}"
    assert close(o["outage_s"], sum(x["duration_s"] for x in outages)), "outage time"
    assert close(o["longest_outage_s"], max([x["duration_s"] for x in outages], default=0.0)), "longest"
    sizing, advice = sql["sizing_inputs"][0], report["sizing"]
    if advice is not None:
        assert close(sizing["load_w"], advice["load_w"]), "load power"
        assert close(sizing["active_w"], advice["active_w"]), "active power"
        assert close(sizing["sleep_w"] or 0.0, advice["sleep_w"]), "sleep power"
        assert close(sizing["output_v_max"], advice["v_max"]), "highest output"
    causes = {}
    for l in report["load_outages"]:
        causes[l["cause"]] = causes.get(l["cause"], 0) + 1
    assert {l["cause"]: l["outages"] for l in sql["load_outages"]} == causes, "load outages"
    assert sql["link_quality"][0]["lost_before"] == report["link"]["lost_frames"], "lost frames"


def main():
    report = json.load(open(sys.argv[1]))
    duck = json.load(open(sys.argv[2]))["duckdb"]
    pandas = json.load(open(sys.argv[3]))["pandas"]
    same_answers(duck, pandas)
    report_agrees(report, duck)
    figures = sum(len(row) for rows in duck.values() for row in rows)
    print(f"Every figure agrees: gleaner report, DuckDB and pandas ({len(duck)} questions, {figures} figures)")


if __name__ == "__main__":
    try:
        main()
    except AssertionError as failed:
        print(f"the analyses disagree: {failed}", file=sys.stderr)
        sys.exit(1)
