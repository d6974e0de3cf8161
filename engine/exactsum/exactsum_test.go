package exactsum

import (
	"bytes"
	"math"
	"math/big"
	"math/rand/v2"
	"testing"
)

// bigSum is the reference: math/big with enough precision to hold any sum of doubles exactly.
func bigSum(xs []float64) float64 {
	s := new(big.Float).SetPrec(4000)
	for _, x := range xs {
		s.Add(s, new(big.Float).SetPrec(4000).SetFloat64(x))
	}
	v, _ := s.Float64()
	return v
}

func randomValues(r *rand.Rand, n int) []float64 {
	xs := make([]float64, n)
	for i := range xs {
		switch r.IntN(4) {
		case 0:
			xs[i] = r.NormFloat64()
		case 1:
			xs[i] = math.Ldexp(r.Float64()-0.5, r.IntN(2000)-1000)
		case 2:
			xs[i] = math.Ldexp(r.Float64(), -1074+r.IntN(60)) // subnormals and near
		default:
			xs[i] = -xs[max(i-1, 0)] * (1 + 1e-16*r.NormFloat64()) // cancellation
		}
	}
	return xs
}

func TestMatchesBigFloat(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	for trial := 0; trial < 200; trial++ {
		xs := randomValues(r, 1+r.IntN(300))
		var a Acc
		for _, x := range xs {
			a.Add(x)
		}
		if got, want := a.Float64(), bigSum(xs); got != want {
			t.Fatalf("trial %d: got %v want %v", trial, got, want)
		}
	}
}

func TestOrderAndGroupingIndependent(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	xs := randomValues(r, 1000)
	var whole Acc
	for _, x := range xs {
		whole.Add(x)
	}
	want := whole.AppendBinary(nil)
	for trial := 0; trial < 50; trial++ {
		perm := r.Perm(len(xs))
		var parts []Acc
		var cur Acc
		for _, p := range perm {
			cur.Add(xs[p])
			if r.IntN(37) == 0 {
				parts = append(parts, cur)
				cur = Acc{}
			}
		}
		parts = append(parts, cur)
		var total Acc
		for i := len(parts) - 1; i >= 0; i-- {
			total.Merge(&parts[i])
		}
		if got := total.AppendBinary(nil); !bytes.Equal(got, want) {
			t.Fatalf("trial %d: encodings differ", trial)
		}
	}
}

func TestEncodeDecodeRoundTrip(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 6))
	for trial := 0; trial < 100; trial++ {
		var a Acc
		for _, x := range randomValues(r, r.IntN(50)) {
			a.Add(x)
		}
		enc := a.AppendBinary([]byte{9})
		var b Acc
		rest, err := b.Decode(enc[1:])
		if err != nil || len(rest) != 0 {
			t.Fatalf("decode: %v rest %d", err, len(rest))
		}
		if a.Float64() != b.Float64() && !math.IsNaN(a.Float64()) {
			t.Fatalf("round trip changed the value")
		}
	}
	var c Acc
	if _, err := c.Decode([]byte{0, 200}); err == nil {
		t.Fatal("corrupt encoding accepted")
	}
}

func TestNonFinite(t *testing.T) {
	var a Acc
	a.Add(1)
	a.Add(math.Inf(1))
	if !math.IsInf(a.Float64(), 1) {
		t.Fatal("+Inf lost")
	}
	a.Add(math.Inf(-1))
	if !math.IsNaN(a.Float64()) {
		t.Fatal("Inf - Inf should be NaN")
	}
	var z Acc
	z.Add(1.5)
	z.Add(-1.5)
	if !z.IsZero() || z.Float64() != 0 {
		t.Fatal("exact cancellation not zero")
	}
}

func BenchmarkAdd(b *testing.B) {
	var a Acc
	x := 0.123456789
	for i := 0; i < b.N; i++ {
		a.Add(x)
		x *= 1.0000001
	}
}

// Rounding decided by bits far below the top three limbs (the sticky bit), ties to
// even, and signs: the expected values follow from IEEE 754 round-to-nearest-even
// (derived by hand).
func TestFloat64StickyAndTies(t *testing.T) {
	cases := []struct {
		xs   []float64
		want float64
	}{
		{[]float64{1, 0x1p-53}, 1},                               // exact tie: to even
		{[]float64{1, 0x1p-53, 0x1p-1000}, 1 + 0x1p-52},          // just above the tie
		{[]float64{1, 0x1p-53, -0x1p-1000}, 1},                   // just below the tie
		{[]float64{-1, -0x1p-53, -0x1p-1070}, -(1 + 0x1p-52)},    // negative, above the tie
		{[]float64{1 + 0x1p-52, 0x1p-53}, 1 + 0x1p-51},           // tie, odd: rounds up
		{[]float64{0x1p-1074, 0x1p-1074, -0x1p-1074}, 0x1p-1074}, // subnormal
		{[]float64{math.MaxFloat64, -math.MaxFloat64, 3}, 3},
	}
	for i, c := range cases {
		var a Acc
		for _, x := range c.xs {
			a.Add(x)
		}
		if got := a.Float64(); got != c.want {
			t.Errorf("case %d: got %v, want %v", i, got, c.want)
		}
	}
}
