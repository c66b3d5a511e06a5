"""The report's totals with DuckDB over the Parquet export.

totals_duckdb.py PREFIX
"""
import json
import sys

import duckdb

prefix = sys.argv[1]
con = duckdb.connect()
row = con.execute(
    f"""select sum(drawn_nj) / 1e9, sum(delivered_nj) / 1e9, sum(stored_nj) / 1e9,
               sum(idle_ms) / 1e3, sum(cold_start_ms) / 1e3, sum(harvesting_ms) / 1e3,
               sum(sagging_ms) / 1e3, sum(cutoff_ms) / 1e3, sum(stalled_ms) / 1e3
        from read_parquet('{prefix}-reports.parquet')"""
).fetchone()
outages = con.execute(f"select count(*) from read_parquet('{prefix}-events.parquet') where to_state in ('cutoff', 'stalled')").fetchone()[0]
first = con.execute(f"select state from read_parquet('{prefix}-reports.parquet') limit 1").fetchone()[0]
outages += int(first in ("cutoff", "stalled"))
drawn, delivered, stored = row[0], row[1], row[2]
print(json.dumps({"drawn_j": drawn, "delivered_j": delivered, "efficiency": (delivered + stored) / drawn if drawn else None,
                  "states_s": dict(zip(["idle", "cold_start", "harvesting", "sagging", "cutoff", "stalled"], row[3:])), "outages": outages}))
