package fit

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

func exponentials(seed uint64, n int, rate float64) []float64 {
	r := rand.New(rand.NewPCG(seed, 6))
	x := make([]float64, n)
	for i := range x {
		x[i] = r.ExpFloat64() / rate
	}
	return x
}

// TailRate on exactly exponential tails of rate θ = √2 (the critical slope of
// the standard model): by memorylessness the excesses over any threshold are
// Exp(θ) (derived), so the Wald interval rate ± 1.96 SE must cover θ at the
// coverage-check rate.
func TestTailRateCoverage(t *testing.T) {
	theta := math.Sqrt2
	var hits int
	for r := range reps {
		x := exponentials(uint64(7000+r), 2000, theta)
		u, err := TailThreshold(x, 0.1)
		if err != nil {
			t.Fatal(err)
		}
		f, err := TailRate(x, u)
		if err != nil {
			t.Fatal(err)
		}
		if f.K != 200 {
			t.Fatalf("top 10%% of 2000 gave %d exceedances", f.K)
		}
		if covers(f.Rate, f.SE, theta) {
			hits++
		}
	}
	checkCoverage(t, "exponential tail rate (MLE)", hits)
}

// TailRegression on exponential samples: the bootstrap percentile interval of
// the regression slope covers -θ at the coverage-check rate. This also checks
// the bootstrap helper on a non-trivial statistic. The OLS standard error of
// the regression is not checked for coverage: it ignores the correlation
// between levels and is documented as too small.
func TestTailRegressionBootstrapCoverage(t *testing.T) {
	if testing.Short() {
		t.Skip("bootstrap coverage takes a few seconds")
	}
	theta := math.Sqrt2
	var hits int
	var meanSlope float64
	for r := range reps {
		x := exponentials(uint64(8000+r), 600, theta)
		// Fixed levels 0.5 .. 2.5: expected counts above 600 e^{-θ t} ≈ 296 .. 18.
		levels := make([]float64, 11)
		for i := range levels {
			levels[i] = 0.5 + 0.2*float64(i)
		}
		ln, err := TailRegression(x, levels)
		if err != nil {
			t.Fatal(err)
		}
		meanSlope += ln.Slope / reps
		iv, err := Bootstrap(x, func(s []float64) float64 {
			l, err := TailRegression(s, levels)
			if err != nil {
				return math.NaN()
			}
			return l.Slope
		}, 200, 0.95, uint64(r))
		if err != nil {
			t.Fatal(err)
		}
		if iv.Estimate != ln.Slope {
			t.Fatalf("bootstrap estimate %v, direct %v", iv.Estimate, ln.Slope)
		}
		if iv.Lo <= -theta && -theta <= iv.Hi {
			hits++
		}
	}
	checkCoverage(t, "tail regression slope (bootstrap)", hits)
	t.Logf("mean slope %v, -θ = %v", meanSlope, -theta)
}

// Exact survival values: with levels between distinct points the regression
// points are log((number above)/n) (derived by counting).
func TestTailPointsAndLine(t *testing.T) {
	x := []float64{5, 1, 4, 2, 3, 0, 6, 7}
	lx, ly := TailPoints(x, []float64{0.5, 2.5, 4.5, 7.5})
	if len(lx) != 3 {
		t.Fatalf("points %v", lx)
	}
	for i, want := range []float64{7, 5, 3} {
		if math.Abs(ly[i]-math.Log(want/8)) > 1e-15 {
			t.Errorf("log S at %v = %v, want log(%v/8)", lx[i], ly[i], want)
		}
	}
	// A line through exact points has zero residual and the slope given.
	l, err := FitLine([]float64{0, 1, 2, 3}, []float64{1, -1, -3, -5})
	if err != nil || math.Abs(l.Slope+2) > 1e-14 || math.Abs(l.Intercept-1) > 1e-14 || l.SESlope > 1e-14 || math.Abs(l.R+1) > 1e-14 {
		t.Errorf("exact line: %+v, %v", l, err)
	}
	g, err := TailGrid(x, 0.5, 5, 2)
	if err != nil || g[0] != 0.5 || g[4] != 5 {
		t.Errorf("grid %v, %v", g, err)
	}
}

func TestTailBadInput(t *testing.T) {
	x := []float64{1, 2, 3}
	_, err := TailRate(x, 2.5)
	wantErr(t, err, "threshold 2.5", "1 exceedances")
	_, err = TailThreshold(x, 1.5)
	wantErr(t, err, "fraction 1.5")
	_, err = TailRegression(x, []float64{0, 10, 20})
	wantErr(t, err, "only 1 tail levels")
	_, err = FitLine([]float64{1, 1, 1}, []float64{1, 2, 3})
	wantErr(t, err, "all x equal to 1")
	_, err = TailGrid(x, 5, 10, 1)
	wantErr(t, err, "threshold 5")
}

// TestOrderStat: the selection gives, for every index, the value sort gives there, on
// random samples, heavy ties, sorted and reversed input, a constant sample, tiny sizes,
// and an organ-pipe input that makes median-of-three pivots poor. Deterministic.
func TestOrderStat(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 8))
	var cases [][]float64
	for _, n := range []int{1, 2, 3, 4, 5, 7, 16, 33, 100, 1000} {
		random, ties, sorted, reversed, flat, pipe := make([]float64, n), make([]float64, n), make([]float64, n), make([]float64, n), make([]float64, n), make([]float64, n)
		for i := range n {
			random[i] = r.NormFloat64()
			ties[i] = float64(r.IntN(3))
			sorted[i] = float64(i)
			reversed[i] = float64(n - i)
			flat[i] = 2.5
			pipe[i] = float64(min(i, n-1-i))
		}
		cases = append(cases, random, ties, sorted, reversed, flat, pipe)
	}
	for ci, x := range cases {
		want := slices.Clone(x)
		slices.Sort(want)
		for i := range x {
			if got := orderStat(slices.Clone(x), i); got != want[i] {
				t.Fatalf("case %d (n = %d), index %d: got %v, sorted gives %v", ci, len(x), i, got, want[i])
			}
		}
	}
}
