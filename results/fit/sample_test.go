package fit

import (
	"math"
	"testing"
)

// gumbelSkew is the skewness of every Gumbel law, 12√6 ζ(3)/π³ ≈ 1.1395470994
// (NIST/SEMATECH e-Handbook of Statistical Methods, Extreme Value Type I
// distribution, which lists 1.13955; value from memory to ten digits).
const gumbelSkew = 1.1395470994046486

// Moments of Gumbel(0, 1) samples of 2000: the delta-method intervals for the
// mean (γ), the standard deviation (π/√6) and the skewness cover the handbook
// values at the coverage-check rate.
func TestSampleMomentsCoverage(t *testing.T) {
	g := Gumbel{0, 1}
	var hm, hs, hk int
	for r := range reps {
		m, err := SampleMoments(gumbels(uint64(11000+r), 2000, 0, 1))
		if err != nil {
			t.Fatal(err)
		}
		if covers(m.Mean, m.SEMean, g.Mean()) {
			hm++
		}
		if covers(m.StdDev, m.SEStdDev, g.StdDev()) {
			hs++
		}
		if covers(m.Skewness, m.SESkew, gumbelSkew) {
			hk++
		}
	}
	checkCoverage(t, "mean", hm)
	checkCoverage(t, "standard deviation", hs)
	checkCoverage(t, "skewness", hk)
}

// The order-statistic interval of the median of Gumbel samples of 200 covers
// the true median mu - beta log log 2 (handbook). The interval is
// conservative: its exact coverage c (reported) is at least 0.95, so the
// check allows 176..199 hits; with c = 0.96 the false-alarm rate is
// P(K <= 175) + P(K = 200) = 2.9e-4 (derived, binomial tail).
func TestQuantileCoverage(t *testing.T) {
	g := Gumbel{1, 1 / math.Sqrt2}
	var hits int
	var cov float64
	for r := range reps {
		q, err := Quantile(gumbels(uint64(12000+r), 200, g.Mu, g.Beta), 0.5, 0.95)
		if err != nil {
			t.Fatal(err)
		}
		cov = q.Coverage
		if q.Lo <= g.Median() && g.Median() <= q.Hi {
			hits++
		}
	}
	if cov < 0.95 || cov > 0.97 {
		t.Errorf("stated coverage %v, want in [0.95, 0.97]", cov)
	}
	if hits < 176 || hits > 199 {
		t.Errorf("median interval covered in %d of %d, want 176..199", hits, reps)
	}
	t.Logf("median interval: coverage %d/%d (stated %.4f)", hits, reps, cov)
}

// Exact order-statistic ranks for n = 10, p = 1/2, level 0.9 (derived from the
// Binomial(10, 1/2) CDF: P(K <= 1) = 11/1024 <= 0.05 < P(K <= 2) = 56/1024, so
// the interval is [x_(2), x_(9)] with coverage 1 - 2·11/1024).
func TestQuantileRanks(t *testing.T) {
	x := []float64{9, 3, 7, 1, 5, 2, 10, 4, 8, 6}
	q, err := Quantile(x, 0.5, 0.9)
	if err != nil {
		t.Fatal(err)
	}
	if q.Lo != 2 || q.Hi != 9 || math.Abs(q.Coverage-(1-22.0/1024)) > 1e-12 || q.Value != 5.5 {
		t.Errorf("got %+v", q)
	}
	_, err = Quantile(x[:3], 0.5, 0.99)
	wantErr(t, err, "3 points are too few")
	_, err = Quantile(x, 1.5, 0.9)
	wantErr(t, err, "quantile level 1.5")
	_, err = SampleMoments([]float64{2, 2, 2})
	wantErr(t, err, "constant")
	// Huge and tiny scales: fourth powers of the raw deviations overflow (2e77) or
	// underflow (1e-160); the moments are taken in units of the largest deviation, so
	// every figure stays finite and the skewness is that of {0, 1, 3} rescaled: the
	// same for both (derived: scale-free).
	big, err := SampleMoments([]float64{2e77, -2e77, 5e76})
	if err != nil {
		t.Fatal(err)
	}
	small, err := SampleMoments([]float64{1e-160, 3e-160, 7e-160})
	if err != nil {
		t.Fatal(err)
	}
	ref, _ := SampleMoments([]float64{2, -2, 0.5})
	for _, m := range []Moments{big, small} {
		for _, v := range []float64{m.StdDev, m.SEStdDev, m.Skewness, m.SESkew} {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				t.Fatalf("non-finite moment in %+v", m)
			}
		}
	}
	if math.Abs(big.Skewness-ref.Skewness) > 1e-12 {
		t.Errorf("skewness at scale 1e77: %v, at scale 1: %v", big.Skewness, ref.Skewness)
	}
}
