package engine

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestWedgeSqueeze: the squeeze never contradicts the exact wedge test a < float32(e^-q)
// (pexp, as the ziggurat's rejection step computed it before the squeeze), on every
// strip of both tables, for heights spread over the strip and heights next to the
// boundary float32(e^-q) itself, where a wrong margin would show first; and it decides
// most tests alone (else it would only add work). Deterministic: fixed seed.
func TestWedgeSqueeze(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 11))
	var tests, decided int
	check := func(name string, i int, w *wedge, fHi, fLo float32) {
		if !(w.qHi > w.qLo) {
			t.Fatalf("%s strip %d: empty range [%v, %v]", name, i, w.qLo, w.qHi)
		}
		for n := 0; n < 400; n++ {
			q := w.qLo + r.Float64()*(w.qHi-w.qLo)
			exact := float32(pexp(-q))
			heights := []float32{
				fLo + float32(r.Float32()*(fHi-fLo)),
				exact, math.Nextafter32(exact, 0), math.Nextafter32(exact, 2),
			}
			for _, a := range heights {
				want := a < exact
				tests++
				if got, sure := w.squeeze(q, float64(a)); sure {
					decided++
					if got != want {
						t.Fatalf("%s strip %d: q %v height %v: squeeze says below=%v, exact test %v", name, i, q, a, got, want)
					}
				}
				if w.below(q, a) != want {
					t.Fatalf("%s strip %d: q %v height %v: below disagrees with the exact test", name, i, q, a)
				}
			}
		}
	}
	for i := 1; i < len(expWedges); i++ {
		check("exponential", i, &expWedges[i], max(zigFe[i], zigFe[i-1]), min(zigFe[i], zigFe[i-1]))
	}
	for i := 1; i < len(normWedges); i++ {
		check("normal", i, &normWedges[i], max(zigFn[i], zigFn[i-1]), min(zigFn[i], zigFn[i-1]))
	}
	// Three of every four heights are within one float32 step of the boundary, which the
	// squeeze must leave to the exact test; of the spread ones, most must be decided.
	if share := float64(decided) / float64(tests/4); share < 0.7 {
		t.Errorf("the squeeze decided %d of %d tests (%.2f of the spread heights' count): too few to be worth it", decided, tests, share)
	}
	t.Logf("squeeze decided %d of %d tests", decided, tests)
	// A squeeze over an empty range is never sure.
	empty := newWedge(2, 1)
	if _, sure := empty.squeeze(1.5, 0.01); sure {
		t.Error("the squeeze of an empty range decided a test")
	}
}
