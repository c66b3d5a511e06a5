#!/usr/bin/env bash
# Gateway soak: NODES virtual nodes (invented scenarios, each its own
# identity, SIM_DAYS simulated days at SPEED times real time) on
# pseudo-terminals behind by-id style links (a node holds its time while
# its line is full, so every frame it sends while plugged in is on the line),
# recorded by one `gleaner record`
# (daily logs, gzip, a free-space floor) while faults are made:
#   - the recorder killed with SIGKILL KILLS times and started again;
#   - REPLUGS unplug-and-replug events of random nodes (SIGUSR1 to `sim serve`:
#     a new pseudo-terminal behind the same link, the node's time runs on);
#   - node 01 moved to another path (SIGUSR2: its link becomes node-01-moved);
#   - node 03's line turned to garbage for GARBAGE_S seconds (another program
#     on its path sending random bytes), then the node back (rebooted);
#   - the logs' disk (a tmpfs of DISK_MB) filled to under the free-space floor
#     (FLOOR_MB), then freed: the oldest closed logs go, by design;
#   - the recorder's clock (libfaketime) stepped back an hour, then forward a day.
# Then every log is read: it must open, hold no damage but a torn tail where
# the recorder was killed, lose no frame while its port was connected, and
# keep every node's frames in order. Prints per node and in all, the
# recorder's CPU share and peak memory, and exits non-zero if a check fails.
#
#   NODES=16 SIM_DAYS=10 SPEED=1800 bash tests/bench/soak.sh      # the full run
#   PROFILE=debug NODES=4 SIM_DAYS=0.25 SPEED=600 KILLS=3 REPLUGS=6 GARBAGE_S=5 \
#     bash tests/bench/soak.sh                                     # CI's small run
#
# Needs root (to mount the tmpfs) and libfaketime (Debian: faketime).
set -euo pipefail
cd "$(dirname "$0")/../.."
nodes=${NODES:-16}
days=${SIM_DAYS:-10}
speed=${SPEED:-1800}
kills=${KILLS:-20}
replugs=${REPLUGS:-100}
garbage_s=${GARBAGE_S:-60}
disk_mb=${DISK_MB:-256}
floor_mb=${FLOOR_MB:-4}
faketime_lib=${FAKETIME_LIB:-/usr/lib/x86_64-linux-gnu/faketime/libfaketimeMT.so.1}
run_s=$(awk "BEGIN{printf \"%d\", $days * 86400 / $speed}")
day_s=$(awk "BEGIN{printf \"%d\", 86400 / $speed}")
[ -e "$faketime_lib" ] || { echo "libfaketime not found at $faketime_lib (apt-get install faketime)"; exit 2; }
[ "$nodes" -ge 4 ] || [ "$garbage_s" -eq 0 ] || echo "(fewer than 4 nodes: no garbage node)"

work=$(mktemp -d)
declare -A serving=()
recorder_time=
cleanup() {
  for p in "${serving[@]}"; do kill "$p" 2>/dev/null || true; done
  [ -n "$recorder_time" ] && kill "$recorder_time" 2>/dev/null || true
  pkill -f "gleaner-soak-garbage" 2>/dev/null || true
  sleep 0.5
  if [ -n "${KEEP_WORK:-}" ]; then echo "kept $work (umount $work/disk when done)"; return; fi
  umount "$work/disk" 2>/dev/null || true
  rm -rf "$work"
}
trap cleanup EXIT
case ${PROFILE:-release} in
  release) cargo build --release --locked -q -p gleaner; bin=$PWD/target/release/gleaner ;;
  *) cargo build --locked -q -p gleaner; bin=$PWD/target/debug/gleaner ;;
esac
mkdir -p "$work/by-id" "$work/disk"
mount -t tmpfs -o "size=${disk_mb}m" tmpfs "$work/disk" || { echo "mounting a tmpfs needs root"; exit 2; }
logs=$work/disk/logs
mkdir -p "$logs"

# One scenario file per node: the built-ins in turn, renamed (so each node
# has its own id) and lengthened to the run.
builtins=($($bin sim list | awk '{print $1}'))
id() { printf %02d "$1"; }
for i in $(seq 0 $((nodes - 1))); do
  $bin sim show "${builtins[$((i % ${#builtins[@]}))]}" |
    sed -e "s/^name = .*/name = \"soak-$(id "$i")\"/" \
        -e "s/^duration_h = .*/duration_h = $(awk "BEGIN{print $days * 24}")/" > "$work/scenario-$(id "$i").toml"
done
serve() { # index, output file
  "$bin" sim serve "$work/scenario-$(id "$1").toml" --speed "$speed" --boot-id "$((100 + $1))" --wait-for-reader \
    --link "$work/by-id/node-$(id "$1")" > "$2" 2>&1 &
  serving[$1]=$!
}
for i in $(seq 0 $((nodes - 1))); do serve "$i" "$work/serve-$(id "$i").out"; done
for i in $(seq 0 $((nodes - 1))); do
  until [ -e "$work/by-id/node-$(id "$i")" ]; do sleep 0.1; done
done

