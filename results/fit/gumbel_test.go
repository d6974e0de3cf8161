package fit

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// Gumbel moments against the NIST/SEMATECH e-Handbook of Statistical Methods,
// "Extreme Value Type I Distribution": mean mu + γ beta, variance π² beta²/6,
// with γ = 0.5772156649015329 (Euler–Mascheroni constant, from memory; NIST
// Digital Library of Mathematical Functions, eq. 5.2.3).
func TestGumbelMomentsHandbook(t *testing.T) {
	if math.Abs(EulerGamma-0.5772156649015329) > 1e-16 {
		t.Fatalf("EulerGamma = %v", EulerGamma)
	}
	for _, g := range []Gumbel{{0, 1}, {2.5, 1 / math.Sqrt2}, {-3, 4}} {
		if !relNear(g.Mean(), g.Mu+0.5772156649015329*g.Beta, 1e-14) {
			t.Errorf("%+v mean %v", g, g.Mean())
		}
		if !relNear(g.Variance(), math.Pi*math.Pi*g.Beta*g.Beta/6, 1e-14) {
			t.Errorf("%+v variance %v", g, g.Variance())
		}
		if !relNear(g.StdDev()*g.StdDev(), g.Variance(), 1e-14) {
			t.Errorf("%+v sd %v", g, g.StdDev())
		}
		// Median mu - beta log log 2 (handbook) and quantile inverse of the CDF.
		if math.Abs(g.CDF(g.Median())-0.5) > 1e-14 {
			t.Errorf("%+v CDF(median) = %v", g, g.CDF(g.Median()))
		}
		for _, p := range []float64{1e-6, 0.1, 0.5, 0.9, 1 - 1e-9} {
			if x := g.Quantile(p); math.Abs(g.CDF(x)-p) > 1e-12 {
				t.Errorf("%+v CDF(Quantile(%v)) = %v", g, p, g.CDF(x))
			}
		}
	}
}

// The same helpers against gonum's distuv.GumbelRight (gonum v0.17).
func TestGumbelAgainstGonum(t *testing.T) {
	for _, g := range []Gumbel{{0, 1}, {2.5, 1 / math.Sqrt2}, {-3, 4}} {
		ref := distuv.GumbelRight{Mu: g.Mu, Beta: g.Beta}
		if !relNear(g.Mean(), ref.Mean(), 1e-12) {
			t.Errorf("mean %v, gonum %v", g.Mean(), ref.Mean())
		}
		if !relNear(g.Variance(), ref.Variance(), 1e-12) {
			t.Errorf("variance %v, gonum %v", g.Variance(), ref.Variance())
		}
		if !relNear(g.Median(), ref.Median(), 1e-12) {
			t.Errorf("median %v, gonum %v", g.Median(), ref.Median())
		}
		for _, x := range []float64{-4, -1, 0, 0.3, 2, 7, 20} {
			if !relNear(g.CDF(x), ref.CDF(x), 1e-12) {
				t.Errorf("CDF(%v) %v, gonum %v", x, g.CDF(x), ref.CDF(x))
			}
			// gonum computes 1 - CDF, which loses digits far in the tail;
			// there compare with e^{-z} - e^{-2z}/2 + e^{-3z}/6 (derived, Taylor).
			if z := (x - g.Mu) / g.Beta; z > 15 {
				e := math.Exp(-z)
				if want := e - e*e/2 + e*e*e/6; !relNear(g.Survival(x), want, 1e-14) {
					t.Errorf("Survival(%v) %v, series %v", x, g.Survival(x), want)
				}
			} else if !relNear(g.Survival(x), ref.Survival(x), 1e-9) {
				t.Errorf("Survival(%v) %v, gonum %v", x, g.Survival(x), ref.Survival(x))
			}
			if !relNear(g.LogPDF(x), ref.LogProb(x), 1e-12) {
				t.Errorf("LogPDF(%v) %v, gonum %v", x, g.LogPDF(x), ref.LogProb(x))
			}
		}
	}
}

// The analytic observed information matches a finite-difference Hessian of the
// log-likelihood (derived: central differences, step 1e-4, tolerance 1e-5).
func TestFitGumbelHessian(t *testing.T) {
	x := gumbels(5, 400, 1, 0.7)
	g, err := FitGumbel(x)
	if err != nil {
		t.Fatal(err)
	}
	ll := func(mu, b float64) float64 {
		var s float64
		for _, v := range x {
			s += Gumbel{mu, b}.LogPDF(v)
		}
		return s
	}
	if !relNear(ll(g.Mu, g.Beta), g.LogLik, 1e-12) {
		t.Errorf("loglik %v, recomputed %v", g.LogLik, ll(g.Mu, g.Beta))
	}
	h := 1e-4
	m, b := g.Mu, g.Beta
	hmm := (ll(m+h, b) - 2*ll(m, b) + ll(m-h, b)) / (h * h)
	hbb := (ll(m, b+h) - 2*ll(m, b) + ll(m, b-h)) / (h * h)
	hmb := (ll(m+h, b+h) - ll(m+h, b-h) - ll(m-h, b+h) + ll(m-h, b-h)) / (4 * h * h)
	det := hmm*hbb - hmb*hmb
	// Inverse of the negative Hessian.
	vm, vb, cmb := -hbb/det, -hmm/det, hmb/det
	if !relNear(g.SEMu, math.Sqrt(vm), 1e-5) || !relNear(g.SEBeta, math.Sqrt(vb), 1e-5) || !relNear(g.CovMuBeta, cmb, 1e-4) {
		t.Errorf("SE (%v, %v, cov %v), finite differences (%v, %v, cov %v)", g.SEMu, g.SEBeta, g.CovMuBeta, math.Sqrt(vm), math.Sqrt(vb), cmb)
	}
	// The score vanishes at the fit.
	if d := (ll(m+h, b) - ll(m-h, b)) / (2 * h); math.Abs(d) > 1e-6*float64(len(x)) {
		t.Errorf("d loglik/d mu = %v at the fit", d)
	}
	if d := (ll(m, b+h) - ll(m, b-h)) / (2 * h); math.Abs(d) > 1e-6*float64(len(x)) {
		t.Errorf("d loglik/d beta = %v at the fit", d)
	}
}

