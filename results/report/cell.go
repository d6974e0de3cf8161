package report

import (
	"fmt"
	"math"
	"sort"

	"bbmx/engine"
	"bbmx/engine/law"
	"bbmx/results"
	"bbmx/results/fit"
)

// builder accumulates a report.
type builder struct {
	opt   Options
	dir   string
	rep   *Report
	laws  map[lawKey]*law.Table
	seeds uint64 // bootstrap streams handed out, so each fit has its own
}

type lawKey struct {
	m engine.Model
	t float64
}

// row appends a table row; lo, hi and p are NaN when absent.
func (b *builder) row(r Row) {
	if r.Theory == "" && r.Kind == "" {
		r.Value = math.NaN()
	}
	b.rep.Rows = append(b.rep.Rows, r)
}

func (b *builder) skip(group, what, why string) {
	b.rep.Skipped = append(b.rep.Skipped, fmt.Sprintf("%s: %s skipped: %s", group, what, why))
	b.opt.logf("  %s skipped: %s", what, why)
}

func (b *builder) nextSeed() uint64 { b.seeds++; return b.opt.Seed*1_000_003 + b.seeds }

var nan = math.NaN()

// estimate builds a row of an estimate with a symmetric interval est ± z se.
func (b *builder) estimate(group, quantity string, est, se float64, method string, n int) Row {
	z := b.opt.z()
	return Row{Group: group, Quantity: quantity, Value: nan, Estimate: est, Lo: est - z*se, Hi: est + z*se, P: nan,
		Method: method, N: n}
}

func withTheory(r Row, text string, value float64, kind string) Row {
	r.Theory, r.Value, r.Kind = text, value, kind
	return r
}

// sample returns R*_T - m_T per replicate: exact from the records, or, without records,
// the fine histogram's bin midpoints (grouped is then true). ok is false, with the
// reason, when neither is possible.
func (c *cellData) sample() (xs []float64, grouped bool, why string) {
	if len(c.reps) > 0 {
		return c.shifts(), false, ""
	}
	h := c.sk.ShiftHist
	if h[0] != 0 || h[len(h)-1] != 0 {
		return nil, true, fmt.Sprintf("R*_T - m_T fell outside the sketch grid [%g, %g)", results.ShiftLo, results.ShiftHi)
	}
	if c.sk.N > 4_000_000 {
		return nil, true, fmt.Sprintf("%d replicates are too many to expand from the histogram", c.sk.N)
	}
	xs = make([]float64, 0, c.sk.N)
	for j := 1; j < len(h)-1; j++ {
		mid := results.ShiftLo + (float64(j-1)+0.5)*results.ShiftBin
		for k := uint64(0); k < h[j]; k++ {
			xs = append(xs, mid)
		}
	}
	return xs, true, ""
}

// lawTable returns the exact distribution function of R*_T tabulated over [lo, hi]
// (radii), cached per model and horizon and widened when a later call needs more.
func (b *builder) lawTable(m engine.Model, T, lo, hi float64) (*law.Table, error) {
	k := lawKey{m, T}
	lo = math.Max(0, lo)
	if t, ok := b.laws[k]; ok && t.Lo <= lo && t.Hi >= hi {
		return t, nil
	} else if ok {
		lo, hi = math.Min(lo, t.Lo), math.Max(hi, t.Hi)
	}
	n := min(max(int(math.Ceil((hi-lo)/0.04))+1, 60), 500)
	b.opt.logf("  solving the exact law at T=%g on %d radii", T, n)
	t, err := law.CDFTable(m, T, lo, hi, n, law.Options{Tolerance: b.opt.LawTolerance})
	if err != nil {
		return nil, fmt.Errorf("report: exact law at d=%d T=%g: %w", m.Dim, T, err)
	}
	b.laws[k] = t
	return t, nil
}

// invert returns the radius where the table's CDF reaches q (bisection on the
// monotone interpolant).
func invert(t *law.Table, q float64) float64 {
	lo, hi := t.Lo, t.Hi
	if t.At(lo) >= q || t.At(hi) < q {
		return nan
	}
	for i := 0; i < 60; i++ {
		mid := (lo + hi) / 2
		if t.At(mid) < q {
			lo = mid
		} else {
			hi = mid
		}
	}
	return (lo + hi) / 2
}

