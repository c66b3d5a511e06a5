"""The report's questions answered with pandas, the usual alternative: the
same seven answers as host/sql (one function per .sql file, the same rules,
the same rows and columns), read from the Parquet dataset that
`gleaner export --dataset DIR` writes.

questions_pandas.py DATASET
prints JSON {"pandas": {query: [row, ...]}}, the shape fleet_sql.py prints.
"""
import json
import sys

import numpy as np
import pandas as pd

OUTAGE_STATES = ["cutoff", "stalled"]
STATES = ["idle", "cold_start", "harvesting", "sagging", "cutoff", "stalled"]


def rows(frame):
    """JSON-friendly rows: numpy numbers to int or float, NaN to None."""
    out = []
    for record in frame.to_dict("records"):
        row = {}
        for key, value in record.items():
            if isinstance(value, (np.integer,)):
                value = int(value)
            elif isinstance(value, (np.floating, float)):
                value = None if np.isnan(value) else float(value)
            elif isinstance(value, np.bool_):
                value = bool(value)
            row[key] = value
        out.append(row)
    return out


def node_totals(r):
    g = r.groupby("node_id", sort=True)
    out = g.agg(
        reports=("drawn_nj", "size"),
        drawn_nj=("drawn_nj", "sum"),
        delivered_nj=("delivered_nj", "sum"),
        stored_nj=("stored_nj", "sum"),
    )
    drawn = out["drawn_nj"].astype("float64")
    out["efficiency"] = np.where(
        out["drawn_nj"] > 0, (out["delivered_nj"] + out["stored_nj"]) / drawn, np.nan
    )
    for state in STATES:
        out[f"{state}_s"] = g[f"{state}_ms"].sum() / 1000.0
    return out.reset_index()


def efficiency_by_input(r):
    converting = (r["harvesting_ms"] + r["sagging_ms"]) * 10 >= r["interval_ms"] * 9
    x = r[(r["drawn_nj"] > 0) & converting]
    x = x.assign(bin=x["input_uv_mean"] // 50000, converted_nj=x["delivered_nj"] + x["stored_nj"])
    out = x.groupby(["node_id", "bin"], sort=True).agg(
        seconds=("interval_ms", "sum"),
        drawn_nj=("drawn_nj", "sum"),
        converted_nj=("converted_nj", "sum"),
    )
    out["seconds"] = out["seconds"] / 1000.0
    return out.reset_index()[["node_id", "bin", "seconds", "drawn_nj", "converted_nj"]]


def daily_budget(r):
    start = r["uptime_ms"] - r["interval_ms"]
    first = start.groupby(r["node_id"]).transform("min")
    x = r.assign(day=np.floor((start - first) / 86_400_000.0).astype("int64"))
    x = x.assign(outage_ms=x["cutoff_ms"] + x["stalled_ms"])
    out = x.groupby(["node_id", "day"], sort=True).agg(
        drawn_nj=("drawn_nj", "sum"),
        delivered_nj=("delivered_nj", "sum"),
        stored_nj=("stored_nj", "sum"),
        outage_s=("outage_ms", "sum"),
    )
    out["outage_s"] = out["outage_s"] / 1000.0
    return out.reset_index()


def converter_outages(r, e, l):
    first = r.sort_values(["node_id", "boot", "uptime_ms"]).groupby("node_id").head(1)
    under_way = first[first["state"].isin(OUTAGE_STATES)]
    changes = pd.concat(
        [
            e[["node_id", "boot", "uptime_ms", "seq", "to_state"]].rename(columns={"to_state": "state"}),
            pd.DataFrame(
                {
                    "node_id": under_way["node_id"],
                    "boot": under_way["boot"],
                    "uptime_ms": under_way["uptime_ms"] - under_way["interval_ms"],
                    "seq": -1,
                    "state": under_way["state"],
                }
            ),
        ]
    ).sort_values(["node_id", "boot", "uptime_ms", "seq"], kind="stable")
    changes["down"] = changes["state"].isin(OUTAGE_STATES).astype("int64")
    changes["was_down"] = changes.groupby("node_id")["down"].shift(1, fill_value=0)
    edges = changes[changes["down"] != changes["was_down"]].copy()
    edges["next_ms"] = edges.groupby("node_id")["uptime_ms"].shift(-1)
    seen = pd.concat([t[["node_id", "uptime_ms"]] for t in (r, e, l)])
    end = seen.groupby("node_id")["uptime_ms"].max()
    down = edges[edges["down"] == 1].copy()
    down["length_ms"] = down["next_ms"].fillna(down["node_id"].map(end)) - down["uptime_ms"]
    g = down.groupby("node_id")["length_ms"]
    out = pd.DataFrame({"node_id": end.index}).set_index("node_id")
    out["outages"] = g.size().reindex(out.index, fill_value=0)
    out["outage_s"] = g.sum().reindex(out.index, fill_value=0) / 1000.0
    out["longest_outage_s"] = g.max().reindex(out.index, fill_value=0) / 1000.0
    return out.reset_index()


def link_quality(r, e, l):
    seen = pd.concat([t[["node_id", "lost_before"]] for t in (r, e, l)])
    out = seen.groupby("node_id", sort=True).agg(
        rows_seen=("lost_before", "size"), lost_before=("lost_before", "sum")
    )
    return out.reset_index()


def load_outages(l):
    x = l[~l["powered"]]
    out = x.groupby(["node_id", "cause"], sort=True).size().rename("outages")
    return out.reset_index()


def sizing_inputs(r):
    supplied = (r["cutoff_ms"] + r["stalled_ms"] == 0) & (r["output_uv_mean"] > 0)
    volts = r["output_uv_mean"].astype("float64") / 1e6
    x = pd.DataFrame(
        {
            "node_id": r["node_id"],
            "supplied_ms": np.where(supplied, r["interval_ms"], 0),
            "supplied_nj": np.where(supplied, r["delivered_nj"], 0),
            "sleep_w": np.where(supplied & (r["output_na_min"] > 0), volts * (r["output_na_min"] / 1e9), np.nan),
            "active_w": np.where(supplied, volts * (r["output_na_max"] / 1e9), np.nan),
            "output_uv_mean": r["output_uv_mean"],
        }
    )
    g = x.groupby("node_id", sort=True)
    out = pd.DataFrame(index=g.size().index)
    ms, nj = g["supplied_ms"].sum(), g["supplied_nj"].sum()
    out["load_w"] = np.where(ms > 0, nj / 1e9 / (ms / 1e3), 0.0)
    out["sleep_w"] = g["sleep_w"].min()
    out["active_w"] = g["active_w"].max().fillna(0.0)
    out["output_v_max"] = g["output_uv_mean"].max() / 1e6
    return out.reset_index()


def main():
    dataset = sys.argv[1]
    r = pd.read_parquet(f"{dataset}/reports")
    e = pd.read_parquet(f"{dataset}/events")
    l = pd.read_parquet(f"{dataset}/loads")
    answers = {
        "converter_outages": converter_outages(r, e, l),
        "daily_budget": daily_budget(r),
        "efficiency_by_input": efficiency_by_input(r),
        "link_quality": link_quality(r, e, l),
        "load_outages": load_outages(l),
        "node_totals": node_totals(r),
        "sizing_inputs": sizing_inputs(r),
    }
    print(json.dumps({"pandas": {name: rows(frame) for name, frame in answers.items()}}))


if __name__ == "__main__":
    main()