// Recovery of (mu, beta) = (1.2, 1/√2) from 200 samples of 300, and the
// average standard errors against the expected information of the Gumbel law,
// Var(beta) = 6 beta²/(π² n) and Var(mu) = beta² (1 + 6(1-γ)²/π²)/n (from
// memory, classical result; within 5%, a loose bound given the 200-fit average).
func TestFitGumbelCoverage(t *testing.T) {
	const mu, beta, n = 1.2, 1 / math.Sqrt2, 300
	var hm, hb int
	var sm, sb float64
	for r := range reps {
		g, err := FitGumbel(gumbels(uint64(1000+r), n, mu, beta))
		if err != nil {
			t.Fatal(err)
		}
		if covers(g.Mu, g.SEMu, mu) {
			hm++
		}
		if covers(g.Beta, g.SEBeta, beta) {
			hb++
		}
		sm += g.SEMu / reps
		sb += g.SEBeta / reps
	}
	checkCoverage(t, "Gumbel mu", hm)
	checkCoverage(t, "Gumbel beta", hb)
	wantB := math.Sqrt(6/(math.Pi*math.Pi*n)) * beta
	wantM := beta * math.Sqrt((1+6*(1-EulerGamma)*(1-EulerGamma)/(math.Pi*math.Pi))/n)
	if !relNear(sb, wantB, 0.05) || !relNear(sm, wantM, 0.05) {
		t.Errorf("mean SE (mu %v, beta %v), expected information gives (%v, %v)", sm, sb, wantM, wantB)
	}
}

// Location-only fit with the scale known (1/√2): coverage, and SE = beta/√n.
func TestFitGumbelLocationCoverage(t *testing.T) {
	const mu, beta, n = -0.4, 1 / math.Sqrt2, 150
	var hits int
	for r := range reps {
		g, err := FitGumbelLocation(gumbels(uint64(3000+r), n, mu, beta), beta)
		if err != nil {
			t.Fatal(err)
		}
		if g.SEMu != beta/math.Sqrt(n) || g.Beta != beta {
			t.Fatalf("SE %v, beta %v", g.SEMu, g.Beta)
		}
		if covers(g.Mu, g.SEMu, mu) {
			hits++
		}
	}
	checkCoverage(t, "Gumbel location, known scale", hits)
}

// The likelihood-ratio test of the scale: calibrated under the null, and
// powerful against a 25% wrong scale with n = 400 (derived: the expected
// statistic is about n (π²/6)(0.25)² ≈ 40, so a p-value above 0.05 in any of
// 20 fits has probability far below 1e-6).
func TestGumbelScaleLRT(t *testing.T) {
	const mu, beta = 0.3, 1 / math.Sqrt2
	var rej int
	for r := range reps {
		res, err := GumbelScaleLRT(gumbels(uint64(5000+r), 200, mu, beta), beta)
		if err != nil {
			t.Fatal(err)
		}
		if res.P < 0.05 {
			rej++
		}
	}
	checkRejections(t, "Gumbel scale LRT", rej)
	for r := range 20 {
		res, err := GumbelScaleLRT(gumbels(uint64(6000+r), 400, mu, 1.25*beta), beta)
		if err != nil {
			t.Fatal(err)
		}
		if res.P > 0.05 {
			t.Errorf("scale 1.25/√2 not rejected against 1/√2: p = %v", res.P)
		}
	}
}

func TestFitGumbelBadInput(t *testing.T) {
	_, err := FitGumbel([]float64{1, 2})
	wantErr(t, err, "2 points")
	_, err = FitGumbel([]float64{1, math.NaN(), 2})
	wantErr(t, err, "[1]", "NaN")
	_, err = FitGumbel([]float64{3, 3, 3})
	wantErr(t, err, "constant", "3")
	_, err = FitGumbelLocation([]float64{1, 2}, -1)
	wantErr(t, err, "scale -1")
	// Extreme offsets do not overflow the weights.
	x := gumbels(9, 200, 1e6, 1e-3)
	g, err := FitGumbel(x)
	if err != nil || math.Abs(g.Mu-1e6) > 1e-3 || math.Abs(g.Beta-1e-3) > 3e-4 {
		t.Errorf("offset sample: %+v, %v", g, err)
	}
}
