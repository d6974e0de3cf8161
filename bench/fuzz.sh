#!/usr/bin/env bash
# Runs every fuzz target for the given time each: seconds (default 10), or a count of
# inputs written Nx. CI calls it with a count (bench/fuzz.sh 300x): a time limit can run out
# while the fuzzer is still replaying a large cached corpus, which go test reports as a
# failure. Run it longer by hand: bench/fuzz.sh 300
set -euo pipefail
cd "$(dirname "$0")/.."
t="${1:-10}"
[[ $t == *x ]] || t="${t}s"
go test -run XXX -fuzz '^FuzzDecodeRecord$' -fuzztime "$t" ./engine/
go test -run XXX -fuzz '^FuzzParse$' -fuzztime "$t" ./coordinator/sweep/
go test -run XXX -fuzz '^FuzzValidateResult$' -fuzztime "$t" ./coordinator/
go test -run XXX -fuzz '^FuzzDecodePart$' -fuzztime "$t" ./coordinator/
go test -run XXX -fuzz '^FuzzDecodeSketch$' -fuzztime "$t" ./results/
go test -run XXX -fuzz '^FuzzDamagedStore$' -fuzztime "$t" ./results/
