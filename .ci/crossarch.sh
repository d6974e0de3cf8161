#!/usr/bin/env bash
# Records must be the same bits on every processor and build (DEVELOPERS.md, invariants).
# This runs the tests that pin them (the pinned digest, the batched walk against node, threads and
# splits bit for bit, the wedge squeeze, the portable math) on builds that differ where
# it matters:
#   - arm64, under qemu user-mode emulation (qemu-user-static): there Go fuses
#     multiply-adds and the math package has its own assembly;
#   - amd64 with GOAMD64=v3, where the processor has FMA: fused multiply-adds again.
# The engine, its exact sums and binary reader, and the results store are built for each.
# About a minute on two cores, most of it emulation.
set -euo pipefail
cd "$(dirname "$0")/.."
if ! command -v qemu-aarch64-static >/dev/null; then
  export DEBIAN_FRONTEND=noninteractive
  apt-get update -qq
  apt-get install -y -qq qemu-user-static >/dev/null
fi
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
pkgs=(engine engine/exactsum engine/wire results)
for pkg in "${pkgs[@]}"; do
  bin="$tmp/$(echo "$pkg" | tr / -).test"
  GOARCH=arm64 go test -c -o "$bin" "./$pkg"
  # The kill -9 tests re-execute the test binary as a child process, which needs the
  # emulator registered with the kernel; they run natively in go test ./... anyway.
  (cd "$pkg" && qemu-aarch64-static "$bin" -test.skip 'Kill9' >"$tmp/out" 2>&1) ||
    { cat "$tmp/out"; echo "crossarch: $pkg fails on arm64" >&2; exit 1; }
  echo "ok   $pkg (arm64, emulated)"
done
if grep -qw fma /proc/cpuinfo; then
  GOAMD64=v3 go test -count=1 "${pkgs[@]/#/./}"
else
  echo "crossarch: this processor has no FMA; the GOAMD64=v3 build is not run"
fi
