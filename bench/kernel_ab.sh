#!/usr/bin/env bash
# Compare this tree's amd64 walk kernel with the kernel of an earlier commit, in one
# process, replicate by replicate: two binaries differ by up to 10 % in code placement
# and in the machine's load alone, which hides changes of a few per cent.
#
#   bash bench/kernel_ab.sh REV [PAIRS] [DIM]      # e.g. bash bench/kernel_ab.sh HEAD~1 3000 1
#
# A copy of the tree (the working tree as it is, in a temporary folder) gets REV's kernel
# as a second function, waveKernelXX (REV's wave_kernel_amd64.h, wave_child_amd64.h and
# macros, for the plain variant: 1/beta and sigma from scaled strips, as for beta = sigma
# = 1), and a benchmark walks replicate i (T = 10, binary, DIM dimensions, default 1)
# with both kernels in turn, the order alternating, for PAIRS replicates (default 2000).
# It prints the lower quartile, median and upper quartile of the per-replicate time
# ratio this / REV: below 1 is faster. REV itself gives 1 within 0.5 %. REV must take
# the kernel's arguments as this tree does (waveConsts with exp and norm strips: from
# commit bac1c2e on). The working tree is not touched.
set -euo pipefail
rev=${1:?usage: $0 REV [PAIRS] [DIM]}
pairs=${2:-2000}
dim=${3:-1}
root=$(cd "$(dirname "$0")/.." && pwd)
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
(cd "$root" && tar --exclude=.git -cf - .) | (cd "$tmp" && tar -xf -)
e="$tmp/engine"
git -C "$root" show "$rev:engine/wave_child_amd64.h" >"$e/zz_childx_amd64.h"
git -C "$root" show "$rev:engine/wave_kernel_amd64.h" |
	sed 's/wave_child_amd64\.h/zz_childx_amd64.h/' >"$e/zz_kernelx_amd64.h"
{
	echo '//go:build !purego'
	echo '#include "go_asm.h"'
	echo '#include "textflag.h"'
	# REV's macros: from MIX2 up to the first kernel function
	git -C "$root" show "$rev:engine/wave_amd64.s" |
		sed -n '/^#define MIX2/,/^\/\/ func waveKernel1(/p' | sed '$d'
	for d in 1 2 3; do
		echo "TEXT ·waveKernel${d}XX(SB), NOSPLIT, \$16-72"
		[ "$d" -ge 2 ] && echo '#define DIM2'
		[ "$d" -ge 3 ] && echo '#define DIM3'
		echo '#include "zz_kernelx_amd64.h"'
	done
} >"$e/zz_kernelx_amd64.s"
cat >"$e/zz_kernelx_amd64.go" <<'EOF'
//go:build !purego

package engine

//go:noescape
func waveKernel1XX(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)

//go:noescape
func waveKernel2XX(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)

//go:noescape
func waveKernel3XX(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)

var useXX bool

func init() {
	kernelXX = func(v int, batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (int, int, int, bool) {
		if !useXX {
			return 0, 0, 0, false
		}
		switch v {
		case 0:
			a, b, s := waveKernel1XX(batch, m, out, leaves, slow, c)
			return a, b, s, true
		case 4:
			a, b, s := waveKernel2XX(batch, m, out, leaves, slow, c)
			return a, b, s, true
		case 8:
			a, b, s := waveKernel3XX(batch, m, out, leaves, slow, c)
			return a, b, s, true
		}
		return 0, 0, 0, false
	}
}
EOF
# the hook: waveKernel asks kernelXX first
cat >>"$e/wave_amd64.go" <<'EOF'

var kernelXX func(v int, batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (int, int, int, bool)
EOF
sed -i 's/^\tv := 4\*(d-1) + 2\*b2i(divide) + b2i(scale)$/&\n\tif kernelXX != nil {\n\t\tif a, b, s, ok := kernelXX(v, batch, m, out, leaves, slow, c); ok {\n\t\t\treturn a, b, s\n\t\t}\n\t}/' "$e/wave_amd64.go"
grep -q kernelXX\( "$e/wave_amd64.go" || { echo "kernel_ab: cannot hook waveKernel in this tree" >&2; exit 1; }
cat >"$e/zz_kernelx_test.go" <<EOF
package engine

import (
	"slices"
	"testing"
	"time"
)

func BenchmarkKernelAB(b *testing.B) {
	c := Cell{Model: Model{Dim: $dim, Sigma: 1, Beta: 1, Children: 2}, Horizon: 10}.WithDefaults()
	w := newWalker(c)
	r := make([]float64, b.N)
	for i := 0; i < b.N; i++ {
		var tx, tn time.Duration
		for k := range 2 {
			useXX = (i+k)%2 == 0
			t0 := time.Now()
			if _, err := w.run(1, uint64(i), 0, 0, 1); err != nil {
				b.Fatal(err)
			}
			if useXX {
				tx = time.Since(t0)
			} else {
				tn = time.Since(t0)
			}
		}
		r[i] = float64(tn) / float64(tx)
	}
	useXX = false
	slices.Sort(r)
	n := len(r)
	b.ReportMetric(r[n/4], "q1")
	b.ReportMetric(r[n/2], "this/rev")
	b.ReportMetric(r[3*n/4], "q3")
}
EOF
cd "$tmp"
go test -run XXX -bench 'BenchmarkKernelAB$' -benchtime "${pairs}x" ./engine | grep KernelAB
