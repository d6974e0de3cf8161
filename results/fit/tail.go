package fit

import (
	"fmt"
	"math"
	"math/bits"
	"slices"
	"sort"
)

// Line is an ordinary least-squares straight line y ≈ Intercept + Slope x.
type Line struct {
	Slope, Intercept     float64
	SESlope, SEIntercept float64 // classical OLS standard errors, residual variance RSS/(m-2)
	R                    float64 // Pearson correlation of the points
	M                    int     // number of points
}

// FitLine fits a straight line to the points (x_i, y_i) by ordinary least
// squares. The standard errors are the classical ones, assuming independent
// residuals of equal variance estimated by RSS/(m-2); the definitions match
// scipy.stats.linregress (slope, intercept, rvalue, stderr, intercept_stderr).
// At least 3 points with distinct x are needed.
func FitLine(x, y []float64) (Line, error) {
	if len(x) != len(y) {
		return Line{}, fmt.Errorf("fit: line fit has %d x values but %d y values", len(x), len(y))
	}
	if err := checkSample("line x", x, 3); err != nil {
		return Line{}, err
	}
	if err := checkSample("line y", y, 3); err != nil {
		return Line{}, err
	}
	m := float64(len(x))
	xb, yb := mean(x), mean(y)
	var sxx, syy, sxy float64
	for i := range x {
		dx, dy := x[i]-xb, y[i]-yb
		sxx += dx * dx
		syy += dy * dy
		sxy += dx * dy
	}
	if sxx == 0 {
		return Line{}, fmt.Errorf("fit: line fit has all x equal to %v", x[0])
	}
	slope := sxy / sxx
	icept := yb - slope*xb
	var rss float64
	for i := range x {
		r := y[i] - icept - slope*x[i]
		rss += r * r
	}
	s2 := rss / (m - 2)
	seS := math.Sqrt(s2 / sxx)
	var sx2 float64
	for _, v := range x {
		sx2 += v * v
	}
	r := 0.0
	if syy > 0 {
		r = sxy / math.Sqrt(sxx*syy)
	}
	return Line{
		Slope: slope, Intercept: icept,
		SESlope: seS, SEIntercept: seS * math.Sqrt(sx2/m),
		R: r, M: len(x),
	}, nil
}

// TailThreshold returns the threshold above which the top fraction frac of x
// lies: the empirical (1-frac)-quantile, taken as the value of the order
// statistic just below the top ⌈frac·n⌉ points, so that exactly that many
// points exceed it when there are no ties.
func TailThreshold(x []float64, frac float64) (float64, error) {
	if err := checkSample("tail sample", x, 2); err != nil {
		return 0, err
	}
	if !(frac > 0 && frac < 1) {
		return 0, fmt.Errorf("fit: tail fraction %v is not in (0, 1)", frac)
	}
	k := int(math.Ceil(frac * float64(len(x))))
	if k >= len(x) {
		k = len(x) - 1
	}
	// Only one order statistic is needed: selected in linear time, not sorted (the
	// report calls this once per bootstrap resample, hundreds of times per cell).
	return orderStat(slices.Clone(x), len(x)-1-k), nil
}

// orderStat returns the value at index i of s sorted ascending, rearranging s: Hoare's
// selection ("Algorithm 65: Find", Communications of the ACM, 1961) with a
// median-of-three pivot, falling back to sorting what is left when the partitions stop
// shrinking fast enough, so the worst case stays O(n log n). s holds no NaN.
func orderStat(s []float64, i int) float64 {
	lo, hi := 0, len(s)-1
	for budget := 2 * bits.Len(uint(len(s))); lo < hi; budget-- {
		if budget == 0 {
			sort.Float64s(s[lo : hi+1])
			break
		}
		m := lo + (hi-lo)/2
		if s[m] < s[lo] {
			s[m], s[lo] = s[lo], s[m]
		}
		if s[hi] < s[lo] {
			s[hi], s[lo] = s[lo], s[hi]
		}
		if s[hi] < s[m] {
			s[hi], s[m] = s[m], s[hi]
		}
		pivot := s[m]
		a, b := lo, hi
		for a <= b {
			for s[a] < pivot {
				a++
			}
			for pivot < s[b] {
				b--
			}
			if a <= b {
				s[a], s[b] = s[b], s[a]
				a++
				b--
			}
		}
		// Now s[lo..b] <= pivot <= s[a..hi], and everything strictly between is the pivot.
		switch {
		case i <= b:
			hi = b
		case i >= a:
			lo = a
		default:
			return s[i]
		}
	}
	return s[i]
}

