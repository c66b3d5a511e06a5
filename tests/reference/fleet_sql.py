"""Runs the report's SQL (host/sql/*.sql) over a Parquet dataset written by
`gleaner export --dataset`, on DuckDB and, with --spark, on Spark in local
mode; also reads the dataset with pandas and Polars and checks that time and
energy columns arrive as timestamps and integers with no casts.

fleet_sql.py DATASET SQL_DIR [--spark]
prints JSON {"duckdb": {query: [row, ...]}, "spark": {...},
             "readers": {"pandas": {...}, "polars": {...}}}
fleet_sql.py DATASET SQL_DIR --engine duckdb|spark
runs one engine only and prints its answers (for the fleet benchmark).
"""
import json
import os
import sys
from pathlib import Path

import duckdb

TABLES = ["reports", "events", "loads"]


def queries(sql_dir):
    return {p.stem: p.read_text() for p in sorted(Path(sql_dir).glob("*.sql"))}


def plain(value):
    """JSON-friendly values: Decimals and numpy numbers to int or float."""
    if value is None or isinstance(value, (bool, int, float, str)):
        return value
    try:
        as_int = int(value)
        if as_int == value:
            return as_int
    except (TypeError, ValueError):
        pass
    return float(value)


def on_duckdb(dataset, sql):
    con = duckdb.connect()
    for table in TABLES:
        con.execute(
            f"CREATE VIEW {table} AS SELECT * FROM read_parquet("
            f"'{dataset}/{table}/**/*.parquet', hive_partitioning = true, union_by_name = true)"
        )
    out = {}
    for name, text in sql.items():
        cur = con.execute(text)
        cols = [d[0] for d in cur.description]
        out[name] = [dict(zip(cols, map(plain, row))) for row in cur.fetchall()]
    return out


def on_spark(dataset, sql):
    os.environ.setdefault("PYSPARK_PYTHON", sys.executable)
    from pyspark.sql import SparkSession

    spark = (
        SparkSession.builder.master("local[2]")
        .appName("gleaner-fleet-sql")
        .config("spark.ui.enabled", "false")
        .config("spark.sql.session.timeZone", "UTC")
        .config("spark.sql.shuffle.partitions", "4")
        .getOrCreate()
    )
    spark.sparkContext.setLogLevel("ERROR")
    try:
        for table in TABLES:
            spark.read.parquet(f"{dataset}/{table}").createOrReplaceTempView(table)
        out = {}
        for name, text in sql.items():
            rows = spark.sql(text).collect()
            out[name] = [{k: plain(v) for k, v in r.asDict().items()} for r in rows]
        types = dict(spark.table("reports").dtypes)
        out["_types"] = {k: types[k] for k in ["host_time", "drawn_nj", "stored_nj", "boot"]}
        return out
    finally:
        spark.stop()


def readers(dataset):
    import pandas as pd
    import polars as pl

    frame = pd.read_parquet(f"{dataset}/reports")
    pandas = {
        "host_time": str(frame["host_time"].dtype),
        "drawn_nj": str(frame["drawn_nj"].dtype),
        "stored_nj": str(frame["stored_nj"].dtype),
        "rows": len(frame),
    }
    lazy = pl.scan_parquet(f"{dataset}/reports/**/*.parquet", hive_partitioning=True)
    schema = lazy.collect_schema()
    polars = {
        "host_time": str(schema["host_time"]),
        "drawn_nj": str(schema["drawn_nj"]),
        "stored_nj": str(schema["stored_nj"]),
        "rows": lazy.select(pl.len()).collect().item(),
    }
    return {"pandas": pandas, "polars": polars}


def main():
    dataset, sql_dir = sys.argv[1], sys.argv[2]
    sql = queries(sql_dir)
    if "--engine" in sys.argv:
        engine = sys.argv[sys.argv.index("--engine") + 1]
        run = {"duckdb": on_duckdb, "spark": on_spark}[engine]
        print(json.dumps({engine: run(dataset, sql)}))
        return
    result = {"duckdb": on_duckdb(dataset, sql), "readers": readers(dataset)}
    if "--spark" in sys.argv[3:]:
        result["spark"] = on_spark(dataset, sql)
    print(json.dumps(result))


if __name__ == "__main__":
    main()
