package report

import (
	"fmt"
	"math"
	"strconv"

	"gonum.org/v1/gonum/stat/distuv"

	"bbmx/engine"
)

// meanSE returns the sample mean of x and its standard error s/sqrt n.
func meanSE(x []float64) (mean, se float64) {
	n := float64(len(x))
	for _, v := range x {
		mean += v
	}
	mean /= n
	if len(x) > 1 {
		var ss float64
		for _, v := range x {
			ss += (v - mean) * (v - mean)
		}
		se = math.Sqrt(ss / (n - 1) / n)
	}
	return mean, se
}

// radialMass returns e^{gT} P(lo <= |sigma B_T| - m_T < hi), the many-to-one first
// moment of the number of particles with R - m_T in [lo, hi) (hi may be +Inf).
func radialMass(m engine.Model, T, lo, hi float64) float64 {
	centre := m.Centring(T)
	chi := distuv.ChiSquared{K: float64(m.Dim)}
	surv := func(x float64) float64 {
		r := math.Max(0, centre+x)
		if math.IsInf(x, 1) {
			return 0
		}
		return chi.Survival(r * r / (m.Sigma * m.Sigma * T))
	}
	return m.MeanPopulation(T) * (surv(lo) - surv(hi))
}

// secondMomentN returns E[N_T^2] = k e^{2gT}(1 - e^{-gT}) + e^{gT} (derived from the
// many-to-two formula: E[N(N-1)] = integral over the branching time s of
// beta e^{gs} k(k-1) e^{2g(T-s)}). It bounds the second moment of any particle count.
func secondMomentN(m engine.Model, T float64) float64 {
	g := m.Growth()
	return float64(m.Children)*math.Exp(2*g*T)*(-math.Expm1(-g*T)) + math.Exp(g*T)
}

// extremal measures the top of the extremal process: gaps between consecutive top
// radii, counts within x of the maximum, and the mean intensity against many-to-one.
func (b *builder) extremal(c *cellData) error {
	g := c.label
	m, T := c.cell.Model, c.cell.Horizon
	o := c.cell.Observe
	n := int(c.sk.N)
	nb := c.cell.Bins()

	// Intensity: the per-bin mean counts, and two totals with their exact first moment.
	tab := Table{Name: "intensity-" + c.tag, Caption: "Mean extremal intensity of " + g + ": particles per replicate with R - m_T in each bin, against the many-to-one first moment",
		Header: []string{"lo", "hi", "mean_count", "many_to_one"}}
	means := make([]float64, nb)
	theory := make([]float64, nb)
	edges := make([]float64, nb+1)
	for j := 0; j < nb; j++ {
		edges[j] = -o.Window + float64(j)*o.BinWidth
	}
	edges[nb] = math.Inf(1)
	for j := 0; j < nb; j++ {
		means[j] = float64(c.sk.Intensity[j]) / float64(n)
		theory[j] = radialMass(m, T, edges[j], edges[j+1])
		tab.Rows = append(tab.Rows, []string{ftoa(edges[j]), ftoa(edges[j+1]), ftoa(means[j]), ftoa(theory[j])})
	}
	b.rep.Tables = append(b.rep.Tables, tab)
	zero := zeroBin(c.cell)
	var inWin, above uint64
	for j, v := range c.sk.Intensity {
		if j < nb-1 {
			inWin += v
		}
		if j >= zero {
			above += v
		}
	}
	totals := []struct {
		what   string
		count  uint64
		lo, hi float64
		get    func(replicate) float64
	}{
		{fmt.Sprintf("mean number with R - m_T in [%g, %g)", -o.Window, edges[nb-1]), inWin, -o.Window, edges[nb-1], func(r replicate) float64 { return r.window }},
		{fmt.Sprintf("mean number with R - m_T >= %g", edges[zero]), above, edges[zero], math.Inf(1), func(r replicate) float64 { return r.above }},
	}
	for _, t := range totals {
		est := float64(t.count) / float64(n)
		se := math.Sqrt(secondMomentN(m, T) / float64(n))
		method := "sketch count; SE bounded by sqrt(E[N_T^2]/n) (no records)"
		if len(c.reps) > 1 {
			xs := make([]float64, len(c.reps))
			for i, r := range c.reps {
				xs[i] = t.get(r)
			}
			_, se = meanSE(xs)
			method = "mean over replicates ± z·SE"
		}
		th := radialMass(m, T, t.lo, t.hi)
		b.row(withTheory(b.estimate(g, t.what, est, se, method, n), "many-to-one: "+fmtNum(th), th, KindExact))
	}
	if err := b.plotIntensity(c, edges, means, theory); err != nil {
		return err
	}

	if len(c.reps) == 0 {
		b.skip(g, "gaps and counts within x of the maximum", "need the records (keep_records = false)")
		return nil
	}
	// Gaps between consecutive top radii.
	K := o.TopK
	ts := &c.top
	gaps := Table{Name: "gaps-" + c.tag, Caption: "Gaps R_(k) - R_(k+1) between consecutive top radii of " + g,
		Header: []string{"k", "replicates", "mean", "se"}}
	for k := 1; k < K; k++ {
		nk := ts.gapN[k]
		if nk < 2 {
			break
		}
		mean, se := ts.gapMean[k], math.Sqrt(ts.gapM[k]/float64(nk-1)/float64(nk))
		gaps.Rows = append(gaps.Rows, []string{strconv.Itoa(k), strconv.Itoa(nk), ftoa(mean), ftoa(se)})
		if k <= 3 {
			b.row(b.estimate(g, fmt.Sprintf("mean gap R_(%d) - R_(%d)", k, k+1), mean, se, "mean over replicates ± z·SE", nk))
		}
	}
	b.rep.Tables = append(b.rep.Tables, gaps)

	// Mean number of particles within x of the maximum; a replicate whose K kept radii
	// all lie within x only gives a lower bound, so such x are marked.
	within := Table{Name: "within-" + c.tag, Caption: "Mean number of particles within x of the maximum in " + g +
		" (truncated: share of replicates whose " + strconv.Itoa(K) + " kept radii all lie within x, so the mean is a lower bound)",
		Header: []string{"x", "mean", "se", "truncated_share"}}
	var wx, wm, wse []float64
	for i, freq := range ts.within {
		x := 0.1 * float64(i)
		mean, se := countMeanSE(freq)
		trunc := freq[K]
		share := float64(trunc) / float64(len(c.reps))
		within.Rows = append(within.Rows, []string{ftoa(x), ftoa(mean), ftoa(se), ftoa(share)})
		if trunc == 0 {
			wx, wm, wse = append(wx, x), append(wm, mean), append(wse, se)
			if i == 5 || i == 10 || i == 20 {
				b.row(b.estimate(g, fmt.Sprintf("mean number within %g of the maximum", x), mean, se, "mean over replicates ± z·SE", len(c.reps)))
			}
		}
	}
	b.rep.Tables = append(b.rep.Tables, within)
	return b.plotWithin(c, wx, wm, wse)
}

// countMeanSE is meanSE of a sample of small counts given as frequencies: freq[v]
// values equal v.
func countMeanSE(freq []uint64) (mean, se float64) {
	var n, sum float64
	for v, f := range freq {
		n += float64(f)
		sum += float64(f) * float64(v)
	}
	mean = sum / n
	if n > 1 {
		var ss float64
		for v, f := range freq {
			ss += float64(f) * (float64(v) - mean) * (float64(v) - mean)
		}
		se = math.Sqrt(ss / (n - 1) / n)
	}
	return mean, se
}

func ftoa(x float64) string { return strconv.FormatFloat(x, 'g', 8, 64) }