// TailGrid returns m equally spaced levels from the threshold u up to the
// largest level that still has at least minCount points of x strictly above
// it, for use with TailRegression.
func TailGrid(x []float64, u float64, m, minCount int) ([]float64, error) {
	if err := checkSample("tail sample", x, 2); err != nil {
		return nil, err
	}
	if m < 3 {
		return nil, fmt.Errorf("fit: tail grid needs at least 3 levels, got %d", m)
	}
	if minCount < 1 {
		return nil, fmt.Errorf("fit: tail grid minimum count %d is below 1", minCount)
	}
	s := slices.Clone(x)
	sort.Float64s(s)
	if len(s) <= minCount {
		return nil, fmt.Errorf("fit: tail grid minimum count %d is not below the sample size %d", minCount, len(s))
	}
	top := s[len(s)-1-minCount] // exactly minCount points above it when untied
	if !(top > u) {
		return nil, fmt.Errorf("fit: tail threshold %v leaves fewer than %d points above it", u, minCount+1)
	}
	g := make([]float64, m)
	for i := range g {
		g[i] = u + (top-u)*float64(i)/float64(m-1)
	}
	return g, nil
}

// TailRegression is the regression estimate of an exponential upper tail: the
// least-squares line through the points (level_j, log S_n(level_j)), where
// S_n(t) = #{x_i > t}/n is the empirical survival function. If P(X > t) ≈
// C e^{-λ t} the slope estimates -λ. Levels with no point above them are
// dropped.
//
// The standard errors are those of ordinary least squares (FitLine), which
// treats the points as independent; since the survival values at nearby
// levels share exceedances, they understate the true uncertainty. For an
// honest interval, bootstrap the slope (Bootstrap) or use TailRate.
func TailRegression(x, levels []float64) (Line, error) {
	if err := checkSample("tail sample", x, 2); err != nil {
		return Line{}, err
	}
	if err := checkSample("tail levels", levels, 3); err != nil {
		return Line{}, err
	}
	lx, ly := TailPoints(x, levels)
	if len(lx) < 3 {
		return Line{}, fmt.Errorf("fit: only %d tail levels have points above them, need 3", len(lx))
	}
	return FitLine(lx, ly)
}

// TailPoints returns the regression points of TailRegression: the levels that
// have at least one point of x above them and log S_n at each.
func TailPoints(x, levels []float64) (lx, ly []float64) {
	s := slices.Clone(x)
	sort.Float64s(s)
	n := float64(len(s))
	for _, t := range levels {
		above := len(s) - sort.Search(len(s), func(i int) bool { return s[i] > t })
		if above == 0 {
			continue
		}
		lx = append(lx, t)
		ly = append(ly, math.Log(float64(above)/n))
	}
	return lx, ly
}

// TailRateFit is the maximum-likelihood exponential rate of the excesses over
// a threshold.
type TailRateFit struct {
	Rate, SE  float64 // λ̂ = 1/mean excess and its standard error λ̂/√k
	Threshold float64
	K         int // number of exceedances
}

// TailRate is the maximum-likelihood estimate of an exponential upper tail:
// modelling the excesses x_i - u of the k points above u as Exp(λ), the MLE is
// λ̂ = 1/mean(x_i - u) with standard error λ̂/√k from the observed information
// k/λ̂². Unlike TailRegression it uses each exceedance once and its standard
// error is a valid one (asymptotically, for an exactly exponential tail).
// At least 2 exceedances are needed.
func TailRate(x []float64, u float64) (TailRateFit, error) {
	if err := checkSample("tail sample", x, 2); err != nil {
		return TailRateFit{}, err
	}
	if math.IsNaN(u) || math.IsInf(u, 0) {
		return TailRateFit{}, fmt.Errorf("fit: tail threshold %v is not finite", u)
	}
	var ex []float64
	for _, v := range x {
		if v > u {
			ex = append(ex, v-u)
		}
	}
	if len(ex) < 2 {
		return TailRateFit{}, fmt.Errorf("fit: tail threshold %v has %d exceedances, need at least 2", u, len(ex))
	}
	rate := 1 / mean(ex)
	return TailRateFit{Rate: rate, SE: rate / math.Sqrt(float64(len(ex))), Threshold: u, K: len(ex)}, nil
}
