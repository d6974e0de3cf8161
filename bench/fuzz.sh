#!/usr/bin/env bash
# Runs every fuzz target for the given time each (default 10s). CI calls it with a few
# seconds; run it longer by hand: bench/fuzz.sh 300
set -euo pipefail
cd "$(dirname "$0")/.."
t="${1:-10}s"
go test -run XXX -fuzz '^FuzzDecodeRecord$' -fuzztime "$t" ./engine/
go test -run XXX -fuzz '^FuzzParse$' -fuzztime "$t" ./coordinator/sweep/
go test -run XXX -fuzz '^FuzzValidateResult$' -fuzztime "$t" ./coordinator/
go test -run XXX -fuzz '^FuzzDecodePart$' -fuzztime "$t" ./coordinator/
