package engine

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestGeneratorMatchesStdlib: the engine's generator must give, bit for bit, the draws of
// math/rand/v2's Rand on a PCG with the same seed (same state update, DXSM output and
// ziggurat tables), so its laws are exactly those of the standard library's ExpFloat64 and
// NormFloat64. Deterministic; 2e6 draws hit the ziggurat's rare rejection and tail
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
				if a, b := n.ExpFloat64(), r.ExpFloat64(); a != b {
					t.Fatalf("seed %d draw %d: exponential %v, stdlib %v", s, i, a, b)
				}
			case 1:
				if absInt32(int32(u)) >= zigKn[u>>32&0x7F] {
					slowNorm++
				}
				if a, b := n.NormFloat64(), r.NormFloat64(); a != b {
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

// TestChildKeysLookIndependent: the first uniform drawn by a node, its children and a
// grandchild are uncorrelated (Pearson r within 4.5 standard errors, 1/sqrt(n) under
// independence: a false alarm rate of about 7e-6 per pair, 4e-5 for the test) and
// uniform (chi-square on 64 bins: 63 degrees of freedom, mean 63 and sd sqrt(126),
// limit mean + 6 sd: a false alarm rate of about 1.5e-6 per node by the Wilson–Hilferty
// approximation, derived). Deterministic: fixed keys. Guards the child key derivation, whose
// halves are computed side by side from both parent halves.
func TestChildKeysLookIndependent(t *testing.T) {
	const n = 200000
	first := func(k key) float64 {
		var r nodeRand
		r.seed(k)
		return r.Float64()
	}
	names := []string{"parent", "child 0", "child 1", "grandchild 0.1"}
	u := make([][]float64, len(names))
	for i := range u {
		u[i] = make([]float64, n)
	}
	for j := 0; j < n; j++ {
		p := rootKey(7, 11, uint64(j))
		u[0][j], u[1][j], u[2][j], u[3][j] = first(p), first(p.child(0)), first(p.child(1)), first(p.child(0).child(1))
	}
	for a := range u {
		var bins [64]float64
		for _, x := range u[a] {
			bins[int(x*64)]++
		}
		var chi2 float64
		for _, c := range bins {
			chi2 += (c - n/64.0) * (c - n/64.0) / (n / 64.0)
		}
		if chi2 > 63+6*math.Sqrt(126) {
			t.Errorf("%s: first uniforms not uniform, chi-square %.1f on 63 degrees of freedom", names[a], chi2)
		}
		for b := a + 1; b < len(u); b++ {
			var sab, saa, sbb float64
			for j := 0; j < n; j++ {
				x, y := u[a][j]-0.5, u[b][j]-0.5
				sab += x * y
				saa += x * x
				sbb += y * y
			}
			if r := sab / math.Sqrt(saa*sbb); math.Abs(r) > 4.5/math.Sqrt(n) {
				t.Errorf("%s and %s: correlation %.5f of first uniforms (limit %.5f)", names[a], names[b], r, 4.5/math.Sqrt(n))
			}
		}
	}
}
