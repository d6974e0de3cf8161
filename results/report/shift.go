package report

import (
	"fmt"
	"math"

	"bbmx/results/fit"
)

// wilson returns the Wilson score interval of k successes in n trials ("Probable
// inference, the law of succession, and statistical inference", J. Amer. Statist.
// Assoc. 22 (1927)).
func wilson(k, n int, z float64) (lo, hi float64) {
	if n == 0 {
		return nan, nan
	}
	nf := float64(n)
	p := float64(k) / nf
	den := 1 + z*z/nf
	c := (p + z*z/(2*nf)) / den
	h := z * math.Sqrt(p*(1-p)/nf+z*z/(4*nf*nf)) / den
	return math.Max(0, c-h), math.Min(1, c+h)
}

// shiftedSample returns R*_T - m_T - log(Z_s)/theta over the replicates with Z_s > 0 at
// checkpoint j.
func shiftedSample(c *cellData, j int) []float64 {
	theta := c.cell.Model.Theta()
	var ys []float64
	for _, r := range c.reps {
		if z := r.z[j]; z > 0 {
			ys = append(ys, r.x-math.Log(z)/theta)
		}
	}
	return ys
}

// randomShift fits the Gumbel law of R*_T - m_T - log(Z_s)/theta per checkpoint s and
// reports the share of replicates with Z_s <= 0 (from the sketch, records or not).
func (b *builder) randomShift(c *cellData) error {
	theta := c.cell.Model.Theta()
	n := int(c.sk.N)
	for j, cs := range c.sk.Checks {
		g := fmt.Sprintf("%s s=%g", c.label, cs.Time)
		k := int(cs.NonPositiveZ)
		lo, hi := wilson(k, n, b.opt.z())
		b.row(Row{Group: g, Quantity: "share of replicates with Z_s <= 0", Theory: "-> 0 as s grows", Value: nan,
			Estimate: float64(k) / float64(n), Lo: lo, Hi: hi, P: nan, N: n, Method: "sketch count, Wilson interval"})
		if len(c.reps) == 0 {
			b.skip(g, "random-shift Gumbel fit", "needs the records (keep_records = false)")
			continue
		}
		ys := shiftedSample(c, j)
		gf, err := fit.FitGumbel(ys)
		if err != nil {
			b.skip(g, "random-shift Gumbel fit", err.Error())
			continue
		}
		const what = "R*_T - m_T - log(Z_s)/theta"
		b.row(b.estimate(g, "Gumbel location of "+what, gf.Mu, gf.SEMu, "maximum likelihood on Z_s > 0, ± z·SE", len(ys)))
		b.rep.Rows[len(b.rep.Rows)-1].Theory = "log(C)/theta; C has no closed form"
		b.row(withTheory(b.estimate(g, "Gumbel scale of "+what, gf.Beta, gf.SEBeta, "maximum likelihood on Z_s > 0, ± z·SE", len(ys)),
			"1/theta = "+fmtNum(1/theta), 1/theta, KindLimit))
		fixed, err := fit.FitGumbelLocation(ys, 1/theta)
		if err != nil {
			return fmt.Errorf("report: %s: %w", g, err)
		}
		if err := b.plotRandomShift(c, cs.Time, ys, gf, fixed.Gumbel); err != nil {
			return err
		}
	}
	return nil
}
