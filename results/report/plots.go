package report

import (
	"fmt"
	"image/color"
	"math"
	"path/filepath"
	"strconv"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"bbmx/engine"
	"bbmx/engine/law"
	"bbmx/results/fit"
)

var (
	colData   = color.RGBA{R: 90, G: 120, B: 170, A: 255}
	colFit    = color.RGBA{R: 200, G: 60, B: 40, A: 255}
	colTheory = color.RGBA{R: 20, G: 20, B: 20, A: 255}
	colAlt    = color.RGBA{R: 40, G: 150, B: 70, A: 255}
	dashed    = []vg.Length{vg.Points(5), vg.Points(3)}
)

func newPlot(title, xlabel, ylabel string) *plot.Plot {
	p := plot.New()
	p.Title.Text = title
	p.X.Label.Text = xlabel
	p.Y.Label.Text = ylabel
	p.Legend.Top = true
	p.Add(plotter.NewGrid())
	return p
}

// headroom raises the top of the y axis so that the legend sits above the data.
func headroom(p *plot.Plot) { p.Y.Max = p.Y.Min + 1.3*(p.Y.Max-p.Y.Min) }

// logTicks labels a log axis at the powers of ten with short numbers.
type logTicks struct{}

func (logTicks) Ticks(min, max float64) []plot.Tick {
	ts := plot.LogTicks{Prec: -1}.Ticks(min, max)
	for i := range ts {
		if ts[i].Label != "" {
			ts[i].Label = strconv.FormatFloat(ts[i].Value, 'g', 3, 64)
		}
	}
	return ts
}

// save writes the plot as name.png and name.svg in the report folder and lists it.
func (b *builder) save(p *plot.Plot, name, caption string) error {
	for _, ext := range []string{".png", ".svg"} {
		if err := p.Save(7*vg.Inch, 4.5*vg.Inch, filepath.Join(b.dir, name+ext)); err != nil {
			return fmt.Errorf("report: figure %s: %w", name, err)
		}
	}
	b.rep.Figures = append(b.rep.Figures, Figure{Name: name, Title: p.Title.Text, Caption: caption})
	return nil
}

// addCurve adds f on [lo, hi] to p with a legend entry and raises the y axis to its peak
// (functions do not take part in the automatic axis range).
func addCurve(p *plot.Plot, label string, f func(float64) float64, lo, hi float64, col color.Color, dash []vg.Length) {
	fn := curve(f, lo, hi, col, dash)
	for i := 0; i <= 200; i++ {
		if y := f(lo + (hi-lo)*float64(i)/200); y > p.Y.Max && !math.IsInf(y, 0) {
			p.Y.Max = y
		}
	}
	p.Add(fn)
	p.Legend.Add(label, fn)
}

func curve(f func(float64) float64, lo, hi float64, col color.Color, dash []vg.Length) *plotter.Function {
	fn := plotter.NewFunction(f)
	fn.XMin, fn.XMax, fn.Samples = lo, hi, 300
	fn.Color, fn.Width, fn.Dashes = col, vg.Points(1.8), dash
	return fn
}

func histogram(xs []float64, bins int) (*plotter.Histogram, error) {
	h, err := plotter.NewHist(plotter.Values(xs), bins)
	if err != nil {
		return nil, err
	}
	h.Normalize(1)
	h.FillColor = color.RGBA{R: 170, G: 190, B: 225, A: 255}
	h.LineStyle.Color = colData
	return h, nil
}

func histBins(n int) int { return min(max(int(math.Sqrt(float64(n))), 10), 80) }

func span(xs []float64) (lo, hi float64) {
	lo, hi = math.Inf(1), math.Inf(-1)
	for _, x := range xs {
		lo, hi = math.Min(lo, x), math.Max(hi, x)
	}
	return lo, hi
}

func gumbelDensity(g fit.Gumbel) func(float64) float64 {
	return func(x float64) float64 { return math.Exp(g.LogPDF(x)) }
}

