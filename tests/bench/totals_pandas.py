"""The report's totals from the CSV export with pandas (the usual alternative).

totals_pandas.py PREFIX: reads PREFIX-reports.csv and PREFIX-events.csv;
prints energy drawn and delivered (J), efficiency, seconds per state and the
number of outages.
"""
import json
import sys

import pandas as pd

prefix = sys.argv[1]
r = pd.read_csv(prefix + "-reports.csv")
e = pd.read_csv(prefix + "-events.csv")
drawn = r["drawn_nj"].sum() / 1e9
delivered = r["delivered_nj"].sum() / 1e9
stored = r["stored_nj"].sum() / 1e9
states = {c[:-3]: r[c].sum() / 1e3 for c in ["idle_ms", "cold_start_ms", "harvesting_ms", "sagging_ms", "cutoff_ms", "stalled_ms"]}
# Outages: transitions into cutoff or stalled, plus one already under way
# when the log starts (as the report counts them).
outages = int(e["to"].isin(["cutoff", "stalled"]).sum()) + int(r["state"].iloc[0] in ("cutoff", "stalled"))
print(json.dumps({"drawn_j": drawn, "delivered_j": delivered, "efficiency": (delivered + stored) / drawn if drawn else None, "states_s": states, "outages": outages}))