echo "+0" > "$work/clock"
start_recorder() {
  /usr/bin/time -a -f "%e %U %S %M" -o "$work/time" \
    env LD_PRELOAD="$faketime_lib" FAKETIME_TIMESTAMP_FILE="$work/clock" FAKETIME_NO_CACHE=1 \
    FAKETIME_DONT_FAKE_MONOTONIC=1 "$bin" record --dir "$logs" --status-every 30s --rotate daily --compress \
    --keep-days 30 --free-floor-mb "$floor_mb" "$work/by-id/node-*" 2>> "$work/record.err" &
  recorder_time=$!
}
recorder_pid() { pgrep -P "$recorder_time" || true; }
start_recorder

# Garbage on a path: random bytes from a pseudo-terminal of its own.
garbage() { # link, seconds
  python3 - "$1" "$2" gleaner-soak-garbage <<'PY' &
import fcntl, os, sys, time
link, seconds = sys.argv[1], float(sys.argv[2])
master, slave = os.openpty()
fcntl.fcntl(master, fcntl.F_SETFL, fcntl.fcntl(master, fcntl.F_GETFL) | os.O_NONBLOCK)
os.symlink(os.ttyname(slave), link)
end = time.time() + seconds
while time.time() < end:
    try:
        os.write(master, os.urandom(256))
    except (BlockingIOError, OSError):
        pass
    time.sleep(0.02)
os.unlink(link)
PY
  wait $!
}

at() { awk "BEGIN{printf \"%d\", $1 * $run_s}"; }
fill_at=$(at 0.25); move_at=$(at 0.3); garbage_at=$(at 0.4); back_at=$(at 0.6); forward_at=$(at 0.8)
events_replug=0; events_kill=0; garbage_done=0
RANDOM=7
for t in $(seq 1 "$run_s"); do
  sleep 1
  if [ "$kills" -gt 0 ] && [ $((t % (run_s / (kills + 1)))) -eq 0 ] && [ "$events_kill" -lt "$kills" ]; then
    kill -9 "$(recorder_pid)" 2>/dev/null || true
    wait "$recorder_time" 2>/dev/null || true
    events_kill=$((events_kill + 1))
    start_recorder
  fi
  if [ "$replugs" -gt 0 ] && [ $((t % (run_s / replugs > 0 ? run_s / replugs : 1))) -eq 0 ] && [ "$events_replug" -lt "$replugs" ]; then
    n=$((RANDOM % nodes))
    [ "$n" -eq 3 ] && [ "$nodes" -ge 4 ] && n=0
    kill -USR1 "${serving[$n]}" 2>/dev/null && events_replug=$((events_replug + 1))
  fi
  if [ "$t" -eq "$day_s" ] || { [ "$day_s" -gt 0 ] && [ $((t % day_s)) -eq 0 ]; }; then
    kill -HUP "$(recorder_pid)" 2>/dev/null || true       # a new simulated day
  fi
  [ "$t" -eq "$move_at" ] && [ "$nodes" -ge 2 ] && kill -USR2 "${serving[1]}"
  if [ "$t" -eq "$garbage_at" ] && [ "$nodes" -ge 4 ] && [ "$garbage_s" -gt 0 ]; then
    kill "${serving[3]}"; wait "${serving[3]}" 2>/dev/null || true
    garbage "$work/by-id/node-03" "$garbage_s" && garbage_done=1
    serve 3 "$work/serve-03-after-garbage.out"
  fi
  if [ "$t" -eq "$fill_at" ]; then
    # Fill the logs' disk to half the floor, hold it 15 s, free it: the
    # recorder removes its oldest closed logs to get back above the floor.
    free_mb=$(df -m --output=avail "$work/disk" | tail -1)
    dd if=/dev/zero of="$work/disk/ballast" bs=1M count=$((free_mb - floor_mb / 2)) 2>/dev/null || true
    sleep 15
    rm -f "$work/disk/ballast"
  fi
  [ "$t" -eq "$back_at" ] && echo "-1h" > "$work/clock"
  [ "$t" -eq "$forward_at" ] && echo "+23h" > "$work/clock"
done
kill -TERM "$(recorder_pid)"; wait "$recorder_time" || true; recorder_time=
for i in "${!serving[@]}"; do kill -TERM "${serving[$i]}"; done
for i in "${!serving[@]}"; do wait "${serving[$i]}" 2>/dev/null || true; done
serving=()

echo "nodes $nodes, $days simulated days at ${speed}x ($run_s s); faults: $events_kill recorder kills, $events_replug replugs, node 01 moved, $([ $garbage_done = 1 ] && echo "node 03 garbage for ${garbage_s} s" || echo "no garbage"), disk filled under the floor and freed, clock -1 h then +1 d"
python3 tests/bench/soak_check.py "$bin" "$logs" "$work" "$nodes"
grep -E '^[0-9.]+ [0-9.]+ [0-9.]+ [0-9]+$' "$work/time" | awk '{e+=$1; c+=$2+$3; if ($4>m) m=$4} END {printf "recorder: CPU %.1f %% of one core over %d runs, peak memory %d KiB\n", 100*c/e, NR, m}'
grep -c "removed .*free space" "$work/record.err" | sed 's/^/logs removed under the free-space floor: /' || true
grep -c "recording paused" "$work/record.err" | sed 's/^/pauses for a full disk: /' || true
grep -c "came back on" "$work/record.err" | sed 's/^/nodes gone on in their own log on a new path: /' || true
