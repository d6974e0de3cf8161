package fit

import (
	"fmt"
	"math"
	"slices"
	"sort"

	"gonum.org/v1/gonum/stat/distuv"
)

// QuantileEstimate is a sample quantile with a distribution-free interval.
type QuantileEstimate struct {
	P        float64 // probability level
	Value    float64 // point estimate (linear interpolation of order statistics)
	Lo, Hi   float64 // order-statistic confidence interval
	Coverage float64 // exact coverage of [Lo, Hi] for continuous data (>= the level asked)
	// SE is (Hi-Lo)/(2 z), z the normal quantile of the level asked: a
	// standard error equivalent of the interval, for weighting fits.
	SE float64
}

// Quantile estimates the p-quantile of x with a level-confidence interval.
//
// The point estimate interpolates linearly between order statistics at rank
// (n-1)p (the "type 7" definition, the default of scipy and numpy). The
// interval is the classical distribution-free one from order statistics: with
// K ~ Binomial(n, p) the number of points below the true quantile,
// [x_(l), x_(u)] covers it with probability P(l <= K < u); l and u are chosen
// as the largest l and smallest u with P(K < l) <= α/2 and P(K >= u) <= α/2,
// α = 1-level, so the coverage is at least level for continuous data.
// Needs enough points that such ranks exist (roughly n >= log(α/2)/log(max(p,1-p))).
func Quantile(x []float64, p, level float64) (QuantileEstimate, error) {
	if err := checkSample("quantile sample", x, 2); err != nil {
		return QuantileEstimate{}, err
	}
	if !(p > 0 && p < 1) {
		return QuantileEstimate{}, fmt.Errorf("fit: quantile level %v is not in (0, 1)", p)
	}
	if err := checkLevel(level); err != nil {
		return QuantileEstimate{}, err
	}
	s := slices.Clone(x)
	sort.Float64s(s)
	n := len(s)
	h := float64(n-1) * p
	i := int(math.Floor(h))
	v := s[i]
	if i+1 < n {
		v += (h - float64(i)) * (s[i+1] - s[i])
	}
	alpha := 1 - level
	bin := distuv.Binomial{N: float64(n), P: p}
	// P(K < r) = CDF(r-1); ranks r are 1-based positions of order statistics.
	l := 0
	for r := 1; r <= n; r++ {
		if bin.CDF(float64(r-1)) <= alpha/2 {
			l = r
		} else {
			break
		}
	}
	u := 0
	for r := n; r >= 1; r-- {
		if 1-bin.CDF(float64(r-1)) <= alpha/2 { // P(K >= r)
			u = r
		} else {
			break
		}
	}
	if l == 0 || u == 0 || l >= u {
		return QuantileEstimate{}, fmt.Errorf("fit: %d points are too few for a %v interval of the %v-quantile", n, level, p)
	}
	cov := bin.CDF(float64(u-1)) - bin.CDF(float64(l-1))
	z := distuv.UnitNormal.Quantile(1 - alpha/2)
	lo, hi := s[l-1], s[u-1]
	return QuantileEstimate{P: p, Value: v, Lo: lo, Hi: hi, Coverage: cov, SE: (hi - lo) / (2 * z)}, nil
}

// Moments are the sample mean, standard deviation and skewness with their
// standard errors.
type Moments struct {
	N                int
	Mean, SEMean     float64
	StdDev, SEStdDev float64 // StdDev uses the n-1 divisor
	Skewness, SESkew float64 // Skewness is g1 = m3/m2^{3/2} (scipy.stats.skew with bias=True)
}

// SampleMoments returns the mean, standard deviation and skewness of x with
// standard errors from the nonparametric delta method: each estimator's
// variance is the sample mean of its squared empirical influence function
// divided by n (see "All of Nonparametric Statistics", Springer, 2006, ch. 3).
// For the mean this is s/√n; for the standard deviation it is
// √((m4 - m2²)/(4 m2 n)); for the skewness the influence function is
// m2^{-3/2} ((x-x̄)³ - m3 - 3 m2 (x-x̄)) - (3/2) m3 m2^{-5/2} ((x-x̄)² - m2)
// (derived), which, unlike the normal-theory formula, remains valid for
// skewed laws such as the Gumbel. Needs at least 3 points, not all equal.
func SampleMoments(x []float64) (Moments, error) {
	if err := checkSample("moment sample", x, 3); err != nil {
		return Moments{}, err
	}
	n := float64(len(x))
	xb := mean(x)
	// The deviations are taken in units of the largest one, s, so that their fourth
	// powers neither overflow nor underflow whatever the data's scale; the moments in
	// these units are m2/s², m3/s³, m4/s⁴, and skewness is free of the unit.
	var s float64
	for _, v := range x {
		s = math.Max(s, math.Abs(v-xb))
	}
	if s == 0 {
		return Moments{}, fmt.Errorf("fit: moment sample is constant (all %v)", x[0])
	}
	if math.IsInf(s, 0) {
		return Moments{}, fmt.Errorf("fit: moment sample spans more than the largest float")
	}
	var m2, m3, m4 float64
	for _, v := range x {
		d := (v - xb) / s
		m2 += d * d
		m3 += d * d * d
		m4 += d * d * d * d
	}
	m2, m3, m4 = m2/n, m3/n, m4/n
	sd := s * math.Sqrt(m2*n/(n-1))
	g1 := m3 / math.Pow(m2, 1.5)
	var vs float64
	for _, v := range x {
		d := (v - xb) / s
		inf := math.Pow(m2, -1.5)*(d*d*d-m3-3*m2*d) - 1.5*m3*math.Pow(m2, -2.5)*(d*d-m2)
		vs += inf * inf
	}
	return Moments{
		N:    len(x),
		Mean: xb, SEMean: sd / math.Sqrt(n),
		StdDev: sd, SEStdDev: s * math.Sqrt(math.Max(0, m4-m2*m2)/(4*m2*n)),
		Skewness: g1, SESkew: math.Sqrt(vs/n) / math.Sqrt(n),
	}, nil
}
