package report

import (
	"fmt"
	"math"
	"sort"

	"bbmx/engine"
	"bbmx/results/fit"
)

// horizonPoint is one horizon's median or mean of R*_T with its standard error.
type horizonPoint struct {
	T, y, se float64
}

// centringSeries returns per horizon the median and the mean of R*_T of the cells of
// one model; cells sharing a horizon are not pooled (the first is used). The medians are
// those builder.cell estimated.
func (b *builder) centringSeries(cs []*cellData) (med, mean []horizonPoint) {
	seen := map[float64]bool{}
	for _, c := range cs {
		T := c.cell.Horizon
		if seen[T] {
			continue
		}
		seen[T] = true
		centre := c.cell.Model.Centring(T)
		mv, mvse := c.sk.MeanShift()
		if !(c.medianSE > 0) || !(mvse > 0) {
			continue
		}
		med = append(med, horizonPoint{T, centre + c.median, c.medianSE})
		mean = append(mean, horizonPoint{T, centre + mv, mvse})
	}
	return med, mean
}

// centring fits, per model, the median and mean of R*_T against a T + b log T + c
// (+ e / sqrt T with five horizons or more), weighted by their standard errors.
func (b *builder) centring(cells []*cellData) error {
	groups := map[string][]*cellData{}
	var keys []string
	for _, c := range cells {
		k := modelKey(c.cell.Model)
		if groups[k] == nil {
			keys = append(keys, k)
		}
		groups[k] = append(groups[k], c)
	}
	sort.Strings(keys)
	for _, k := range keys {
		cf, ok := b.fitCentring(groups[k])
		if !ok {
			continue
		}
		if err := b.plotCentring(cf.m, cf.med, cf.mean, cf.terms, cf.fits); err != nil {
			return err
		}
	}
	return nil
}

// centringFit is the centring fit of one model's horizons.
type centringFit struct {
	m         engine.Model
	med, mean []horizonPoint
	terms     []fit.Term
	fits      [2]fit.LinearFit // median, mean
}

// fitCentring fits one model's cells and adds the rows; ok is false when the median fit
// could not be made.
func (b *builder) fitCentring(cs []*cellData) (cf centringFit, ok bool) {
	m := cs[0].cell.Model
	g := modelLabel(m) + " centring"
	med, mean := b.centringSeries(cs)
	if len(med) < 3 {
		b.skip(g, "centring fit across horizons", fmt.Sprintf("needs at least 3 horizons with an error estimate, has %d", len(med)))
		return cf, false
	}
	terms := []fit.Term{fit.TermT, fit.TermLogT, fit.TermOne}
	if len(med) >= 5 {
		terms = append(terms, fit.TermInvSqrtT)
	}
	cf = centringFit{m: m, med: med, mean: mean, terms: terms}
	for i, s := range [][]horizonPoint{med, mean} {
		what := [2]string{"median", "mean"}[i]
		x, y, sig := make([]float64, len(s)), make([]float64, len(s)), make([]float64, len(s))
		for j, p := range s {
			x[j], y[j], sig[j] = p.T, p.y, p.se
		}
		lf, err := fit.FitLinear(x, y, sig, terms)
		if err != nil {
			b.skip(g, what+" centring fit", err.Error())
			continue
		}
		cf.fits[i] = lf
		method := fmt.Sprintf("weighted least squares over %d horizons, ± z·SE", len(s))
		b.row(withTheory(b.estimate(g, "a ("+what+" of R*_T)", lf.Coef[0], lf.SE[0], method, len(s)),
			"v = "+fmtNum(m.Speed()), m.Speed(), KindLimit))
		b.row(withTheory(b.estimate(g, "b ("+what+" of R*_T)", lf.Coef[1], lf.SE[1], method, len(s)),
			"(d-4)/(2 theta) = "+fmtNum(m.LogCoefficient()), m.LogCoefficient(), KindLimit))
		b.row(b.estimate(g, "c ("+what+" of R*_T)", lf.Coef[2], lf.SE[2], method, len(s)))
		if len(terms) == 4 {
			b.row(b.estimate(g, "e ("+what+" of R*_T)", lf.Coef[3], lf.SE[3], method, len(s)))
		}
	}
	return cf, cf.fits[0].Coef != nil
}

// centringCurve evaluates a fit minus v T, the quantity the centring figure shows.
func centringCurve(m engine.Model, terms []fit.Term, lf fit.LinearFit, T float64) float64 {
	if lf.Coef == nil {
		return math.NaN()
	}
	return lf.Predict(terms, T) - m.Speed()*T
}
