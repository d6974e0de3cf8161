package fit

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// EulerGamma is the Euler–Mascheroni constant γ.
const EulerGamma = 0.57721566490153286060651209008240243104215933593992

// Gumbel is the Gumbel (extreme value type I, maximum) distribution with
// location Mu and scale Beta > 0: CDF exp(-exp(-(x-Mu)/Beta)).
//
// The formulas follow the NIST/SEMATECH e-Handbook of Statistical Methods,
// section "Extreme Value Type I Distribution".
type Gumbel struct {
	Mu, Beta float64
}

// CDF returns P(X <= x) = exp(-exp(-(x-Mu)/Beta)).
func (g Gumbel) CDF(x float64) float64 { return math.Exp(-math.Exp(-(x - g.Mu) / g.Beta)) }

// Survival returns P(X > x), accurate far in the upper tail.
func (g Gumbel) Survival(x float64) float64 { return -math.Expm1(-math.Exp(-(x - g.Mu) / g.Beta)) }

// LogPDF returns the log density -log Beta - z - exp(-z), z = (x-Mu)/Beta.
func (g Gumbel) LogPDF(x float64) float64 {
	z := (x - g.Mu) / g.Beta
	return -math.Log(g.Beta) - z - math.Exp(-z)
}

// Quantile returns the p-quantile Mu - Beta log(-log p), for 0 < p < 1.
func (g Gumbel) Quantile(p float64) float64 { return g.Mu - g.Beta*math.Log(-math.Log(p)) }

// Mean returns Mu + γ Beta, γ the Euler–Mascheroni constant.
func (g Gumbel) Mean() float64 { return g.Mu + EulerGamma*g.Beta }

// Median returns Mu - Beta log log 2.
func (g Gumbel) Median() float64 { return g.Mu - g.Beta*math.Log(math.Ln2) }

// Variance returns π² Beta² / 6.
func (g Gumbel) Variance() float64 { return math.Pi * math.Pi * g.Beta * g.Beta / 6 }

// StdDev returns π Beta / √6.
func (g Gumbel) StdDev() float64 { return math.Pi * g.Beta / math.Sqrt(6) }

// GumbelFit is a maximum-likelihood Gumbel fit.
type GumbelFit struct {
	Gumbel               // fitted location and scale
	SEMu, SEBeta float64 // standard errors from the inverse observed information
	CovMuBeta    float64 // covariance of the two estimates
	LogLik       float64 // maximised log-likelihood
	N            int     // sample size
	Iterations   int     // Newton steps on the profile equation
}

// FitGumbel fits a Gumbel (maximum) law to x by maximum likelihood.
//
// Method: the likelihood equations reduce to the profile equation for the
// scale, β = mean(x) - Σ x_i e^{-x_i/β} / Σ e^{-x_i/β}, whose left minus right
// side is strictly increasing in β with a unique root; it is solved by Newton's
// method from the method-of-moments start β₀ = s√6/π, safeguarded by bisection
// on a bracket. The location then follows in closed form,
// μ = -β log( (1/n) Σ e^{-x_i/β} ). Standard errors are the square roots of the
// diagonal of the inverse observed Fisher information (the negative Hessian of
// the log-likelihood at the maximum). See the NIST/SEMATECH e-Handbook of
// Statistical Methods, "Extreme Value Type I Distribution", for the equations.
//
// x needs at least 3 finite points that are not all equal.
func FitGumbel(x []float64) (GumbelFit, error) {
	if err := checkSample("Gumbel sample", x, 3); err != nil {
		return GumbelFit{}, err
	}
	n := float64(len(x))
	lo, hi := x[0], x[0]
	for _, v := range x {
		lo, hi = math.Min(lo, v), math.Max(hi, v)
	}
	if hi == lo {
		return GumbelFit{}, fmt.Errorf("fit: Gumbel sample is constant (all %v)", lo)
	}
	// Work with y = x - min(x) >= 0 so that every weight e^{-y/β} is in (0, 1].
	y := make([]float64, len(x))
	for i, v := range x {
		y[i] = v - lo
	}
	ybar := mean(y)
	// f(β) = β - ybar + Σ y w / Σ w,  f'(β) = 1 + Var_w(y)/β².
	f := func(b float64) (float64, float64) {
		var s0, s1, s2 float64
		for _, v := range y {
			w := math.Exp(-v / b)
			s0 += w
			s1 += w * v
			s2 += w * v * v
		}
		m1 := s1 / s0
		vw := s2/s0 - m1*m1
		return b - ybar + m1, 1 + vw/(b*b)
	}
	var sd float64
	for _, v := range y {
		sd += (v - ybar) * (v - ybar)
	}
	sd = math.Sqrt(sd / (n - 1))
	b := sd * math.Sqrt(6) / math.Pi
	// Bracket: f(β) → min(y) - ybar < 0 as β → 0, and f(β) >= β - ybar.
	bl, bh := 0.0, math.Max(ybar, b)*2+1e-300
	for fv, _ := f(bh); fv <= 0; fv, _ = f(bh) {
		bh *= 2
	}
	iter := 0
	for ; iter < 200; iter++ {
		fv, dv := f(b)
		if fv == 0 {
			break
		}
		if fv < 0 {
			bl = b
		} else {
			bh = b
		}
		nb := b - fv/dv
		if !(nb > bl && nb < bh) {
			nb = (bl + bh) / 2
		}
		if math.Abs(nb-b) <= 1e-15*b {
			b = nb
			break
		}
		b = nb
	}
	if iter == 200 {
		return GumbelFit{}, errors.New("fit: Gumbel profile equation did not converge in 200 steps")
	}
	var s0 float64
	for _, v := range y {
		s0 += math.Exp(-v / b)
	}
	mu := lo - b*math.Log(s0/n)

	// Observed information at (mu, b), z = (x-mu)/b, with Σ e^{-z} = n there:
	//   -∂²l/∂μ²  = Σ e^{-z} / β²
	//   -∂²l/∂μ∂β = (n - Σ e^{-z} + Σ z e^{-z}) / β²
	//   -∂²l/∂β²  = (-n + 2Σz - 2Σ z e^{-z} + Σ z² e^{-z}) / β²   (derived)
	var se, sz, sze, sz2e, ll float64
	for _, v := range x {
		z := (v - mu) / b
		e := math.Exp(-z)
		se += e
		sz += z
		sze += z * e
		sz2e += z * z * e
		ll += -z - e
	}
	ll -= n * math.Log(b)
	b2 := b * b
	info := mat.NewSymDense(2, []float64{
		se / b2, (n - se + sze) / b2,
		(n - se + sze) / b2, (-n + 2*sz - 2*sze + sz2e) / b2,
	})
	cov, err := invertSym(info)
	if err != nil {
		return GumbelFit{}, fmt.Errorf("fit: Gumbel observed information is singular: %v", err)
	}
	return GumbelFit{
		Gumbel:     Gumbel{Mu: mu, Beta: b},
		SEMu:       math.Sqrt(cov.At(0, 0)),
		SEBeta:     math.Sqrt(cov.At(1, 1)),
		CovMuBeta:  cov.At(0, 1),
		LogLik:     ll,
		N:          len(x),
		Iterations: iter,
	}, nil
}

