package engine

import (
	"math"
	"math/rand/v2"
	"testing"
)

// sameDraw: a draw of the engine's generator equals the standard library's, or is its
// neighbouring float: the standard library's ziggurat may be compiled with fused
// multiply-adds (GOAMD64=v3, arm64), which round once where the engine, which forbids
// them so that records do not depend on the build, rounds twice (see
// TestNoFusedMultiplyAdd), and its rare tail steps use the math package's Log and Exp
// where the engine uses its portable ones (fmath.go), which may differ in the last bit.
func sameDraw(a, b float64) bool { return a == b || a == math.Nextafter(b, a) }

// TestGeneratorMatchesStdlib: the engine's generator must give, bit for bit, the draws of
// math/rand/v2's Rand on a PCG with the same seed (same state update, DXSM output and
// ziggurat tables), so its laws are exactly those of the standard library's ExpFloat64 and
// NormFloat64. Its variates are expFromWord and normFromWord on its next word, as the
// walk's are on a node's words, so this also checks the walk's ziggurat (fast path on a
// given word, rare steps from the generator). Deterministic; 2e6 draws hit the ziggurat's rare rejection and tail
// branches thousands of times (counted below, so the test fails if they are never hit).
func TestGeneratorMatchesStdlib(t *testing.T) {
	var slowExp, slowNorm int
	for s := uint64(0); s < 2000; s++ {
		k := key{hi: mix64(s), lo: mix64(s + 0x1234)}
		var n nodeRand
		n.seed(k)
		r := rand.New(rand.NewPCG(k.hi, k.lo))
		for i := 0; i < 1000; i++ {
			// Peek at the next raw word (on a copy) to count the slow-path draws.
			peek := n
			u := peek.Uint64()
			switch i % 3 {
			case 0:
				if uint32(u) >= zigKe[uint8(u>>32)] {
					slowExp++
				}
				if a, b := n.ExpFloat64(), r.ExpFloat64(); !sameDraw(a, b) {
					t.Fatalf("seed %d draw %d: exponential %v, stdlib %v", s, i, a, b)
				}
			case 1:
				if absInt32(int32(u)) >= zigKn[u>>32&0x7F] {
					slowNorm++
				}
				if a, b := n.NormFloat64(), r.NormFloat64(); !sameDraw(a, b) {
					t.Fatalf("seed %d draw %d: normal %v, stdlib %v", s, i, a, b)
				}
			default:
				if a, b := n.Float64(), r.Float64(); a != b {
					t.Fatalf("seed %d draw %d: uniform %v, stdlib %v", s, i, a, b)
				}
			}
		}
	}
	if slowExp < 1000 || slowNorm < 1000 {
		t.Errorf("rare branches hit too seldom to be checked: exponential %d, normal %d", slowExp, slowNorm)
	}
	t.Logf("slow-path draws compared: exponential %d, normal %d", slowExp, slowNorm)
}

