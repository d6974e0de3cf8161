package fit

import (
	"fmt"
	"math"
	"math/rand/v2"
	"sort"
)

// Interval is a point estimate with a bootstrap percentile interval.
type Interval struct {
	Estimate float64 // the statistic on the original sample
	Lo, Hi   float64 // percentile interval
	SE       float64 // standard deviation of the bootstrap replicates
	B        int     // replicates used (those with a finite statistic)
}

// BootstrapIndex is the nonparametric bootstrap over n observations: it draws
// b resamples of the indices 0..n-1 with replacement, evaluates stat on each,
// and returns the percentile interval at the given level, the (α/2, 1-α/2)
// quantiles of the replicates ("An Introduction to the Bootstrap", Chapman &
// Hall, 1993, ch. 13). Passing indices lets stat resample paired or
// vector-valued data. The stream is math/rand/v2's PCG seeded with seed, so the
// result is a pure function of its arguments. Replicates whose statistic is
// not finite are dropped; if more than half are, it is an error. stat may
// keep or modify the index slice only during the call.
func BootstrapIndex(n int, stat func(idx []int) float64, b int, level float64, seed uint64) (Interval, error) {
	if n < 2 {
		return Interval{}, fmt.Errorf("fit: bootstrap needs at least 2 observations, got %d", n)
	}
	if b < 10 {
		return Interval{}, fmt.Errorf("fit: bootstrap needs at least 10 replicates, got %d", b)
	}
	if err := checkLevel(level); err != nil {
		return Interval{}, err
	}
	idx := make([]int, n)
	for i := range idx {
		idx[i] = i
	}
	est := stat(idx)
	rng := rand.New(rand.NewPCG(seed, 0x9e3779b97f4a7c15))
	reps := make([]float64, 0, b)
	for r := 0; r < b; r++ {
		for i := range idx {
			idx[i] = rng.IntN(n)
		}
		if v := stat(idx); !math.IsNaN(v) && !math.IsInf(v, 0) {
			reps = append(reps, v)
		}
	}
	if 2*len(reps) < b {
		return Interval{}, fmt.Errorf("fit: bootstrap statistic was not finite in %d of %d replicates", b-len(reps), b)
	}
	sort.Float64s(reps)
	alpha := 1 - level
	m := mean(reps)
	var ss float64
	for _, v := range reps {
		ss += (v - m) * (v - m)
	}
	return Interval{
		Estimate: est,
		Lo:       sortedQuantile(reps, alpha/2),
		Hi:       sortedQuantile(reps, 1-alpha/2),
		SE:       math.Sqrt(ss / float64(len(reps)-1)),
		B:        len(reps),
	}, nil
}

// Bootstrap is BootstrapIndex for a statistic of one sample: stat receives a
// resample of x (a scratch slice it may reorder) and the original x is never
// modified.
func Bootstrap(x []float64, stat func([]float64) float64, b int, level float64, seed uint64) (Interval, error) {
	if err := checkSample("bootstrap sample", x, 2); err != nil {
		return Interval{}, err
	}
	buf := make([]float64, len(x))
	return BootstrapIndex(len(x), func(idx []int) float64 {
		for i, j := range idx {
			buf[i] = x[j]
		}
		return stat(buf)
	}, b, level, seed)
}

// sortedQuantile interpolates linearly at rank (n-1)p of sorted s.
func sortedQuantile(s []float64, p float64) float64 {
	h := float64(len(s)-1) * p
	i := int(math.Floor(h))
	if i+1 >= len(s) {
		return s[len(s)-1]
	}
	return s[i] + (h-float64(i))*(s[i+1]-s[i])
}