// cell runs every fit of one cell.
func (b *builder) cell(c *cellData) error {
	g := c.label
	m := c.cell.Model
	theta := m.Theta()
	centre := m.Centring(c.cell.Horizon)
	n := int(c.sk.N)
	xs, grouped, why := c.sample()
	src := "records"
	if grouped {
		src = "fine histogram (0.01 grid)"
	}
	if c.partial > 0 {
		b.skip(g, "fits on records", fmt.Sprintf("records cover only %d of %d replicates; the sketch is used instead", c.partial, n))
	}

	// Moments.
	if len(c.reps) >= 3 {
		mo, err := fit.SampleMoments(xs)
		if err == nil {
			b.row(b.estimate(g, "mean of R*_T - m_T", mo.Mean, mo.SEMean, "sample mean ± z·SE", n))
			b.row(b.estimate(g, "sd of R*_T - m_T", mo.StdDev, mo.SEStdDev, "sample sd, delta-method SE", n))
			b.row(b.estimate(g, "skewness of R*_T - m_T", mo.Skewness, mo.SESkew, "g1, delta-method SE", n))
		} else {
			b.skip(g, "moments", err.Error())
		}
	} else if n >= 2 {
		mean, sd, seMean, seSD := c.sk.ShiftMoments()
		b.row(b.estimate(g, "mean of R*_T - m_T", mean, seMean, "exact sums of the sketch ± z·SE", n))
		b.row(b.estimate(g, "sd of R*_T - m_T", sd, seSD, "exact sums of the sketch, delta-method SE", n))
		b.skip(g, "skewness", "its standard error needs the records (keep_records = false)")
	}

	var tab *law.Table
	if xs != nil {
		lo, hi := span(xs)
		var err error
		if tab, err = b.lawTable(m, c.cell.Horizon, centre+lo-1, centre+hi+1); err != nil {
			return err
		}
	}

	// Quantiles, compared with the exact law's; the median is kept for the centring fit.
	c.median, c.medianSE = nan, nan
	for _, p := range []float64{0.1, 0.5, 0.9} {
		q := fmt.Sprintf("%g-quantile of R*_T - m_T", p)
		var r Row
		if !grouped {
			qe, err := fit.Quantile(xs, p, b.opt.Level)
			if err != nil {
				b.skip(g, q, err.Error())
				continue
			}
			r = Row{Group: g, Quantity: q, Estimate: qe.Value, Lo: qe.Lo, Hi: qe.Hi, P: nan, N: n,
				Method: "order statistic, distribution-free interval"}
			if p == 0.5 {
				c.median, c.medianSE = qe.Value, qe.SE
			}
		} else {
			v, lo, hi, err := histQuantile(c.sk.ShiftHist, p, b.opt.z())
			if err != nil {
				b.skip(g, q, err.Error())
				continue
			}
			r = Row{Group: g, Quantity: q, Estimate: v, Lo: lo, Hi: hi, P: nan, N: n,
				Method: "fine histogram, normal-approximation ranks"}
			if p == 0.5 {
				c.median, c.medianSE = v, (hi-lo)/(2*b.opt.z())
			}
		}
		if tab != nil {
			if v := invert(tab, p); !math.IsNaN(v) {
				r = withTheory(r, "law solver: "+fmtNum(v-centre), v-centre, KindExact)
			}
		}
		b.row(r)
	}
	if xs == nil {
		for _, what := range []string{"Gumbel fit", "tail slope", "KS test against the exact law"} {
			b.skip(g, what, why)
		}
		return b.cellRest(c)
	}

	// Gumbel.
	gf, gErr := fit.FitGumbel(xs)
	if gErr != nil {
		b.skip(g, "Gumbel fit", gErr.Error())
	} else {
		b.row(b.estimate(g, "Gumbel location of R*_T - m_T", gf.Mu, gf.SEMu, "maximum likelihood ("+src+"), ± z·SE", n))
		b.row(withTheory(b.estimate(g, "Gumbel scale of R*_T - m_T", gf.Beta, gf.SEBeta, "maximum likelihood ("+src+"), ± z·SE", n),
			"1/theta = "+fmtNum(1/theta), 1/theta, KindLimit))
	}

	// Upper tail.
	tail, tailErr := b.tailSlope(xs)
	if tailErr != nil {
		b.skip(g, "tail slope", tailErr.Error())
	} else {
		b.row(withTheory(Row{Group: g, Quantity: "upper-tail slope of log P(R*_T - m_T > x)", Estimate: tail.slope,
			Lo: tail.iv.Lo, Hi: tail.iv.Hi, P: nan, N: tail.rate.K,
			Method: fmt.Sprintf("exponential MLE over the top %g, bootstrap (%d) percentile interval", b.opt.TailFraction, tail.iv.B)},
			"-theta = "+fmtNum(-theta), -theta, KindLimit))
	}

	// Kolmogorov-Smirnov against the exact law.
	cdf := func(x float64) float64 { return tab.At(x + centre) }
	var ks fit.KSResult
	var err error
	method := "one-sample KS, " + "exact law at tolerance " + fmt.Sprint(b.opt.LawTolerance)
	if grouped {
		ks = groupedKS(c.sk.ShiftHist, cdf)
		method = "KS at the 0.01 grid edges (conservative), exact law"
	} else if ks, err = fit.KSOneSample(xs, cdf); err != nil {
		return fmt.Errorf("report: %s: %w", g, err)
	}
	b.row(Row{Group: g, Quantity: "KS distance to the exact law of R*_T", Theory: "law solver", Value: 0, Kind: KindExact,
		Estimate: ks.D, Lo: nan, Hi: nan, P: ks.P, N: n, Method: method})

	var gp *fit.GumbelFit
	if gErr == nil {
		gp = &gf
	}
	if err := b.plotShift(c, xs, gp, tab); err != nil {
		return err
	}
	if tailErr == nil {
		if err := b.plotTail(c, xs, tail); err != nil {
			return err
		}
	}
	return b.cellRest(c)
}

