package fit

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

var horizons = []float64{5, 8, 10, 15, 20, 30, 40, 60}

// The centring m_T = √2 T + (d-4)/(2√2) log T of the standard model
// ("Maximal displacement in the d-dimensional branching Brownian motion",
// Electron. Commun. Probab. 20, 2015), here for d = 1, plus a constant 0.7:
// noiseless points give back the coefficients to rounding.
func TestFitLinearExact(t *testing.T) {
	a, b, c := math.Sqrt2, -3/(2*math.Sqrt2), 0.7
	y := make([]float64, len(horizons))
	for i, T := range horizons {
		y[i] = a*T + b*math.Log(T) + c
	}
	terms := []Term{TermT, TermLogT, TermOne}
	f, err := FitLinear(horizons, y, nil, terms)
	if err != nil {
		t.Fatal(err)
	}
	for j, want := range []float64{a, b, c} {
		if math.Abs(f.Coef[j]-want) > 1e-10 {
			t.Errorf("%s: %v, want %v", f.Names[j], f.Coef[j], want)
		}
	}
	if f.DoF != 5 || !f.Scaled || f.Chi2 > 1e-18 {
		t.Errorf("dof %d scaled %v chi2 %v", f.DoF, f.Scaled, f.Chi2)
	}
	if p := f.Predict(terms, 25); math.Abs(p-(a*25+b*math.Log(25)+c)) > 1e-9 {
		t.Errorf("predict %v", p)
	}
	// Fixing a at its true value leaves b and c and removes a's error.
	terms[0] = TermT.Fix(a)
	f, err = FitLinear(horizons, y, nil, terms)
	if err != nil {
		t.Fatal(err)
	}
	if f.Coef[0] != a || f.SE[0] != 0 || math.Abs(f.Coef[1]-b) > 1e-10 || math.Abs(f.Coef[2]-c) > 1e-10 || f.DoF != 6 {
		t.Errorf("fixed fit %+v", f)
	}
}

// Weighted fit with known σ: the 95% intervals of b cover the truth at the
// coverage-check rate, and the mean χ² over the fits is near its degrees of
// freedom (χ²_5 has mean 5 and sd √10, so the 200-fit mean has sd 0.22; the
// band ±1 is 4.5 sd, false alarm < 1e-5, derived from the normal tail).
func TestFitLinearWeightedCoverage(t *testing.T) {
	a, b, c := math.Sqrt2, -0.35, 0.4
	terms := []Term{TermT, TermLogT, TermOne}
	var hits int
	var chi2 float64
	sg := make([]float64, len(horizons))
	y := make([]float64, len(horizons))
	for r := range reps {
		rng := rand.New(rand.NewPCG(uint64(r), 7))
		for i, T := range horizons {
			sg[i] = 0.05 + 0.003*T
			y[i] = a*T + b*math.Log(T) + c + sg[i]*rng.NormFloat64()
		}
		f, err := FitLinear(horizons, y, sg, terms)
		if err != nil {
			t.Fatal(err)
		}
		if covers(f.Coef[1], f.SE[1], b) {
			hits++
		}
		chi2 += f.Chi2 / reps
	}
	checkCoverage(t, "weighted log T coefficient", hits)
	if math.Abs(chi2-5) > 1 {
		t.Errorf("mean chi2 %v, want 5 ± 1", chi2)
	}
}

// Unweighted fit: the scaled covariance with Student-t quantiles (gonum's
// distuv.StudentsT, 5 degrees of freedom) gives the stated coverage.
func TestFitLinearUnweightedCoverage(t *testing.T) {
	a, b, c := math.Sqrt2, -0.35, 0.4
	tq := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: 5}.Quantile(0.975)
	terms := []Term{TermT, TermLogT, TermOne}
	y := make([]float64, len(horizons))
	var hits int
	for r := range reps {
		rng := rand.New(rand.NewPCG(uint64(r), 8))
		for i, T := range horizons {
			y[i] = a*T + b*math.Log(T) + c + 0.1*rng.NormFloat64()
		}
		f, err := FitLinear(horizons, y, nil, terms)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(f.Coef[0]-a) <= tq*f.SE[0] {
			hits++
		}
	}
	checkCoverage(t, "unweighted T coefficient", hits)
}

func TestFitLinearBadInput(t *testing.T) {
	_, err := FitLinear([]float64{1, 2}, []float64{1}, nil, []Term{TermOne})
	wantErr(t, err, "2 x values but 1 y values")
	_, err = FitLinear([]float64{1, 2, 3}, []float64{1, 2, 3}, []float64{1, 0, 1}, []Term{TermOne})
	wantErr(t, err, "sigma[1] = 0")
	_, err = FitLinear([]float64{1, 2, 3}, []float64{1, 2, 3}, nil, []Term{TermOne, TermOne})
	wantErr(t, err, "linearly dependent")
	_, err = FitLinear([]float64{0, 1, 2}, []float64{1, 2, 3}, nil, []Term{TermLogT})
	wantErr(t, err, `"log T" is -Inf at x = 0`)
}
