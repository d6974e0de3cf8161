package law

import (
	"fmt"
	"testing"
)

// BenchmarkMedianD3T100 is the reference workload: the median of R*_t at t = 100 in
// d = 3 to error <= 1e-4 in probability, on one thread.
func BenchmarkMedianD3T100(b *testing.B) {
	for b.Loop() {
		if _, _, err := Quantile(std(3), 100, 0.5, Options{Tolerance: 1e-4, Threads: 1}); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkMedianGrowth shows how the cost grows with the horizon (d = 3, one thread):
// the median (root finding, several solves) and one value of the distribution function
// at the median, each to error <= 1e-4 in probability.
func BenchmarkMedianGrowth(b *testing.B) {
	for _, T := range []float64{25, 50, 100, 200, 400} {
		b.Run(fmt.Sprintf("quantile/t=%g", T), func(b *testing.B) {
			for b.Loop() {
				if _, _, err := Quantile(std(3), T, 0.5, Options{Tolerance: 1e-4, Threads: 1}); err != nil {
					b.Fatal(err)
				}
			}
		})
		b.Run(fmt.Sprintf("cdf/t=%g", T), func(b *testing.B) {
			R := guess(3, T, 0.5, false)
			for b.Loop() {
				if _, err := CDF(std(3), T, []float64{R}, Options{Tolerance: 1e-4, Threads: 1}); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
