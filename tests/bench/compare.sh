#!/usr/bin/env bash
# Gleaner benchmarks, side by side in one run. Prints every figure as a ratio
# measured here and now (the machine is shared; absolute times drift), and
# writes tests/bench/RESULTS.md. `--tiny` runs everything on a small input
# (CI uses it to check the script works; its figures mean nothing).
set -euo pipefail
cd "$(dirname "$0")/../.."
days=30
rounds=2
tiny=0
if [ "${1:-}" = "--tiny" ]; then days=0.02; rounds=1; tiny=1; fi
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT

cargo build --release --locked -q -p gleaner -p gleaner-protocol -p gleaner-firmware --examples --bins
bin=target/release/gleaner
# The peers run from the reference tools' venv (`bash .ci/run` makes it).
py=${GLEANER_PYTHON:-.venv/bin/python}
if [ ! -x "$py" ]; then
  python3 -m venv .venv
  .venv/bin/pip install -q --disable-pip-version-check -r tests/reference/requirements.txt
  py=.venv/bin/python
fi

echo "== 1. analysis speed: a ${days}-day log at one report per second"
# Every peer answers every question the report answers: host/sql on DuckDB,
# the same rules in pandas (questions_pandas.py), both on the Parquet dataset
# a user would export; agree.py checks that all three give the same figures.
log="$work/run.gleanlog"
$bin sim synthetic --days "$days" --out "$log" >/dev/null
measure() { # name, command...: prints "seconds peak_kib"
  local name=$1; shift
  /usr/bin/time -f "%e %M" -o "$work/$name.time" "$@" >/dev/null 2>&1
  cat "$work/$name.time"
}
export_out=$(measure export "$bin" export --dataset "$work/dataset" "$log")
declare -A best_t best_m
for _ in $(seq "$rounds"); do
  for name in read report report-all duckdb pandas; do
    case $name in
      read) out=$(measure read cat "$log") ;;
      report) out=$(measure report "$bin" report "$log") ;;
      report-all) out=$(measure report-all "$bin" report --read-all "$log") ;;
      duckdb) out=$(measure duckdb "$py" tests/reference/fleet_sql.py "$work/dataset" host/sql --engine duckdb) ;;
      pandas) out=$(measure pandas "$py" tests/bench/questions_pandas.py "$work/dataset") ;;
    esac
    t=${out% *}; m=${out#* }
    if [ -z "${best_t[$name]:-}" ] || awk "BEGIN{exit !($t < ${best_t[$name]})}"; then best_t[$name]=$t; fi
    best_m[$name]=$m
  done
done
"$bin" report "$log" --json > "$work/ours.json"
# From the log's last checkpoint or from every record: the same report, byte for byte.
"$bin" report "$log" --json --read-all > "$work/ours-all.json"
cmp -s "$work/ours.json" "$work/ours-all.json" || { echo "report --read-all differs from report" >&2; exit 1; }
"$py" tests/reference/fleet_sql.py "$work/dataset" host/sql --engine duckdb > "$work/duckdb.json"
"$py" tests/bench/questions_pandas.py "$work/dataset" > "$work/pandas.json"
agreed=$("$py" tests/bench/agree.py "$work/ours.json" "$work/duckdb.json" "$work/pandas.json")
echo "$agreed"
ratio() { awk "BEGIN{a=$1; b=$2; if (b <= 0) b = 0.001; printf \"%.2f\", a / b}"; }
reports=$(python3 -c 'import json,sys; print(json.load(open(sys.argv[1]))["message_counts"]["report"])' "$work/ours.json")
echo "reports: $reports; log: $(stat -c %s "$log") bytes; export to Parquet: ${export_out% *} s"
for n in read report report-all duckdb pandas; do echo "  $n: ${best_t[$n]} s, peak ${best_m[$n]} KiB"; done
echo "  report / read = $(ratio "${best_t[report]}" "${best_t[read]}") (report-all / read = $(ratio "${best_t[report-all]}" "${best_t[read]}"))"
echo "  duckdb / report = $(ratio "${best_t[duckdb]}" "${best_t[report]}") (above 1: the report is faster; duckdb / report-all = $(ratio "${best_t[duckdb]}" "${best_t[report-all]}"))"
echo "  pandas / report = $(ratio "${best_t[pandas]}" "${best_t[report]}")"

echo "== 2. wire efficiency"
target/release/examples/wire_sizes | tee "$work/wire.txt"

echo "== 3. firmware cost"
node_bytes=$(target/release/examples/samples 1000 | sed -n 's/.*node state \([0-9]*\) bytes/\1/p')
per_sample="-"
if command -v valgrind >/dev/null 2>&1; then
  count() { valgrind --tool=callgrind --callgrind-out-file="$work/cg.$1" target/release/examples/samples "$1" 2>&1 | sed -n 's/.*Collected : \([0-9]*\).*/\1/p'; }
  small=$([ $tiny = 1 ] && echo 2000 || echo 20000)
  a=$(count "$small"); b=$(count $((2 * small)))
  per_sample=$(( (b - a) / small ))
fi
echo "instructions per sample: $per_sample; Node state: $node_bytes bytes (with its 288-byte simulated flash)"
sizes=""
llvm_size="$(rustc --print sysroot)/lib/rustlib/$(rustc -vV | sed -n 's/^host: //p')/bin/llvm-size"
for board in firmware/boards/*/; do
  elf=$(find "$board/target/thumbv7em-none-eabihf/release" -maxdepth 1 -type f -perm -u+x ! -name '*.d' 2>/dev/null | head -n 1)
  if [ -x "$llvm_size" ] && [ -n "$elf" ]; then
    read -r text data bss _ < <("$llvm_size" "$elf" | tail -n 1)
    sizes+="| $(basename "$board") | $((text + data)) | $((data + bss)) |"$'\n'
  fi
done

echo "== 4. decoder throughput"
decoder="(not measured with --tiny)"
if [ $tiny = 0 ]; then
  cargo bench --locked -q -p gleaner-protocol --bench decoder -- --noplot 2>/dev/null | tee "$work/decoder.txt" | grep -E "time:|thrpt:" || true
  decoder=$(grep -A2 "decode 1000" "$work/decoder.txt" | grep -o 'time: *\[[^]]*\]' | head -n 1)" vs copy "$(grep -A2 "copy the same" "$work/decoder.txt" | grep -o 'time: *\[[^]]*\]' | head -n 1)
fi

if [ $tiny = 0 ]; then
  {
    echo "# Benchmark results"
    echo
    echo "Written by \`tests/bench/compare.sh\` on $(date -u +%Y-%m-%d) on $(nproc) cores of \"$(sed -n 's/^model name\s*: //p' /proc/cpuinfo | head -n 1)\". Do not edit by hand."
    echo
    echo "## 1. Analysis of a ${days}-day log at 1 Hz ($reports reports, $(stat -c %s "$log") bytes)"
    echo
    echo "| what | seconds (best of $rounds) | peak memory KiB |"
    echo "|---|---|---|"
    for n in read report report-all duckdb pandas; do echo "| $n | ${best_t[$n]} | ${best_m[$n]} |"; done
    echo "| export to the Parquet dataset (once, before DuckDB or pandas) | ${export_out% *} | ${export_out#* } |"
    echo
    echo "report / read = $(ratio "${best_t[report]}" "${best_t[read]}"), duckdb / report = $(ratio "${best_t[duckdb]}" "${best_t[report]}"), pandas / report = $(ratio "${best_t[pandas]}" "${best_t[report]}"); report-all / read = $(ratio "${best_t[report-all]}" "${best_t[read]}"), duckdb / report-all = $(ratio "${best_t[duckdb]}" "${best_t[report-all]}"). \"read\" is \`cat\` of the file (from the page cache). \"report\" goes on from the log's last checkpoint after checking the CRC of every byte before it; \"report-all\" (\`--read-all\`) decodes every record; their JSON is the same, byte for byte (docs/log-format.md). DuckDB runs host/sql and pandas the same seven questions (tests/bench/questions_pandas.py), both on the Parquet dataset exported from the log; both times include starting Python. $agreed."
    echo
    echo "## 2. Wire efficiency"
    echo
    echo '```'
    cat "$work/wire.txt"
    echo '```'
    echo
    echo "## 3. Firmware cost"
    echo
    echo "Instructions per Node sample (callgrind, host x86-64): $per_sample. Node state: $node_bytes bytes including a 288-byte simulated flash."
    echo
    echo "| board | flash bytes | static RAM bytes |"
    echo "|---|---|---|"
    printf '%s' "$sizes"
    echo
    echo "## 4. Decoder"
    echo
    echo "1000 report frames: $decoder"
  } > tests/bench/RESULTS.md
  echo "wrote tests/bench/RESULTS.md"
fi
echo "bench: done"