// TestNodeWordsLookIndependent: the random words of a node (its lifetime's word and its
// first three normals' words), of its two children and of a grandchild are uncorrelated
// (Pearson r within 4.5 standard errors, 1/sqrt(n) under independence: a false alarm
// rate of about 7e-6 per pair, 3e-3 for the 480 pairs of distinct words) and uniform
// (chi-square on 64 bins: 63 degrees of freedom, mean 63 and sd sqrt(126), limit mean +
// 6 sd: about 1.5e-6 per series by the Wilson–Hilferty approximation, derived). Each
// word is read twice, as the ziggurat's fast path reads it: its low 32 bits (the value
// within a layer) and its low 40 bits (whose top bits choose the layer). Deterministic:
// fixed keys. Guards the child key derivation and the use of key bits as draws
// (random-stream version 3).
func TestNodeWordsLookIndependent(t *testing.T) {
	const n = 200000
	type series struct {
		name string
		u    []float64
	}
	var all []series
	names := []string{"parent", "child 0", "child 1", "grandchild 0.1"}
	words := []string{"lifetime", "normal 0", "normal 1", "normal 2"}
	for _, nm := range names {
		for _, wd := range words {
			all = append(all, series{name: nm + " " + wd + " (low 32 bits)", u: make([]float64, n)},
				series{name: nm + " " + wd + " (low 40 bits)", u: make([]float64, n)})
		}
	}
	for j := 0; j < n; j++ {
		p := rootKey(7, 11, uint64(j))
		nodes := []key{p, p.child(0), p.child(1), p.child(0).child(1)}
		c := 0
		for _, k := range nodes {
			for _, w := range []uint64{k.hi, normalWord(k, 0), normalWord(k, 1), normalWord(k, 2)} {
				all[c].u[j] = float64(w&(1<<32-1)) / (1 << 32)
				all[c+1].u[j] = float64(w&(1<<40-1)) / (1 << 40)
				c += 2
			}
		}
	}
	for a := range all {
		var bins [64]float64
		for _, x := range all[a].u {
			bins[int(x*64)]++
		}
		var chi2 float64
		for _, c := range bins {
			chi2 += (c - n/64.0) * (c - n/64.0) / (n / 64.0)
		}
		if chi2 > 63+6*math.Sqrt(126) {
			t.Errorf("%s: not uniform, chi-square %.1f on 63 degrees of freedom", all[a].name, chi2)
		}
		for b := a + 1; b < len(all); b++ {
			if b/2 == a/2 {
				continue // the two views of one word are not independent of each other
			}
			var sab, saa, sbb float64
			for j := 0; j < n; j++ {
				x, y := all[a].u[j]-0.5, all[b].u[j]-0.5
				sab += x * y
				saa += x * x
				sbb += y * y
			}
			if r := sab / math.Sqrt(saa*sbb); math.Abs(r) > 4.5/math.Sqrt(n) {
				t.Errorf("%s and %s: correlation %.5f (limit %.5f)", all[a].name, all[b].name, r, 4.5/math.Sqrt(n))
			}
		}
	}
}

// TestZigStrips: the fast paths' one-comparison tests (zigStrip.holds, and for the
// normal also normal32, the 32-bit test of waveKernel's assembly) agree with the
// tables' own, |j| < kn[i] for the normal and j < ke[i] for the exponential, at every
// strip, for the integer parts at and within two of each bound and at the extremes of
// int32 (where normal32's j + k - 1 is negative, it must wrap to a value no strip lets
// stand).
func TestZigStrips(t *testing.T) {
	for i, k := range zigKn {
		s := &zigN[i]
		if s.w != float64(zigWn[i]) {
			t.Fatalf("normal strip %d: width %v, table %v", i, s.w, zigWn[i])
		}
		js := []int64{math.MinInt32, math.MinInt32 + 1, math.MaxInt32 - 1, math.MaxInt32}
		for _, c := range []int64{0, int64(k), -int64(k)} {
			for dj := int64(-2); dj <= 2; dj++ {
				js = append(js, c+dj)
			}
		}
		for _, j := range js {
			if j < math.MinInt32 || j > math.MaxInt32 {
				continue
			}
			want := absInt32(int32(j)) < k
			if got := s.holds(j); got != want {
				t.Fatalf("normal strip %d (k = %d), j = %d: holds %v, want %v", i, k, j, got, want)
			}
			if got := normal32(s, int32(j)); got != want {
				t.Fatalf("normal strip %d (k = %d), j = %d: normal32 %v, want %v", i, k, j, got, want)
			}
		}
	}
	for i, k := range zigKe {
		s := &zigE[i]
		if s.w != float64(zigWe[i]) {
			t.Fatalf("exponential strip %d: width %v, table %v", i, s.w, zigWe[i])
		}
		for _, j := range []int64{0, 1, int64(k) - 1, int64(k), int64(k) + 1, math.MaxUint32} {
			if j < 0 || j > math.MaxUint32 {
				continue
			}
			if got, want := s.holds(j), uint32(j) < k; got != want {
				t.Fatalf("exponential strip %d (k = %d), j = %d: holds %v, want %v", i, k, j, got, want)
			}
		}
	}
}

// normal32 is the test waveKernel's normals make of whether the ziggurat's fast path
// stands for a draw with integer part j: one 32-bit comparison, uint32(j + off) < n.
func normal32(s *zigStrip, j int32) bool { return uint32(j)+s.off < s.n }