// plotShift: histogram of R*_T - m_T with the fitted Gumbel and the exact law's density.
func (b *builder) plotShift(c *cellData, xs []float64, gf *fit.GumbelFit, tab *law.Table) error {
	p := newPlot("R*_T - m_T, "+c.label, "R*_T - m_T", "density")
	h, err := histogram(xs, histBins(len(xs)))
	if err != nil {
		return err
	}
	p.Add(h)
	p.Legend.Add(fmt.Sprintf("simulation (%d replicates)", len(xs)), h)
	lo, hi := span(xs)
	lo, hi = lo-0.3, hi+0.3
	if tab != nil {
		centre := c.cell.Model.Centring(c.cell.Horizon)
		const dh = 0.01
		dens := func(x float64) float64 { return (tab.At(x+centre+dh) - tab.At(x+centre-dh)) / (2 * dh) }
		addCurve(p, "exact law (law solver)", dens, lo, hi, colTheory, nil)
	}
	if gf != nil {
		addCurve(p, fmt.Sprintf("Gumbel MLE: mu=%.3f, beta=%.3f", gf.Mu, gf.Beta), gumbelDensity(gf.Gumbel), lo, hi, colFit, dashed)
	}
	headroom(p)
	return b.save(p, "shift-"+c.tag, "Histogram of R*_T - m_T in "+c.label+" with the maximum-likelihood Gumbel and the exact law of the law solver.")
}

// plotTail: log of the empirical survival function with the fitted and the theory slope.
func (b *builder) plotTail(c *cellData, xs []float64, t tailFit) error {
	theta := c.cell.Model.Theta()
	s := sortedCopy(xs)
	levels, err := fit.TailGrid(xs, s[len(s)/2], 40, 3)
	if err != nil {
		return err
	}
	lx, ly := fit.TailPoints(xs, levels)
	pts := make(plotter.XYs, len(lx))
	for i := range lx {
		pts[i].X, pts[i].Y = lx[i], ly[i]
	}
	p := newPlot("Upper tail of R*_T - m_T, "+c.label, "x", "log P(R*_T - m_T > x)")
	sc, err := plotter.NewScatter(pts)
	if err != nil {
		return err
	}
	sc.Color = colData
	p.Add(sc)
	p.Legend.Add("empirical", sc)
	u := t.rate.Threshold
	y0 := math.Log(float64(t.rate.K) / float64(len(xs)))
	hi := lx[len(lx)-1]
	addCurve(p, fmt.Sprintf("fitted slope %.3f (top %g)", t.slope, b.opt.TailFraction), func(x float64) float64 { return y0 + t.slope*(x-u) }, u, hi, colFit, nil)
	addCurve(p, fmt.Sprintf("slope -theta = %.3f", -theta), func(x float64) float64 { return y0 - theta*(x-u) }, u, hi, colTheory, dashed)
	return b.save(p, "tail-"+c.tag, "Log empirical survival function of R*_T - m_T in "+c.label+
		", with the exponential tail fitted above the threshold and the limiting slope -theta through the same point.")
}

// plotRandomShift: histogram of R*_T - m_T - log(Z_s)/theta with the Gumbel fits.
func (b *builder) plotRandomShift(c *cellData, s float64, ys []float64, gf fit.GumbelFit, fixed fit.Gumbel) error {
	p := newPlot(fmt.Sprintf("R*_T - m_T - log(Z_s)/theta, %s, s=%g", c.label, s), "R*_T - m_T - log(Z_s)/theta", "density")
	h, err := histogram(ys, histBins(len(ys)))
	if err != nil {
		return err
	}
	p.Add(h)
	p.Legend.Add(fmt.Sprintf("replicates with Z_s > 0 (%d)", len(ys)), h)
	lo, hi := span(ys)
	addCurve(p, fmt.Sprintf("Gumbel MLE: mu=%.3f, beta=%.3f", gf.Mu, gf.Beta), gumbelDensity(gf.Gumbel), lo-0.3, hi+0.3, colFit, nil)
	addCurve(p, fmt.Sprintf("Gumbel with beta = 1/theta = %.3f", fixed.Beta), gumbelDensity(fixed), lo-0.3, hi+0.3, colTheory, dashed)
	headroom(p)
	return b.save(p, fmt.Sprintf("randomshift-%s-s%g", c.tag, s), fmt.Sprintf(
		"The random shift at checkpoint s=%g in %s: R*_T - m_T - log(Z_s)/theta over the replicates with Z_s > 0, "+
			"with the two-parameter Gumbel fit and the fit with the scale held at 1/theta.", s, c.label))
}

