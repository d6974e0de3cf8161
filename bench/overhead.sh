#!/bin/sh
# Overhead of coordination: the same replicates coordinated (coordinator + worker +
# store, as `bbmx run` does) and directly (engine.Batch), in one process, alternating.
# See bench/overhead/main.go for the three figures printed. The last lines run the real
# `bbmx run` on the quick example: 1 - (simulating time)/(threads x wall) from its
# summary line is the "gaps" figure of the real command.
#
#   sh bench/overhead.sh            # quick example (5 repeats) and 60 s tasks (1 repeat)
#   REPEATS60=2 sh bench/overhead.sh
set -e
cd "$(dirname "$0")/.."
bin="${TMPDIR:-/tmp}/bbmx-overhead"
go build -o "$bin" ./bench/overhead
go build -o "$bin-bbmx" ./cmd/bbmx
"$bin" --sweep examples/quick.toml --threads 2 --repeats "${REPEATS:-5}"
dir=$(mktemp -d)
for i in 1 2 3; do
	"$bin-bbmx" run examples/quick.toml --store "$dir/q$i.db" --threads 2 --no-report 2>/dev/null | grep simulating
done
rm -rf "$dir"
"$bin" --sweep bench/tasks60.toml --threads 2 --repeats "${REPEATS60:-1}"
