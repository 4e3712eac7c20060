#!/usr/bin/env bash
# Measures how shards scale on one machine: a Gaussian smoothing of a SIZE³ float32
# stack run whole with --threads 1, against the same job as N=2 tasks with --threads 1
# each, run at the same time as two processes (as a scheduler would place them on two
# cores), plus the join. Reports the best of REPS wall times, their ratio, each
# process's CPU time (user + system) and its peak resident memory (/usr/bin/time). On a
# machine shared with other work the wall times mean little; the CPU time of the
# slower task against the whole run's is what a dedicated core per task would give.
#
#   scripts/bench_shards.sh                 # SIZE=256 SIGMA=2 REPS=3
#   SIZE=384 SIGMA=3 scripts/bench_shards.sh
#   TMPDIR=/dev/shm scripts/bench_shards.sh   # files in memory: no disk in the way
#
# The stack is the synthetic rock core of 'tripass demo', converted to float32.
set -euo pipefail
cd "$(dirname "$0")/.."
export PATH="$PATH:/usr/local/go/bin"
SIZE=${SIZE:-256}
SIGMA=${SIGMA:-2}
REPS=${REPS:-3}
fmt="%e %U %S %M"
[ -x /usr/bin/time ] || { echo "bench_shards: needs /usr/bin/time (Debian package 'time')" >&2; exit 1; }
work=$(mktemp -d "${TMPDIR:-/tmp}/tripass-bench-shards.XXXXXX")
trap 'rm -rf "$work"' EXIT
go build -buildvcs=false -o "$work/tripass" ./cmd/tripass
tp="$work/tripass"
"$tp" demo "$work/demo" --size "$SIZE,$SIZE,$SIZE" -q >/dev/null 2>&1
"$tp" convert "$work/demo/rock-core.tif" "$work/in.tif" --type float32 -q
rm -rf "$work/demo"
job=(smooth "$work/in.tif" --sigma "$SIGMA" --threads 1 -q --overwrite)
now() { date +%s.%N; }
cpu() { awk '{printf "%.3f", $2 + $3}' "$1"; } # user + system seconds
rss() { awk '{printf "%.1f", $4 / 1024}' "$1"; } # peak RSS in MiB

best_whole=; best_shards=; best_join=; cpu_whole=; cpu_shard=
for rep in $(seq "$REPS"); do
  t0=$(now)
  /usr/bin/time -f "$fmt" -o "$work/whole.mem" "$tp" "${job[@]}" "$work/whole.tif"
  t1=$(now)
  /usr/bin/time -f "$fmt" -o "$work/s1.mem" "$tp" "${job[@]}" "$work/out.tif" --shard 1/2 &
  p1=$!
  /usr/bin/time -f "$fmt" -o "$work/s2.mem" "$tp" "${job[@]}" "$work/out.tif" --shard 2/2 &
  p2=$!
  wait "$p1"; wait "$p2"
  t2=$(now)
  /usr/bin/time -f "$fmt" -o "$work/join.mem" "$tp" join "$work/out.tif" -q --overwrite
  t3=$(now)
  cmp "$work/out.tif" "$work/whole.tif" || { echo "bench_shards: joined output differs from the whole run" >&2; exit 1; }
  w=$(echo "$t1 - $t0" | bc); s=$(echo "$t2 - $t1" | bc); j=$(echo "$t3 - $t2" | bc)
  cw=$(cpu "$work/whole.mem"); c1=$(cpu "$work/s1.mem"); c2=$(cpu "$work/s2.mem")
  cs=$(echo "if ($c1 > $c2) $c1 else $c2" | bc)
  printf 'run %d: wall: whole %.2f s, 2 shards %.2f s, join %.2f s; CPU: whole %.2f s, shards %.2f and %.2f s\n' \
    "$rep" "$w" "$s" "$j" "$cw" "$c1" "$c2"
  if [ -z "$cpu_whole" ] || [ "$(echo "$cw < $cpu_whole" | bc)" = 1 ]; then cpu_whole=$cw; fi
  if [ -z "$cpu_shard" ] || [ "$(echo "$cs < $cpu_shard" | bc)" = 1 ]; then cpu_shard=$cs; fi
  if [ -z "$best_whole" ] || [ "$(echo "$w < $best_whole" | bc)" = 1 ]; then best_whole=$w; fi
  if [ -z "$best_shards" ] || [ "$(echo "$s < $best_shards" | bc)" = 1 ]; then best_shards=$s; fi
  if [ -z "$best_join" ] || [ "$(echo "$j < $best_join" | bc)" = 1 ]; then best_join=$j; fi
done
printf 'stack %d³ float32 (%d MiB), Gaussian sigma %s, --threads 1, %d cores, best of %d\n' \
  "$SIZE" $((SIZE * SIZE * SIZE * 4 / 1048576)) "$SIGMA" "$(nproc)" "$REPS"
printf 'whole run:            %6.2f s   peak RSS %s MiB\n' "$best_whole" "$(rss "$work/whole.mem")"
printf '2 shards at once:     %6.2f s   peak RSS %s and %s MiB\n' "$best_shards" "$(rss "$work/s1.mem")" "$(rss "$work/s2.mem")"
printf 'join:                 %6.2f s   peak RSS %s MiB\n' "$best_join" "$(rss "$work/join.mem")"
printf 'wall, shards / whole: %6.3f   (shards + join) / whole: %.3f\n' \
  "$(echo "scale=4; $best_shards / $best_whole" | bc)" "$(echo "scale=4; ($best_shards + $best_join) / $best_whole" | bc)"
printf 'CPU, slower shard / whole: %.3f (%.2f s against %.2f s)\n' \
  "$(echo "scale=4; $cpu_shard / $cpu_whole" | bc)" "$cpu_shard" "$cpu_whole"
echo "load average during the run: $(cut -d' ' -f1-3 /proc/loadavg)"
