package fit

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// RayleighResult is the outcome of the Rayleigh test of uniformity.
type RayleighResult struct {
	D, N       int
	MeanLength float64 // |mean resultant vector|
	Stat       float64 // d n |mean|², asymptotically χ²_d under uniformity
	P          float64 // χ²_d upper-tail p-value
}

// Rayleigh tests whether the unit vectors u (each of length d >= 2) are
// uniform on the sphere S^{d-1} with the Rayleigh test: under uniformity the
// mean resultant r̄ = |(1/n) Σ u_i| satisfies d n r̄² → χ²_d in law, since
// each coordinate of a uniform unit vector has variance 1/d ("Directional
// Statistics", Wiley, 2000, section 10.4.1). It is powerful against a single
// preferred direction, not against antipodal clustering. Vectors must have
// length within 1e-6 of 1.
func Rayleigh(u [][]float64) (RayleighResult, error) {
	if len(u) == 0 {
		return RayleighResult{}, fmt.Errorf("fit: Rayleigh test has no vectors")
	}
	d := len(u[0])
	if d < 2 {
		return RayleighResult{}, fmt.Errorf("fit: Rayleigh test needs dimension >= 2, got %d (use SignTest for d = 1)", d)
	}
	s := make([]float64, d)
	for i, v := range u {
		if len(v) != d {
			return RayleighResult{}, fmt.Errorf("fit: direction %d has %d coordinates, want %d", i, len(v), d)
		}
		var r2 float64
		for _, c := range v {
			r2 += c * c
		}
		if !(math.Abs(r2-1) <= 2e-6) {
			return RayleighResult{}, fmt.Errorf("fit: direction %d has length %v, not a unit vector", i, math.Sqrt(r2))
		}
		for k, c := range v {
			s[k] += c
		}
	}
	n := float64(len(u))
	var r2 float64
	for _, c := range s {
		r2 += (c / n) * (c / n)
	}
	stat := float64(d) * n * r2
	return RayleighResult{D: d, N: len(u), MeanLength: math.Sqrt(r2), Stat: stat, P: chi2Survival(stat, d)}, nil
}

// Angles returns the polar angles in [0, 2π) of the planar unit vectors u,
// for KSUniform(angles, 0, 2π).
func Angles(u [][]float64) ([]float64, error) {
	a := make([]float64, len(u))
	for i, v := range u {
		if len(v) != 2 {
			return nil, fmt.Errorf("fit: direction %d has %d coordinates, angles need 2", i, len(v))
		}
		t := math.Atan2(v[1], v[0])
		if t < 0 {
			t += 2 * math.Pi
		}
		if t >= 2*math.Pi {
			t = 0
		}
		a[i] = t
	}
	return a, nil
}

// SignResult is the outcome of the two-sided sign test.
type SignResult struct {
	Plus, N int
	P       float64
}

// SignTest tests whether the directions ±1 in dimension d = 1 are equally
// likely: the exact two-sided binomial test of Plus successes in N trials with
// success probability 1/2, p = min(1, 2 P(K <= min(Plus, N-Plus))). For p = 1/2
// this equals scipy.stats.binomtest(Plus, N).pvalue.
func SignTest(plus, n int) (SignResult, error) {
	if n < 1 || plus < 0 || plus > n {
		return SignResult{}, fmt.Errorf("fit: sign test count %d out of %d trials is invalid", plus, n)
	}
	k := min(plus, n-plus)
	p := math.Min(1, 2*distuv.Binomial{N: float64(n), P: 0.5}.CDF(float64(k)))
	return SignResult{Plus: plus, N: n, P: p}, nil
}

// chi2Survival returns P(χ²_k > x).
func chi2Survival(x float64, k int) float64 {
	return distuv.ChiSquared{K: float64(k)}.Survival(x)
}
