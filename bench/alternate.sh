#!/usr/bin/env sh
# Compare Go benchmarks of two or more builds on a noisy machine: the test binaries take
# turns, ROUNDS times, each running the benchmarks matching PATTERN for BENCHTIME, and the
# minimum, lower quartile and median of each benchmark's ns/node (or ns/op) are printed
# per binary. Taking turns spreads changes in the machine's load over all builds alike.
#
#   git stash; go test -c -o /tmp/before.test ./engine; git stash pop
#   go test -c -o /tmp/after.test ./engine
#   sh bench/alternate.sh 'Node|RawVariates' /tmp/before.test /tmp/after.test
#
# ROUNDS (default 6) and BENCHTIME (default 0.3s) may be set in the environment.
set -eu
[ $# -ge 2 ] || { echo "usage: $0 PATTERN BINARY..." >&2; exit 2; }
pattern=$1; shift
rounds=${ROUNDS:-6}
out=$(mktemp)
trap 'rm -f "$out"' EXIT
i=0
while [ "$i" -lt "$rounds" ]; do
  for bin in "$@"; do
    "$bin" -test.run XXX -test.bench "$pattern" -test.benchtime "${BENCHTIME:-0.3s}" |
      awk -v b="$(basename "$bin")" '/^Benchmark/ {
        v = ""; for (f = 3; f < NF; f++) if ($(f+1) == "ns/node") v = $f
        if (v == "") for (f = 3; f < NF; f++) if ($(f+1) == "ns/op") v = $f
        print $1, b, v }' >>"$out"
  done
  i=$((i + 1))
done
sort -k1,1 -k2,2 -k3,3g "$out" | awk '
  function flush() { if (n) printf "%-44s %-14s min %8.2f  q1 %8.2f  median %8.2f  (n=%d)\n", key1, key2, v[1], v[int((n+3)/4)], (n%2 ? v[(n+1)/2] : (v[n/2]+v[n/2+1])/2), n }
  { k = $1 " " $2; if (k != cur) { flush(); cur = k; key1 = $1; key2 = $2; n = 0 } v[++n] = $3 }
  END { flush() }'
