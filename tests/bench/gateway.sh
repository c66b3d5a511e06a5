#!/usr/bin/env bash
# Gateway benchmark: NODES virtual nodes (invented scenarios, in turn) on
# pseudo-terminals, running SPEED times faster than real time, recorded by
# one `gleaner record` through a pattern for SECONDS_RUN seconds. One node is
# frozen (SIGSTOP) for a fifth of the run and one is restarted on a new
# device path behind the same link (a replug). Prints, per node, frames
# recorded, frames lost and reboots from each log, and the recorder's CPU
# share and peak memory.
#
#   NODES=16 SECONDS_RUN=60 SPEED=600 bash tests/bench/gateway.sh
#
# Not run in CI (the test suite records three nodes and a SIGHUP rotation).
set -euo pipefail
cd "$(dirname "$0")/../.."
nodes=${NODES:-16}
run_s=${SECONDS_RUN:-60}
speed=${SPEED:-600}
work=$(mktemp -d)
pids=()
cleanup() { for p in "${pids[@]}"; do kill "$p" 2>/dev/null || true; done; rm -rf "$work"; }
trap cleanup EXIT
cargo build --release --locked -q -p gleaner
bin=$PWD/target/release/gleaner
scenarios=($($bin sim list | awk '{print $1}'))
mkdir -p "$work/by-id" "$work/logs"
serve() { # index
  local name=${scenarios[$(($1 % ${#scenarios[@]}))]}
  "$bin" sim serve "$name" --speed "$speed" --boot-id "$((100 + $1))" \
    --link "$work/by-id/node-$(printf %02d "$1")" > "$work/serve-$1.out" 2>&1 &
  pids[$1]=$!
}
for i in $(seq 0 $((nodes - 1))); do serve "$i"; done
for i in $(seq 0 $((nodes - 1))); do
  until [ -e "$work/by-id/node-$(printf %02d "$i")" ]; do sleep 0.1; done
done
/usr/bin/time -f "%e %U %S %M" -o "$work/time" \
  "$bin" record --dir "$work/logs" --status-every 0 --duration "$run_s" "$work/by-id/node-*" 2> "$work/record.err" &
recorder=$!
sleep "$(awk "BEGIN{print $run_s / 5}")"
kill -STOP "${pids[0]}"            # node 00 freezes (silent, port open)
sleep "$(awk "BEGIN{print $run_s / 5}")"
kill -CONT "${pids[0]}"
if [ "$nodes" -gt 1 ]; then        # node 01 is unplugged and plugged back in
  kill "${pids[1]}"; wait "${pids[1]}" 2>/dev/null || true
  rm -f "$work/by-id/node-01"; sleep 1; serve 1
fi
wait "$recorder"
read -r elapsed user sys peak < "$work/time"
printf '%-34s %8s %6s %8s\n' log frames lost reboots
total_lost=0
for log in "$work"/logs/*.gleanlog; do
  "$bin" report --json "$log" > "$work/r.json"
  read -r frames lost reboots < <(python3 -c 'import json,sys; l=json.load(open(sys.argv[1]))["link"]; print(l["frames"], l["lost_frames"], l["reboots"])' "$work/r.json")
  printf '%-34s %8s %6s %8s\n' "$(basename "$log")" "$frames" "$lost" "$reboots"
  total_lost=$((total_lost + lost))
done
echo "nodes $nodes, ${run_s} s at ${speed}x (up to $(awk "BEGIN{printf \"%.1f\", $run_s * $speed / 3600}") simulated hours; a scenario ends after its own 2 to 24 h and its node goes quiet); frames lost in all logs: $total_lost"
echo "recorder: CPU $(awk "BEGIN{printf \"%.1f\", 100 * ($user + $sys) / $elapsed}") % of one core, peak memory $peak KiB"
grep -c "stopped:" "$work/record.err" | sed 's/^/ports that stopped cleanly: /'
