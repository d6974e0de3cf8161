#!/usr/bin/env sh
# Wall time of `bbmx run` on bench/scaling.toml for 1, 2, 4, ... threads up to the core count
# (or the counts given as arguments), each on a fresh store; prints threads, wall seconds,
# speed-up against 1 thread and parallel efficiency. Every run must give the same content
# digest (checked).
set -eu
cd "$(dirname "$0")/.."
go build -o /tmp/bbmx-scaling ./cmd/bbmx
cores=$(nproc)
counts=${*:-}
if [ -z "$counts" ]; then
  n=1; counts=""
  while [ "$n" -le "$cores" ]; do counts="$counts $n"; n=$((n * 2)); done
  [ "$((n / 2))" -ne "$cores" ] && counts="$counts $cores"
fi
dir=$(mktemp -d)
trap 'rm -rf "$dir"' EXIT
base=""; digest=""
for t in $counts; do
  start=$(date +%s.%N)
  out=$(/tmp/bbmx-scaling run bench/scaling.toml --store "$dir/s$t.db" --threads "$t" --no-report 2>/dev/null)
  end=$(date +%s.%N)
  d=$(echo "$out" | sed -n 's/.*content digest \([0-9a-f]*\).*/\1/p')
  [ -z "$digest" ] && digest=$d
  [ "$d" = "$digest" ] || { echo "digest differs at $t threads" >&2; exit 1; }
  wall=$(echo "$end - $start" | bc -l)
  [ -z "$base" ] && base=$wall
  printf '%3d threads  %7.2f s  speed-up %5.2f  efficiency %4.0f %%\n' "$t" "$wall" \
    "$(echo "$base / $wall" | bc -l)" "$(echo "100 * $base / $wall / $t" | bc -l)"
done