// plotDirections: d = 2, the farthest particle's angle; d >= 3, its first coordinate,
// whose exact density under uniformity is proportional to (1 - t^2)^{(d-3)/2}.
func (b *builder) plotDirections(c *cellData, angles []float64) error {
	d := c.cell.Model.Dim
	var xs []float64
	var dens func(float64) float64
	var lo, hi float64
	var xl, cap string
	if d == 2 {
		xs, dens, lo, hi, xl = angles, func(float64) float64 { return 1 / (2 * math.Pi) }, 0, 2*math.Pi, "angle (radians)"
		cap = "Angle of the farthest particle in " + c.label + " against the uniform density."
	} else {
		for _, r := range c.reps {
			xs = append(xs, r.dir[0])
		}
		k := math.Exp(lgamma(float64(d)/2) - lgamma(float64(d-1)/2) - 0.5*math.Log(math.Pi))
		dens = func(t float64) float64 { return k * math.Pow(math.Max(1-t*t, 0), float64(d-3)/2) }
		lo, hi, xl = -1, 1, "first coordinate of the direction"
		cap = "First coordinate of the farthest particle's direction in " + c.label + " against its density under uniformity on the sphere."
	}
	p := newPlot("Direction of the farthest particle, "+c.label, xl, "density")
	h, err := histogram(xs, min(histBins(len(xs)), 24))
	if err != nil {
		return err
	}
	p.Add(h)
	p.Legend.Add(fmt.Sprintf("simulation (%d)", len(xs)), h)
	addCurve(p, "uniform on the sphere", dens, lo, hi, colTheory, dashed)
	p.Y.Min = 0
	headroom(p)
	return b.save(p, "direction-"+c.tag, cap)
}

func lgamma(x float64) float64 { v, _ := math.Lgamma(x); return v }

// plotPIT: histogram of the probability-integral transforms with the uniform density.
func (b *builder) plotPIT(c *cellData, s float64, pit []float64) error {
	p := newPlot(fmt.Sprintf("PIT of the farthest angle under Z_s(u)+ du, %s, s=%g", c.label, s), "PIT value", "density")
	h, err := histogram(pit, 20)
	if err != nil {
		return err
	}
	p.Add(h)
	p.Legend.Add(fmt.Sprintf("replicates (%d)", len(pit)), h)
	addCurve(p, "uniform (the limit)", func(float64) float64 { return 1 }, 0, 1, colTheory, dashed)
	p.Y.Min = 0
	headroom(p)
	return b.save(p, fmt.Sprintf("pit-%s-s%g", c.tag, s), fmt.Sprintf(
		"Probability-integral transform of the farthest particle's angle under the measure proportional to Z_s(u)+ du (s=%g), %s.", s, c.label))
}

// plotIntensity: mean number of particles per bin of R - m_T (log scale) with the
// many-to-one first moment.
func (b *builder) plotIntensity(c *cellData, edges, means, theory []float64) error {
	var pts, th plotter.XYs
	nb := len(means)
	for j := 0; j < nb-1; j++ {
		x := (edges[j] + edges[j+1]) / 2
		if means[j] > 0 {
			pts = append(pts, plotter.XY{X: x, Y: means[j]})
		}
		if theory[j] > 0 {
			th = append(th, plotter.XY{X: x, Y: theory[j]})
		}
	}
	p := newPlot("Mean extremal intensity, "+c.label, "R - m_T", "mean particles per bin")
	p.Y.Scale = plot.LogScale{}
	p.Y.Tick.Marker = logTicks{}
	p.Legend.Top, p.Legend.Left = true, true
	if len(pts) > 0 {
		sc, err := plotter.NewScatter(pts)
		if err != nil {
			return err
		}
		sc.Color = colData
		sc.Shape = draw.CircleGlyph{}
		sc.Radius = vg.Points(1.5)
		p.Add(sc)
		p.Legend.Add("simulation", sc)
	}
	if len(th) > 1 {
		ln, err := plotter.NewLine(th)
		if err != nil {
			return err
		}
		ln.Color, ln.Width = colTheory, vg.Points(1.5)
		p.Add(ln)
		p.Legend.Add("many-to-one: e^{gT} P(|sigma B_T| - m_T in bin)", ln)
	}
	p.Y.Min = math.Max(p.Y.Min, 0.3/float64(c.sk.N))
	p.Y.Max *= 10
	return b.save(p, "intensity-"+c.tag, fmt.Sprintf(
		"Mean number of particles per replicate in each bin (width %g) of R - m_T in %s, against the exact first moment from the many-to-one formula.",
		c.cell.Observe.BinWidth, c.label))
}