// GumbelLocationFit is a maximum-likelihood Gumbel fit with the scale held fixed.
type GumbelLocationFit struct {
	Gumbel         // fitted location, the given scale
	SEMu   float64 // standard error of the location, Beta/√n
	LogLik float64 // maximised log-likelihood
	N      int
}

// FitGumbelLocation fits the location of a Gumbel (maximum) law with known
// scale beta to x by maximum likelihood. It serves fits where the scale is
// fixed by theory (for instance 1/θ) and only the shift is measured.
//
// Method: the likelihood equation has the closed-form root
// μ = -β log( (1/n) Σ e^{-x_i/β} ) (evaluated stably by shifting by min x);
// the observed information is Σ e^{-z_i}/β² = n/β² there, so SE(μ) = β/√n.
func FitGumbelLocation(x []float64, beta float64) (GumbelLocationFit, error) {
	if err := checkSample("Gumbel sample", x, 1); err != nil {
		return GumbelLocationFit{}, err
	}
	if !(beta > 0) || math.IsInf(beta, 0) {
		return GumbelLocationFit{}, fmt.Errorf("fit: Gumbel scale %v is not a positive finite number", beta)
	}
	n := float64(len(x))
	lo := x[0]
	for _, v := range x {
		lo = math.Min(lo, v)
	}
	var s0 float64
	for _, v := range x {
		s0 += math.Exp(-(v - lo) / beta)
	}
	mu := lo - beta*math.Log(s0/n)
	g := Gumbel{Mu: mu, Beta: beta}
	var ll float64
	for _, v := range x {
		ll += g.LogPDF(v)
	}
	return GumbelLocationFit{Gumbel: g, SEMu: beta / math.Sqrt(n), LogLik: ll, N: len(x)}, nil
}

// ScaleLRT is the likelihood-ratio test of a hypothesised Gumbel scale.
type ScaleLRT struct {
	Free  GumbelFit         // both parameters free
	Fixed GumbelLocationFit // scale held at the hypothesised value
	Stat  float64           // 2 (LogLik_free - LogLik_fixed), asymptotically χ²₁
	P     float64           // χ²₁ upper-tail p-value
}

// GumbelScaleLRT fits x twice, with both parameters free and with the scale
// fixed at beta0, and returns the likelihood-ratio statistic and its
// asymptotic χ²₁ p-value (Wilks' theorem). It compares a measured Gumbel
// scale with a theoretical one such as 1/θ.
func GumbelScaleLRT(x []float64, beta0 float64) (ScaleLRT, error) {
	free, err := FitGumbel(x)
	if err != nil {
		return ScaleLRT{}, err
	}
	fixed, err := FitGumbelLocation(x, beta0)
	if err != nil {
		return ScaleLRT{}, err
	}
	stat := math.Max(0, 2*(free.LogLik-fixed.LogLik))
	return ScaleLRT{Free: free, Fixed: fixed, Stat: stat, P: chi2Survival(stat, 1)}, nil
}

// invertSym inverts a symmetric positive-definite matrix by Cholesky
// factorisation.
func invertSym(a *mat.SymDense) (*mat.SymDense, error) {
	var ch mat.Cholesky
	if ok := ch.Factorize(a); !ok {
		return nil, errors.New("matrix is not positive definite")
	}
	var inv mat.SymDense
	if err := ch.InverseTo(&inv); err != nil {
		return nil, err
	}
	return &inv, nil
}
