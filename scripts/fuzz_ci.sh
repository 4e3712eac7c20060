#!/usr/bin/env bash
# Runs every native Go fuzz target under io/ for a short, bounded time and prints how
# many inputs each one executed. Used by .ci/run; run it longer by hand with
#   FUZZTIME=5m scripts/fuzz_ci.sh
# A crash makes `go test -fuzz` write the input under the package's testdata/fuzz/<Target>/
# and exit non-zero: commit that file, so the input stays a regression test, and fix it.
set -euo pipefail
cd "$(dirname "$0")/.."
fuzztime="${FUZZTIME:-15s}"
parallel="${FUZZPARALLEL:-$(nproc 2>/dev/null || echo 2)}"
status=0
total=0
summary=""
# Each target: the package folder and the function name, found by grep so that a new
# fuzz target is picked up without editing this script.
while IFS=: read -r file _ line; do
  pkg="./$(dirname "$file")"
  name=$(sed -E 's/^func (Fuzz[A-Za-z0-9_]*).*/\1/' <<<"$line")
  log=$(mktemp)
  echo "== fuzz $pkg $name ($fuzztime)"
  # Minimizing each new interesting input may take a minute by default, during which
  # nothing new runs; a short run is better spent exploring.
  if ! go test -run='^$' -fuzz="^${name}\$" -fuzztime="$fuzztime" -fuzzminimizetime=2s \
      -parallel="$parallel" "$pkg" >"$log" 2>&1; then
    status=1
    cat "$log"
    summary+=$(printf '%-22s %-12s FAILED' "$pkg" "$name")$'\n'
  else
    # The last progress line reads "fuzz: elapsed: 15s, execs: 123456 (8200/sec), ...".
    # (none when the time ran out while the seed corpus was still being run)
    execs=$( (grep -o 'execs: [0-9]*' "$log" || true) | tail -n 1 | awk '{print $2}')
    execs=${execs:-0}
    total=$((total + execs))
    summary+=$(printf '%-22s %-12s %12s execs' "$pkg" "$name" "$execs")$'\n'
  fi
  rm -f "$log"
done < <(grep -rn --include='*_test.go' -E '^func Fuzz[A-Za-z0-9_]*\(f \*testing\.F\)' io | sort)
echo "== fuzz summary"
printf '%s' "$summary"
echo "total: $total executions"
exit $status
