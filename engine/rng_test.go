package engine

import (
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
