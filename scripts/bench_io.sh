#!/bin/sh
# bench_io.sh: tripass's TIFF streaming throughput beside cp of the same file, in one run
# on one machine (issue 2 asks for at least half of cp's throughput).
#
# It builds the io/tiffstack test binary, runs BenchmarkReadWrite/none (a 512×512×256
# uint16 stack, 128 MiB: write, read, and copy = read one file while writing another,
# as `tripass convert` does), then times cp of the very file the benchmark wrote, with
# and without an fsync of the copy. tripass's writer syncs before it renames the
# finished file into place, so cp+sync is the like-for-like figure for write and copy;
# write-nosync is the same write path without that fsync, against plain cp (which, with
# coreutils 9, copies inside the kernel with copy_file_range). Files stay warm in the
# page cache for both sides; on a busy machine run it twice.
#
# Usage: scripts/bench_io.sh [runs]      (from the repository root; default 5 runs)
set -eu
runs=${1:-5}
work=$(mktemp -d "${TMPDIR:-/tmp}/tripass-bench-io.XXXXXX")
trap 'rm -rf "$work"' EXIT INT TERM

go test -c -o "$work/tiffstack.test" ./io/tiffstack
echo "== tripass (go test -bench BenchmarkReadWrite/none, $runs runs each)"
TRIPASS_BENCH_DIR=$work "$work/tiffstack.test" -test.run '^$' -test.bench 'ReadWrite/none' \
	-test.benchtime "${runs}x" | tee "$work/bench.txt" | grep Benchmark

src=$work/bench-none.tif
bytes=$(stat -c %s "$src")
mbps() { # bytes seconds -> MB/s (10^6 bytes, as go test reports)
	awk -v b="$1" -v s="$2" 'BEGIN { printf "%.1f", b / s / 1e6 }'
}
timeit() { # command... -> mean seconds over $runs runs
	total=0
	i=0
	while [ "$i" -lt "$runs" ]; do
		rm -f "$work/copy.tif"
		t0=$(date +%s.%N)
		"$@"
		t1=$(date +%s.%N)
		total=$(awk -v a="$total" -v b="$t0" -v c="$t1" 'BEGIN { print a + c - b }')
		i=$((i + 1))
	done
	awk -v a="$total" -v n="$runs" 'BEGIN { print a / n }'
}
cat "$src" >/dev/null # warm the cache as the benchmark left it
cp_s=$(timeit cp "$src" "$work/copy.tif")
cpsync_s=$(timeit sh -c "cp '$src' '$work/copy.tif' && sync '$work/copy.tif'")
cp_mb=$(mbps "$bytes" "$cp_s")
cpsync_mb=$(mbps "$bytes" "$cpsync_s")
echo "== cp of the same file ($bytes bytes, $runs runs each)"
echo "cp            $cp_mb MB/s"
echo "cp + sync     $cpsync_mb MB/s"

get() { awk -v n="$1" '$1 ~ n { for (i = 1; i <= NF; i++) if ($(i+1) == "MB/s") print $i }' "$work/bench.txt"; }
w=$(get 'none/write-2')
wn=$(get 'none/write-nosync')
r=$(get 'none/read')
c=$(get 'none/copy')
echo "== ratios (tripass / cp)"
awk -v w="$w" -v wn="$wn" -v r="$r" -v c="$c" -v cp="$cp_mb" -v cs="$cpsync_mb" 'BEGIN {
	printf "copy          %7.1f MB/s  %.2f× cp, %.2f× cp+sync\n", c, c / cp, c / cs
	printf "write         %7.1f MB/s  %.2f× cp, %.2f× cp+sync\n", w, w / cp, w / cs
	printf "write-nosync  %7.1f MB/s  %.2f× cp\n", wn, wn / cp
	printf "read          %7.1f MB/s  %.2f× cp\n", r, r / cp
}'