// cellRest runs the fits that need records or the intensity sketch.
func (b *builder) cellRest(c *cellData) error {
	if err := b.randomShift(c); err != nil {
		return err
	}
	if err := b.directions(c); err != nil {
		return err
	}
	return b.extremal(c)
}

type tailFit struct {
	rate  fit.TailRateFit
	slope float64
	iv    fit.Interval
}

// tailSlope fits the exponential rate of the top fraction and bootstraps it.
func (b *builder) tailSlope(xs []float64) (tailFit, error) {
	stat := func(s []float64) float64 {
		u, err := fit.TailThreshold(s, b.opt.TailFraction)
		if err != nil {
			return nan
		}
		r, err := fit.TailRate(s, u)
		if err != nil {
			return nan
		}
		return -r.Rate
	}
	u, err := fit.TailThreshold(xs, b.opt.TailFraction)
	if err != nil {
		return tailFit{}, err
	}
	r, err := fit.TailRate(xs, u)
	if err != nil {
		return tailFit{}, err
	}
	if r.K < 10 {
		return tailFit{}, fmt.Errorf("only %d points above the tail threshold (need 10)", r.K)
	}
	iv, err := fit.Bootstrap(xs, stat, b.opt.Bootstrap, b.opt.Level, b.nextSeed())
	if err != nil {
		return tailFit{}, err
	}
	return tailFit{rate: r, slope: -r.Rate, iv: iv}, nil
}

// histQuantile returns the p-quantile of the values binned in the sketch's fine
// histogram (uniform within a bin) and an interval from the order statistics at ranks
// n p ± z sqrt(n p (1-p)) (normal approximation to the binomial).
func histQuantile(h []uint64, p, z float64) (v, lo, hi float64, err error) {
	var n uint64
	for _, c := range h {
		n += c
	}
	if n < 2 {
		return nan, nan, nan, fmt.Errorf("fewer than 2 replicates")
	}
	nf := float64(n)
	sd := math.Sqrt(nf * p * (1 - p))
	at := func(rank float64) (float64, error) { // rank in [0, n): position among the sorted values
		rank = math.Min(math.Max(rank, 0), nf-1e-9)
		var cum float64
		for j, c := range h {
			if c == 0 {
				continue
			}
			if rank < cum+float64(c) {
				if j == 0 || j == len(h)-1 {
					return nan, fmt.Errorf("the quantile lies outside the sketch grid")
				}
				left := results.ShiftLo + float64(j-1)*results.ShiftBin
				return left + results.ShiftBin*(rank-cum+0.5)/float64(c), nil
			}
			cum += float64(c)
		}
		return nan, fmt.Errorf("rank %v beyond %d values", rank, n)
	}
	if v, err = at((nf - 1) * p); err != nil {
		return
	}
	if lo, err = at(math.Floor(nf*p - z*sd - 1)); err != nil {
		return
	}
	hi, err = at(math.Ceil(nf*p + z*sd))
	return
}

// groupedKS is the Kolmogorov-Smirnov distance between binned values and cdf, taken at
// the bin edges only. It is never larger than the distance of the unbinned values, so
// the p-value from the continuous null law is conservative.
func groupedKS(h []uint64, cdf func(float64) float64) fit.KSResult {
	var n uint64
	for _, c := range h {
		n += c
	}
	var cum uint64
	var d float64
	for j := 1; j < len(h); j++ {
		cum += h[j-1]
		edge := results.ShiftLo + float64(j-1)*results.ShiftBin
		d = math.Max(d, math.Abs(float64(cum)/float64(n)-cdf(edge)))
	}
	r := fit.KSResult{D: d, N: int(n), Method: "exact"}
	if n <= 10000 {
		r.P = fit.KolmogorovExactSF(int(n), d)
	} else {
		r.P, r.Method = fit.KolmogorovSF(math.Sqrt(float64(n))*d), "asymptotic"
	}
	return r
}

// sortedCopy returns x sorted increasingly.
func sortedCopy(x []float64) []float64 {
	s := append([]float64(nil), x...)
	sort.Float64s(s)
	return s
}
