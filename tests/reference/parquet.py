"""Reads the Parquet export with pyarrow and with DuckDB; prints the totals
both compute, so they can be compared with the report.

parquet.py PREFIX
"""
import json
import sys

import duckdb
import pyarrow.compute as pc
import pyarrow.parquet as pq

prefix = sys.argv[1]
t = pq.read_table(prefix + "-reports.parquet")
arrow = {
    "rows": t.num_rows,
    "drawn_nj": pc.sum(t["drawn_nj"]).as_py(),
    "delivered_nj": pc.sum(t["delivered_nj"]).as_py(),
    "cutoff_ms": pc.sum(t["cutoff_ms"]).as_py(),
}
row = duckdb.connect().execute(
    f"select count(*), sum(drawn_nj), sum(delivered_nj), sum(cutoff_ms) from read_parquet('{prefix}-reports.parquet')"
).fetchone()
events = duckdb.connect().execute(f"select count(*) from read_parquet('{prefix}-events.parquet')").fetchone()[0]
print(json.dumps({"pyarrow": arrow, "duckdb": {"rows": row[0], "drawn_nj": int(row[1]), "delivered_nj": int(row[2]), "cutoff_ms": int(row[3])}, "events": events}))
