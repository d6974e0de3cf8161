package engine

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/integrate/quad"
)

// Phi_d(z) = 0F1(; d/2; z^2/4) is the sphere average of exp(z <x,u>) (SPEC §2). Closed
// forms: Phi_1 = cosh, Phi_3 = sinh z / z (handbook facts). For other d, the average
// over S^{d-1} of exp(z u_1) is
// integral_{-1}^{1} e^{zx} (1-x^2)^{(d-3)/2} dx / B(1/2, (d-1)/2) (the density of one
// coordinate of a uniform point on the sphere, derived), computed here by Gauss-Legendre
// quadrature in scaled form e^{z(x-1)}.
func TestPhiScaledClosedForms(t *testing.T) {
	for _, z := range []float64{0, 1e-9, 0.3, 1, 5, 19.9, 20.1, 50, 300} {
		if got, want := PhiScaled(1, z), 0.5*(1+math.Exp(-2*z)); math.Abs(got-want) > 1e-15*want {
			t.Errorf("d=1 z=%v: %v want %v", z, got, want)
		}
		want := 1.0
		if z > 0 {
			want = -math.Expm1(-2*z) / (2 * z)
		}
		if got := PhiScaled(3, z); math.Abs(got-want) > 1e-14*want {
			t.Errorf("d=3 z=%v: %v want %v", z, got, want)
		}
	}
}

func TestPhiScaledQuadrature(t *testing.T) {
	for _, d := range []int{2, 4, 5, 6} {
		a := float64(d-3) / 2
		lb, _ := math.Lgamma(0.5)
		lc, _ := math.Lgamma(float64(d-1) / 2)
		ld, _ := math.Lgamma(float64(d) / 2)
		beta := math.Exp(lb + lc - ld)
		for _, z := range []float64{0, 0.5, 2, 10, 19.5, 20.5, 35, 50} {
			// substitute x = cos(theta) to remove the endpoint singularity for d = 2
			f := func(th float64) float64 {
				x := math.Cos(th)
				return math.Exp(z*(x-1)) * math.Pow(math.Sin(th), 2*a+1)
			}
			want := quad.Fixed(f, 0, math.Pi, 400, nil, 0) / beta
			got := PhiScaled(d, z)
			if math.Abs(got-want) > 1e-10*want {
				t.Errorf("d=%d z=%v: %v, quadrature %v", d, z, got, want)
			}
		}
	}
}

// Large arguments: against the leading terms of the Hankel expansion of I_nu
// (Abramowitz and Stegun 9.7.1), with twice the first omitted term as the tolerance (derived).
func TestPhiScaledLarge(t *testing.T) {
	for _, d := range []int{2, 4, 8} {
		nu := float64(d)/2 - 1
		mu := 4 * nu * nu
		lg, _ := math.Lgamma(float64(d) / 2)
		for _, z := range []float64{100, 700, 5000, 1e6} {
			lead := math.Exp(lg + nu*math.Log(2/z) - 0.5*math.Log(2*math.Pi*z))
			want := lead * (1 - (mu-1)/(8*z) + (mu-1)*(mu-9)/(128*z*z))
			tol := lead * math.Abs((mu-1)*(mu-9)*(mu-25)/(3072*z*z*z)) * 2
			got := PhiScaled(d, z)
			if math.IsNaN(got) || math.IsInf(got, 0) || math.Abs(got-want) > tol+1e-15*want {
				t.Errorf("d=%d z=%v: %v want %v ± %v", d, z, got, want, tol)
			}
		}
	}
}
