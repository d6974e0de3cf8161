package engine

import "math"

// PhiScaled returns e^{-z} Phi_d(z) for z >= 0, where
//
//	Phi_d(z) = Gamma(d/2) (2/z)^{d/2-1} I_{d/2-1}(z) = 0F1(; d/2; z^2/4)
//
// is the average of exp(z <x, u>) over the uniform probability measure on the unit sphere
// S^{d-1}, for any unit vector x. The scaled form never overflows: Phi_d(z) grows like e^z.
//
// Method: closed forms for d = 1 (cosh) and d = 3 (sinh z / z); otherwise the power series
// of 0F1 (with running rescaling, so it cannot overflow) for small and moderate z, and the
// Hankel asymptotic expansion of I_nu (Abramowitz and Stegun 9.7.1) for z large against nu^2.
func PhiScaled(d int, z float64) float64 {
	if z < 0 {
		z = -z // Phi_d is even
	}
	switch d {
	case 1:
		return 0.5 * (1 + pexp(-2*z))
	case 3:
		return oneMinusExpOver(2 * z)
	}
	b := float64(float64(d) / 2) // rounded: no fused multiply-add with the next line
	nu := b - 1
	if z > 20 && z > float64(2*nu*nu) {
		return phiAsymptotic(b, nu, z)
	}
	return phiSeries(b, z)
}

// phiSeries sums 0F1(; b; z^2/4) = sum_k (z^2/4)^k / (k! (b)_k) times e^{-z}, keeping the
// running total below 1e200 by moving powers of 1e200 into a separate exponent.
func phiSeries(b, z float64) float64 {
	q := z * z / 4
	term, sum := 1.0, 1.0
	scale := 0.0 // log of the factor taken out of term and sum
	for k := 0.0; ; k++ {
		term = float64(term * (q / ((k + 1) * (b + k))))
		sum += term
		if term < 1e-17*sum {
			break
		}
		if sum > 1e200 {
			term *= 1e-200
			sum *= 1e-200
			scale += 200 * math.Ln10
		}
	}
	return sum * pexp(scale-z)
}

// phiAsymptotic uses e^{-z} I_nu(z) ~ (2 pi z)^{-1/2} sum_k (-1)^k a_k(nu) / z^k with
// a_k(nu) = prod_{j=1..k} (4 nu^2 - (2j-1)^2) / (k! 8^k); the e^{-2z} companion term is
// below double precision for z > 20.
func phiAsymptotic(b, nu, z float64) float64 {
	mu := float64(4 * nu * nu)
	term, sum := 1.0, 1.0
	for k := 1; k < 60; k++ {
		odd := float64(2*k - 1)
		next := -term * (mu - float64(odd*odd)) / (float64(k) * 8 * z)
		if math.Abs(next) >= math.Abs(term) || next == 0 {
			break
		}
		term = next
		sum += term
		if math.Abs(term) < 1e-17*math.Abs(sum) {
			break
		}
	}
	lg := lgammaHalf[int(2*b)]
	// Gamma(b) (2/z)^nu (2 pi z)^{-1/2}
	return sum * pexp(lg+float64(nu*plog(2/z))-float64(0.5*plog(2*math.Pi*z)))
}
