#!/usr/bin/env bash
# Fleet benchmark, side by side in one run: an invented fleet of virtual nodes
# (one report per 10 s) recorded into logs, then the report's questions asked
# three ways: `gleaner report` over the logs (every core), host/sql on DuckDB
# over the Parquet dataset, and host/sql on Spark in local mode over the same
# dataset. Prints seconds, peak memory and sizes for each fleet size.
#
#   NODES="10 50" DAYS=30 bash tests/bench/fleet.sh
#
# Needs the Python reference tools (`bash .ci/run` makes .venv). Not run in
# CI (the test suite checks the answers on a small fleet).
set -euo pipefail
cd "$(dirname "$0")/../.."
nodes_list=${NODES:-"10 50"}
days=${DAYS:-30}
py=${GLEANER_PYTHON:-.venv/bin/python}
[ -x "$py" ] || { echo "no $py: run bash .ci/run once" >&2; exit 1; }
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
cargo build --release --locked -q -p gleaner
bin=target/release/gleaner
measure() { # command...: prints "seconds peak_kib"
  /usr/bin/time -f "%e %M" -o "$work/time" "$@" >/dev/null 2>"$work/err" || { cat "$work/err" >&2; return 1; }
  cat "$work/time"
}
echo "fleet: $days days per node, one report per 10 s, $(nproc) cores"
printf '%-6s %-28s %10s %12s\n' nodes what seconds "peak KiB"
for nodes in $nodes_list; do
  logs="$work/logs-$nodes"; data="$work/data-$nodes"
  row() { printf '%-6s %-28s %10s %12s\n' "$nodes" "$1" "${2% *}" "${2#* }"; }
  row "simulate (sim fleet)" "$(measure "$bin" sim fleet --nodes "$nodes" --days "$days" --dir "$logs")"
  row "export --dataset" "$(measure "$bin" export --dataset "$data" "$logs")"
  row "gleaner report (all logs)" "$(measure "$bin" report --json "$logs"/*.gleanlog)"
  row "SQL on DuckDB" "$(measure "$py" tests/reference/fleet_sql.py "$data" host/sql --engine duckdb)"
  row "SQL on Spark (local[2])" "$(measure "$py" tests/reference/fleet_sql.py "$data" host/sql --engine spark)"
  log_bytes=$(du -sb "$logs" | cut -f1); data_bytes=$(du -sb "$data" | cut -f1)
  echo "$nodes nodes: logs $log_bytes bytes, dataset $data_bytes bytes ($(awk "BEGIN{printf \"%.2f\", $data_bytes / $log_bytes}") of the logs)"
done
