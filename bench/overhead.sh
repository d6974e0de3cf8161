#!/bin/sh
# Overhead of coordination: the same replicates coordinated (coordinator + worker +
# store, as `bbmx run` does) and directly (engine.Batch), in one process, alternating.
# See bench/overhead/main.go for the three figures printed.
#
#   sh bench/overhead.sh            # quick example (5 repeats) and 60 s tasks (1 repeat)
#   REPEATS60=2 sh bench/overhead.sh
set -e
cd "$(dirname "$0")/.."
go build -o "${TMPDIR:-/tmp}/bbmx-overhead" ./bench/overhead
"${TMPDIR:-/tmp}/bbmx-overhead" --sweep examples/quick.toml --threads 2 --repeats "${REPEATS:-5}"
"${TMPDIR:-/tmp}/bbmx-overhead" --sweep bench/tasks60.toml --threads 2 --repeats "${REPEATS60:-1}"