// errXY is a set of points with vertical error bars.
type errXY struct {
	plotter.XYs
	plotter.YErrors
}

func errorPoints(x, y, se []float64, z float64, col color.Color) (*plotter.Scatter, *plotter.YErrorBars, error) {
	e := errXY{XYs: make(plotter.XYs, len(x)), YErrors: make(plotter.YErrors, len(x))}
	for i := range x {
		e.XYs[i] = plotter.XY{X: x[i], Y: y[i]}
		e.YErrors[i].Low, e.YErrors[i].High = z*se[i], z*se[i]
	}
	sc, err := plotter.NewScatter(e.XYs)
	if err != nil {
		return nil, nil, err
	}
	sc.Color = col
	eb, err := plotter.NewYErrorBars(e)
	if err != nil {
		return nil, nil, err
	}
	eb.Color = col
	return sc, eb, nil
}

// plotWithin: mean number of particles within x of the maximum.
func (b *builder) plotWithin(c *cellData, x, mean, se []float64) error {
	if len(x) < 2 {
		return nil
	}
	p := newPlot("Particles within x of the maximum, "+c.label, "x", "mean number with R >= R*_T - x")
	p.Legend.Left = true
	sc, eb, err := errorPoints(x, mean, se, b.opt.z(), colData)
	if err != nil {
		return err
	}
	p.Add(sc, eb)
	p.Legend.Add(fmt.Sprintf("mean over %d replicates, %s interval", len(c.reps), pct(b.opt.Level)), sc)
	headroom(p)
	return b.save(p, "within-"+c.tag, "Mean number of particles within x of the maximal radius in "+c.label+
		" (only x where no replicate's kept top radii are exhausted).")
}

// plotCentring: median and mean of R*_T minus v T against T, with the fitted curves.
func (b *builder) plotCentring(m engine.Model, med, mean []horizonPoint, terms []fit.Term, fits [2]fit.LinearFit) error {
	p := newPlot(fmt.Sprintf("Centring across horizons, %s", modelLabel(m)), "horizon T", "R*_T - v T")
	p.Legend.Left = true
	lo, hi := math.Inf(1), math.Inf(-1)
	for k, s := range [][]horizonPoint{med, mean} {
		x, y, se := make([]float64, len(s)), make([]float64, len(s)), make([]float64, len(s))
		for i, q := range s {
			x[i], y[i], se[i] = q.T, q.y-m.Speed()*q.T, q.se
			lo, hi = math.Min(lo, q.T), math.Max(hi, q.T)
		}
		col := []color.Color{colFit, colAlt}[k]
		what := []string{"median", "mean"}[k]
		sc, eb, err := errorPoints(x, y, se, b.opt.z(), col)
		if err != nil {
			return err
		}
		p.Add(sc, eb)
		p.Legend.Add(what+" of R*_T", sc)
		if fits[k].Coef != nil {
			lf := fits[k]
			addCurve(p, fmt.Sprintf("%s fit: a=%.3f, b=%.3f", what, lf.Coef[0], lf.Coef[1]), func(T float64) float64 { return centringCurve(m, terms, lf, T) }, lo, hi, col, dashed)
		}
	}
	pad := 0.05 * (hi - lo)
	p.X.Min, p.X.Max = lo-pad, hi+pad
	headroom(p)
	return b.save(p, "centring-"+modelTag(m), fmt.Sprintf(
		"Median and mean of R*_T minus v T against the horizon for %s, with the weighted fits a T + b log T + c; theory a = v = %.4f, b = (d-4)/(2 theta) = %.4f.",
		modelLabel(m), m.Speed(), m.LogCoefficient()))
}
