package engine

import (
	"math"
)

// DirectionGrid returns the fixed unit vectors on which the directional derivative
// martingale Z_s(u) is recorded: d = 1: {+1, -1}; d = 2: n equally spaced angles
// 2 pi j / n; d = 3: the Fibonacci lattice of n points (quasi-uniform); d >= 4: n points
// of a fixed pseudo-random uniform sample (normalised Gaussians from a fixed seed).
// The grid is a pure function of (d, n); it is returned flat, n vectors of length d.
func DirectionGrid(d, n int) []float64 {
	if d == 1 {
		return []float64{1, -1}
	}
	g := make([]float64, 0, n*d)
	switch d {
	case 2:
		for j := 0; j < n; j++ {
			s, c := psincos(2 * math.Pi * float64(j) / float64(n))
			g = append(g, c, s)
		}
	case 3:
		golden := math.Pi * (3 - math.Sqrt(5))
		for j := 0; j < n; j++ {
			z := 1 - (float64(2*float64(j))+1)/float64(n)
			r := math.Sqrt(1 - float64(z*z))
			s, c := psincos(golden * float64(j))
			g = append(g, r*c, r*s, z)
		}
	default:
		var rng nodeRand // the draws of rand.New(rand.NewPCG(d, n)), with portable tails
		rng.seed(key{hi: uint64(d), lo: uint64(n)})
		v := make([]float64, d)
		for j := 0; j < n; j++ {
			var s float64
			for i := range v {
				v[i] = rng.NormFloat64()
				s += float64(v[i] * v[i])
			}
			s = math.Sqrt(s)
			for i := range v {
				g = append(g, v[i]/s)
			}
		}
	}
	return g
}
