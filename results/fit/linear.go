package fit

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// Term is one basis function of a linear model y ≈ Σ c_j f_j(x).
// A Fixed term keeps its coefficient at Value instead of fitting it.
type Term struct {
	Name  string
	F     func(x float64) float64
	Fixed bool
	Value float64
}

// Common basis functions for centring fits against a horizon T.
var (
	TermOne      = Term{Name: "1", F: func(float64) float64 { return 1 }}
	TermT        = Term{Name: "T", F: func(t float64) float64 { return t }}
	TermLogT     = Term{Name: "log T", F: math.Log}
	TermInvSqrtT = Term{Name: "1/sqrt T", F: func(t float64) float64 { return 1 / math.Sqrt(t) }}
	TermInvT     = Term{Name: "1/T", F: func(t float64) float64 { return 1 / t }}
)

// Fix returns a copy of t whose coefficient is held at v.
func (t Term) Fix(v float64) Term { t.Fixed, t.Value = true, v; return t }

// LinearFit is the result of FitLinear. Coef, SE and the rows and columns of
// Cov follow the order of the terms; fixed terms have SE 0 and zero covariance.
type LinearFit struct {
	Names []string
	Coef  []float64
	SE    []float64
	Cov   *mat.SymDense
	Chi2  float64 // Σ w_i r_i², w_i = 1/σ_i² (or 1 without σ)
	DoF   int     // points minus free coefficients
	// Scaled reports whether Cov was scaled by Chi2/DoF, which is done when no
	// σ was given so that the residual scatter sets the error.
	Scaled bool
}

// FitLinear fits y ≈ Σ_j c_j f_j(x) by (weighted) linear least squares.
//
// With sigma non-nil each point has weight 1/σ_i²; the covariance of the free
// coefficients is then (AᵀWA)⁻¹, taking the σ_i as absolute errors, and Chi2
// is the weighted residual sum of squares, χ²-distributed with DoF degrees of
// freedom when the model and the σ_i are right. With sigma nil the weights are
// 1 and the covariance is (AᵀA)⁻¹ scaled by Chi2/DoF (the classical
// regression covariance). Fixed terms are subtracted from y before the fit.
// The system is solved by QR factorisation of the weighted design matrix, as
// is standard for numerical least squares.
func FitLinear(x, y, sigma []float64, terms []Term) (LinearFit, error) {
	if len(x) != len(y) {
		return LinearFit{}, fmt.Errorf("fit: linear fit has %d x values but %d y values", len(x), len(y))
	}
	if sigma != nil && len(sigma) != len(x) {
		return LinearFit{}, fmt.Errorf("fit: linear fit has %d points but %d sigmas", len(x), len(sigma))
	}
	if len(terms) == 0 {
		return LinearFit{}, fmt.Errorf("fit: linear fit has no terms")
	}
	var free []int
	for j, t := range terms {
		if t.F == nil {
			return LinearFit{}, fmt.Errorf("fit: linear term %d (%q) has no function", j, t.Name)
		}
		if !t.Fixed {
			free = append(free, j)
		}
	}
	n, p := len(x), len(free)
	if err := checkSample("linear x", x, max(p, 1)); err != nil {
		return LinearFit{}, err
	}
	if err := checkSample("linear y", y, max(p, 1)); err != nil {
		return LinearFit{}, err
	}
	w := make([]float64, n)
	for i := range w {
		w[i] = 1
		if sigma != nil {
			if !(sigma[i] > 0) || math.IsInf(sigma[i], 0) {
				return LinearFit{}, fmt.Errorf("fit: sigma[%d] = %v is not a positive finite number", i, sigma[i])
			}
			w[i] = 1 / (sigma[i] * sigma[i])
		}
	}
	// Basis values; fixed terms go to the right-hand side.
	f := make([][]float64, n)
	r := make([]float64, n)
	for i := range x {
		f[i] = make([]float64, len(terms))
		r[i] = y[i]
		for j, t := range terms {
			v := t.F(x[i])
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return LinearFit{}, fmt.Errorf("fit: linear term %q is %v at x = %v", t.Name, v, x[i])
			}
			f[i][j] = v
			if t.Fixed {
				r[i] -= t.Value * v
			}
		}
	}
	names := make([]string, len(terms))
	coef := make([]float64, len(terms))
	for j, t := range terms {
		names[j] = t.Name
		if t.Fixed {
			coef[j] = t.Value
		}
	}
	res := LinearFit{Names: names, Coef: coef, SE: make([]float64, len(terms)),
		Cov: mat.NewSymDense(len(terms), nil), DoF: n - p, Scaled: sigma == nil}
	if p > 0 {
		if n < p {
			return LinearFit{}, fmt.Errorf("fit: linear fit has %d points for %d free coefficients", n, p)
		}
		a := mat.NewDense(n, p, nil)
		b := mat.NewVecDense(n, nil)
		for i := range x {
			sw := math.Sqrt(w[i])
			for k, j := range free {
				a.Set(i, k, sw*f[i][j])
			}
			b.SetVec(i, sw*r[i])
		}
		var qr mat.QR
		qr.Factorize(a)
		var rd mat.Dense
		qr.RTo(&rd)
		rm := mat.NewTriDense(p, mat.Upper, nil)
		for k := 0; k < p; k++ {
			for l := k; l < p; l++ {
				rm.SetTri(k, l, rd.At(k, l))
			}
		}
		// Refuse a (numerically) rank-deficient design rather than return noise.
		var dmax, dmin = 0.0, math.Inf(1)
		for k := 0; k < p; k++ {
			d := math.Abs(rm.At(k, k))
			dmax, dmin = math.Max(dmax, d), math.Min(dmin, d)
		}
		if !(dmin > 1e-12*dmax) {
			return LinearFit{}, fmt.Errorf("fit: linear fit terms are linearly dependent on these x values")
		}
		var c mat.VecDense
		if err := qr.SolveVecTo(&c, false, b); err != nil {
			return LinearFit{}, fmt.Errorf("fit: linear least squares failed: %v", err)
		}
		// (AᵀA)⁻¹ = R⁻¹ R⁻ᵀ.
		var ri mat.TriDense
		if err := ri.InverseTri(rm); err != nil {
			return LinearFit{}, fmt.Errorf("fit: linear fit covariance failed: %v", err)
		}
		var cv mat.Dense
		cv.Mul(&ri, ri.T())
		for k, j := range free {
			coef[j] = c.AtVec(k)
		}
		for i := range x {
			var pred float64
			for j := range terms {
				pred += coef[j] * f[i][j]
			}
			d := y[i] - pred
			res.Chi2 += w[i] * d * d
		}
		scale := 1.0
		if res.Scaled {
			if res.DoF == 0 {
				return LinearFit{}, fmt.Errorf("fit: linear fit without sigmas needs more points (%d) than free coefficients (%d)", n, p)
			}
			scale = res.Chi2 / float64(res.DoF)
		}
		for k, j := range free {
			for l, m := range free {
				if l >= k {
					res.Cov.SetSym(j, m, scale*cv.At(k, l))
				}
			}
			res.SE[j] = math.Sqrt(res.Cov.At(j, j))
		}
	} else {
		for i := range x {
			res.Chi2 += w[i] * r[i] * r[i]
		}
	}
	return res, nil
}

// Predict returns Σ c_j f_j(x) for the fitted coefficients.
func (lf LinearFit) Predict(terms []Term, x float64) float64 {
	var s float64
	for j, t := range terms {
		s += lf.Coef[j] * t.F(x)
	}
	return s
}
