package law

import (
	"errors"
	"fmt"
	"math"
	"runtime"
	"sort"
	"sync"

	"gonum.org/v1/gonum/stat/distuv"

	"bbmx/engine"
)

// Options tunes the solver.
type Options struct {
	// Tolerance is the target absolute error in probability; zero means 1e-5.
	Tolerance float64
	// OneSided asks for the law of max X_t (d = 1 only) instead of max |X_t|.
	OneSided bool
	// Threads bounds the number of solves run at once; zero means GOMAXPROCS.
	Threads int

	noReaction bool // pure diffusion: the law of |sigma B_t| (tests only)
}

// Value is one point of the distribution function.
type Value struct {
	Radius float64 // R (for the one-sided law: the level x, which may be negative)
	P      float64 // P(R*_T <= Radius)
	Err    float64 // estimated absolute error of P
}

// Limits of the refinement: the finest grid allowed, in nodes times steps per solve.
const (
	maxNodeSteps = 4e10
	boundaryEps  = 1e-16 // target of the domain-truncation bound
	roundoff     = 1e-14 // error floor added to every estimate
)

func (o Options) tol() float64 {
	if o.Tolerance == 0 {
		return 1e-5
	}
	return o.Tolerance
}

func (o Options) threads() int {
	if o.Threads > 0 {
		return o.Threads
	}
	return runtime.GOMAXPROCS(0)
}

func check(m engine.Model, horizon float64, opt Options) error {
	if err := m.Validate(); err != nil {
		return err
	}
	if !(horizon > 0) || math.IsInf(horizon, 0) {
		return fmt.Errorf("horizon must be a positive finite number, got %v", horizon)
	}
	if t := opt.Tolerance; t < 0 || math.IsNaN(t) || math.IsInf(t, 0) || (t != 0 && t < 1e-12) || t >= 1 {
		return fmt.Errorf("tolerance must be in [1e-12, 1), got %v", t)
	}
	if opt.OneSided && m.Dim != 1 {
		return fmt.Errorf("the one-sided law needs dimension 1, got %d", m.Dim)
	}
	return nil
}

// scale maps lengths and times to the solver's units (sigma = 1, g = 1).
type scale struct{ x, t float64 }

func scaleOf(m engine.Model) scale {
	g := m.Growth()
	return scale{x: math.Sqrt(g) / m.Sigma, t: g}
}

// logChiTail is Chernoff's bound log P(chi^2_d >= x) <= (d/2) log(x/d) + (d-x)/2, x > d.
func logChiTail(d int, x float64) float64 {
	fd := float64(d)
	if x <= fd {
		return 0
	}
	return fd/2*math.Log(x/fd) + (fd-x)/2
}

// radialDomain returns the outer radius L (scaled) and a bound on the error of the
// Dirichlet condition w = 0 there. By many-to-one, w - w_L <= e^T P(|B| reaches L before T
// and |B_T| <= R); by the strong Markov property and the half-space argument,
// P(|B| reaches L by T) <= 2 P(chi^2_d >= L^2/T), and from the sphere of radius L the
// chance to end within R is at most Phi-bar((L-R)/sqrt T) <= exp(-(L-R)^2/(2T))/2.
// (derived; the reflection principle and Chernoff's bound are textbook facts)
func radialDomain(d int, T, R float64) (L, bound float64) {
	logBound := func(L float64) float64 {
		z := (L - R) / math.Sqrt(T)
		return T + logChiTail(d, L*L/T) - z*z/2
	}
	lo := R + 1
	if logBound(lo) <= math.Log(boundaryEps) {
		return lo, math.Exp(logBound(lo))
	}
	hi := lo + 1
	for logBound(hi) > math.Log(boundaryEps) {
		hi = lo + 2*(hi-lo)
	}
	for range 60 {
		mid := (lo + hi) / 2
		if logBound(mid) > math.Log(boundaryEps) {
			lo = mid
		} else {
			hi = mid
		}
	}
	return hi, math.Exp(logBound(hi))
}

// lineDomain returns [xlo, xhi] (scaled) for one-sided queries in [xmin, xmax]. A
// particle path from x that touches xlo and ends >= 0 has, by reflection, the
// probability P(B_T <= 2 xlo - x) <= exp(-(x-2xlo)^2/(2T))/2; with many-to-one the error of
// w = 0 at xlo is at most e^T times that, and likewise at xhi. (derived)
func lineDomain(T, xmin, xmax float64) (xlo, xhi, bound float64) {
	D := math.Sqrt(2 * T * (T + math.Log(1/(2*boundaryEps))))
	xlo = math.Min((xmin-D)/2, math.Min(xmin, 0)-1)
	xhi = math.Max((xmax+D)/2, math.Max(xmax, 0)+1)
	zl := (xmin - 2*xlo) / math.Sqrt(T)
	zh := (2*xhi - xmax) / math.Sqrt(T)
	bound = 0.5*math.Exp(T-zl*zl/2) + 0.5*math.Exp(T-zh*zh/2)
	return
}

// trivial reports whether P(R*_T <= R) is within eps of 0 or 1 by elementary bounds:
// P <= P(one particle within R) (the chi-square law of |B_T|), and
// 1 - P <= E[#particles outside R] = e^T P(chi^2_d > R^2/T) (many-to-one).
func trivial(d int, oneSided, noReaction bool, T, R, eps float64) (p, bound float64, ok bool) {
	growth := T
	if noReaction {
		growth = 0
	}
	if oneSided {
		z := R / math.Sqrt(T)
		n := distuv.UnitNormal
		if lo := n.CDF(z); lo <= eps {
			return 0, lo, true
		}
		if z > 0 {
			if hi := 0.5 * math.Exp(growth-z*z/2); hi <= eps {
				return 1, hi, true
			}
		}
		return 0, 0, false
	}
	if R <= 0 {
		return 0, 0, true
	}
	x := R * R / T
	if lo := (distuv.ChiSquared{K: float64(d)}).CDF(x); lo <= eps {
		return 0, lo, true
	}
	if hi := math.Exp(growth + logChiTail(d, x)); hi <= eps {
		return 1, hi, true
	}
	return 0, 0, false
}

// problem is one solve family (all levels) in scaled units.
type problem struct {
	base  grid      // level 0
	query []float64 // scaled query points (line); radial answers are at node 0
	bound float64   // domain-truncation bound
}

// baseStep is the level-0 space step and time step in scaled units (front width ~ 1/sqrt2).
func baseStep(T float64) float64 { return 0.25 * math.Min(1, math.Sqrt(T)) }

func gradedSteps(T, tau float64) (tg float64, mg, mu int) {
	tg = math.Min(T, 1)
	mg = int(math.Ceil(2 * tg / tau))
	if T > tg {
		mu = int(math.Ceil((T - tg) / tau))
	}
	return
}

func radialProblem(d, k int, T, R float64, nR int, noReaction bool) problem {
	h := R / float64(nR)
	L, bound := radialDomain(d, T, R)
	tg, mg, mu := gradedSteps(T, baseStep(T))
	return problem{
		base: grid{dim: d, k: k, h: h, n: int(math.Ceil(L / h)), jump: nR,
			horizon: T, tg: tg, mg: mg, mu: mu, noReaction: noReaction},
		bound: bound,
	}
}

func lineProblem(k int, T float64, xs []float64, noReaction bool) problem {
	xmin, xmax := xs[0], xs[0]
	for _, x := range xs {
		xmin, xmax = math.Min(xmin, x), math.Max(xmax, x)
	}
	xlo, xhi, bound := lineDomain(T, xmin, xmax)
	// The grid runs in y = -x, so that as in the radial case u = 1 - w starts as
	// 1{y > 0} and the region where u rounds to 1 lies at the high end.
	h := baseStep(T)
	j := int(math.Ceil(xhi / h))
	n := j + int(math.Ceil(-xlo/h))
	tg, mg, mu := gradedSteps(T, h)
	ys := make([]float64, len(xs))
	for i, x := range xs {
		ys[i] = -x
	}
	return problem{
		base: grid{line: true, dim: 1, k: k, h: h, n: n, x0: -float64(j) * h, jump: j,
			horizon: T, tg: tg, mg: mg, mu: mu, noReaction: noReaction},
		query: ys, bound: bound,
	}
}

func (p problem) level(l int) grid {
	g := p.base
	f := 1 << l
	g.h /= float64(f)
	g.n *= f
	g.jump *= f
	g.x0 = -float64(g.jump) * g.h
	g.mg *= f
	g.mu *= f
	return g
}

func (g grid) cost() float64 { return float64(g.n) * float64(g.mg+g.mu+2) }

// values solves level l and returns w at the query points (radial: at r = 0).
func (p problem) values(l int) ([]float64, stats) {
	g := p.level(l)
	u, st := g.solve()
	if !g.line {
		return []float64{1 - u[0]}, st
	}
	out := make([]float64, len(p.query))
	for i, x := range p.query {
		out[i] = g.valueAt(u, x)
	}
	return out, st
}

// errTolerance reports a tolerance the grid cap cannot reach.
var errTolerance = errors.New("law: tolerance not reached")

// result holds the extrapolated values of one problem.
type result struct {
	p, err []float64
	level  int // finest level used
	stats  stats
}

// richardson solves levels from, from+1, ... and extrapolates. With P_l the level-l
// value, X_l = P_l + (P_l - P_{l-1})/3 removes the h^2 + tau^2 term, leaving an O(h^4)
// error. The error of the finest extrapolant X is estimated from its distance D to the
// previous one: D itself (conservative) when only three levels exist or the differences
// do not shrink at the O(h^4) rate, and D/5 (three times the asymptotic value D/15) once
// four levels confirm that rate. Unless fixed, levels are added until the estimate is
// below tol; fixed solves exactly four levels.
func (p problem) richardson(tol float64, from int, fixed bool) (result, error) {
	from = max(from, 0)
	var levels [][]float64
	var st stats
	st.maxU = 1
	for l := from; ; l++ {
		if g := p.level(l); g.cost() > maxNodeSteps {
			est := math.NaN()
			if len(levels) >= 3 {
				est = maxOf(estimate(levels, p.bound).err)
			}
			return result{}, fmt.Errorf("%w: estimated error %.3g above %.3g at the finest grid allowed (h = %.3g in scaled units); ask for a larger tolerance",
				errTolerance, est, tol, p.level(l-1).h)
		}
		v, s := p.values(l)
		st.minU = math.Min(st.minU, s.minU)
		st.maxU = math.Max(st.maxU, s.maxU)
		st.nodeSteps += s.nodeSteps
		levels = append(levels, v)
		if len(levels) < 3 {
			continue
		}
		r := estimate(levels, p.bound)
		r.level, r.stats = l, st
		if fixed && len(levels) == 4 || !fixed && len(levels) >= 4 && maxOf(r.err) <= tol {
			return r, nil
		}
	}
}

// estimate extrapolates the last levels (see richardson).
func estimate(levels [][]float64, bound float64) result {
	n := len(levels)
	x := func(l, i int) float64 { return levels[l][i] + (levels[l][i]-levels[l-1][i])/3 }
	c := levels[n-1]
	r := result{p: make([]float64, len(c)), err: make([]float64, len(c))}
	for i := range c {
		x1, x2 := x(n-2, i), x(n-1, i)
		d := math.Abs(x2 - x1)
		e := d
		if n >= 4 {
			d0 := math.Abs(x1 - x(n-3, i))
			if d < 1e-13 || (d0 > 6*d && d0 < 40*d) {
				e = d / 5
			}
		}
		r.p[i] = math.Min(math.Max(x2, 0), 1)
		r.err[i] = e + bound + roundoff
	}
	return r
}

func maxOf(xs []float64) float64 {
	m := 0.0
	for _, x := range xs {
		m = math.Max(m, x)
	}
	return m
}

// nodesTo is the number of level-0 intervals between 0 and the scaled radius R.
func nodesTo(R, T float64) int { return max(1, int(math.Ceil(R/baseStep(T)))) }

// CDF returns P(R*_T <= R) for each radius, each with its error estimate. For the
// one-sided law (Options.OneSided, d = 1) the radii are levels x of max X_T and one solve
// serves them all; otherwise each radius is its own solve, run in parallel.
func CDF(m engine.Model, horizon float64, radii []float64, opt Options) ([]Value, error) {
	if err := check(m, horizon, opt); err != nil {
		return nil, err
	}
	for _, r := range radii {
		if math.IsNaN(r) || math.IsInf(r, 0) || (!opt.OneSided && r < 0) {
			return nil, fmt.Errorf("radius must be a finite number >= 0, got %v", r)
		}
	}
	sc := scaleOf(m)
	T := horizon * sc.t
	tol := opt.tol()
	out := make([]Value, len(radii))
	var todo []int
	for i, r := range radii {
		out[i].Radius = r
		if p, b, ok := trivial(m.Dim, opt.OneSided, opt.noReaction, T, r*sc.x, tol/100); ok {
			out[i].P, out[i].Err = p, b+roundoff
			continue
		}
		todo = append(todo, i)
	}
	if len(todo) == 0 {
		return out, nil
	}
	if opt.OneSided {
		xs := make([]float64, len(todo))
		for j, i := range todo {
			xs[j] = radii[i] * sc.x
		}
		res, err := lineProblem(m.Children, T, xs, opt.noReaction).richardson(tol, 0, false)
		if err != nil {
			return nil, err
		}
		for j, i := range todo {
			out[i].P, out[i].Err = res.p[j], res.err[j]
		}
		return out, nil
	}
	err := parallel(len(todo), opt.threads(), func(j int) error {
		i := todo[j]
		R := radii[i] * sc.x
		res, err := radialProblem(m.Dim, m.Children, T, R, nodesTo(R, T), opt.noReaction).richardson(tol, 0, false)
		if err != nil {
			return err
		}
		out[i].P, out[i].Err = res.p[0], res.err[0]
		return nil
	})
	return out, err
}

// parallel runs f(0..n-1) on at most threads goroutines and returns the first error.
func parallel(n, threads int, f func(int) error) error {
	var (
		wg   sync.WaitGroup
		mu   sync.Mutex
		next int
		ferr error
	)
	for range min(n, max(threads, 1)) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				mu.Lock()
				i := next
				next++
				stop := ferr != nil
				mu.Unlock()
				if i >= n || stop {
					return
				}
				if err := f(i); err != nil {
					mu.Lock()
					if ferr == nil {
						ferr = err
					}
					mu.Unlock()
				}
			}
		}()
	}
	wg.Wait()
	return ferr
}

// Quantile returns the radius R with P(R*_T <= R) = q and an estimate of its error
// (the probability error divided by the density, plus the root-finding residual).
func Quantile(m engine.Model, horizon, q float64, opt Options) (radius, err float64, e error) {
	if e := check(m, horizon, opt); e != nil {
		return 0, 0, e
	}
	if !(q > 0 && q < 1) {
		return 0, 0, fmt.Errorf("quantile level must be in (0, 1), got %v", q)
	}
	sc := scaleOf(m)
	T := horizon * sc.t
	tol := opt.tol()
	if opt.OneSided {
		r, rerr, e := lineQuantile(m.Children, T, q, tol, opt.noReaction)
		return r / sc.x, rerr / sc.x, e
	}
	r, rerr, e := radialQuantile(m.Dim, m.Children, T, q, tol, opt.noReaction, opt.threads())
	return r / sc.x, rerr / sc.x, e
}

// guess is a starting point for quantile search in scaled units: the centring plus the
// Gumbel quantile of scale 1/theta (theta = sqrt2 in scaled units), or the diffusive
// scale for short horizons.
func guess(d int, T, q float64, noReaction bool) float64 {
	if noReaction {
		return math.Sqrt(T * (distuv.ChiSquared{K: float64(d)}).Quantile(q))
	}
	m := engine.Model{Dim: d, Sigma: 1, Beta: 1, Children: 2}
	g := m.Centring(T) - math.Log(-math.Log(q))/math.Sqrt2
	return math.Max(g, math.Sqrt(T*float64(d)))
}

// radialQuantile finds the root in R of P(R) - q. The number of nodes up to R is fixed
// at the first guess, so that during the search P is a smooth function of R
// (h = R/nR varies continuously). The root is first located with the cheap levels 0..2,
// then polished by secant steps at the level the tolerance needs.
func radialQuantile(d, k int, T, q, tol float64, noReaction bool, threads int) (float64, float64, error) {
	R0 := guess(d, T, q, noReaction)
	nR := nodesTo(R0, T)
	prob := func(R float64) problem { return radialProblem(d, k, T, R, nR, noReaction) }
	evalFrom := func(from int) func(float64) (float64, float64, error) {
		return func(R float64) (float64, float64, error) {
			if R <= 0 {
				return -q, 0, nil
			}
			res, err := prob(R).richardson(tol, from, true)
			if err != nil {
				return 0, 0, err
			}
			return res.p[0] - q, res.err[0], nil
		}
	}
	// Stage 1: locate the root to a loose tolerance at a fixed coarse level.
	tol1 := math.Max(30*tol, 1e-3)
	coarse, err := prob(R0).richardson(tol1, 0, false)
	if err != nil {
		return 0, 0, err
	}
	x, dens, err := bracketRoot(evalFrom(coarse.level-3), R0, 0.5*math.Min(1, math.Sqrt(T)), tol1/10, threads)
	if err != nil {
		return 0, 0, fmt.Errorf("law: %v quantile: %w", q, err)
	}
	// Stage 2: secant steps at the level the tolerance needs.
	first, err := prob(x).richardson(tol, coarse.level-3, false)
	if err != nil {
		return 0, 0, err
	}
	full := evalFrom(first.level - 3)
	fx, perr := first.p[0]-q, first.err[0]
	for range 12 {
		if math.Abs(fx) <= tol/20 {
			break
		}
		xn := x - fx/dens
		fn, en, err := full(xn)
		if err != nil {
			return 0, 0, err
		}
		if s := (fn - fx) / (xn - x); s > 0 {
			dens = s
		}
		x, fx, perr = xn, fn, en
	}
	return x, (perr + math.Abs(fx)) / dens, nil
}

// bracketRoot finds a root of the increasing function f near x0: it brackets by steps
// growing from step (two points evaluated at once), then runs the Illinois variant of
// regula falsi until |f| < ftol. It returns the root and the slope there.
func bracketRoot(f func(float64) (float64, float64, error), x0, step, ftol float64, threads int) (float64, float64, error) {
	fa, _, err := f(x0)
	if err != nil {
		return 0, 0, err
	}
	a := x0
	dir := 1.0
	if fa > 0 {
		dir = -1
	}
	var b, fb float64
	for {
		cands := [2]float64{a + dir*step, a + 2*dir*step}
		var vals [2]float64
		err := parallel(2, threads, func(i int) error {
			v, _, err := f(cands[i])
			vals[i] = v
			return err
		})
		if err != nil {
			return 0, 0, err
		}
		if vals[0]*fa <= 0 {
			b, fb = cands[0], vals[0]
			break
		}
		if vals[1]*fa <= 0 {
			a, fa = cands[0], vals[0]
			b, fb = cands[1], vals[1]
			break
		}
		a, fa = cands[1], vals[1]
		step *= 2
		if step > 1e7 {
			return 0, 0, errors.New("could not bracket the root")
		}
	}
	side := 0
	for range 100 {
		x := b - fb*(b-a)/(fb-fa)
		fx, _, err := f(x)
		if err != nil {
			return 0, 0, err
		}
		if math.Abs(fx) < ftol || math.Abs(b-a) < 1e-12*math.Max(1, math.Abs(x)) {
			slope := math.Abs((fb - fa) / (b - a))
			return x, slope, nil
		}
		if fx*fb < 0 {
			a, fa = b, fb
			side = 0
		} else {
			if side == 1 {
				fa /= 2
			}
			side = 1
		}
		b, fb = x, fx
	}
	return 0, 0, errors.New("root search did not converge")
}

// lineQuantile: one solve per level gives the whole one-sided distribution function;
// the quantile is found on each level's interpolant and then extrapolated.
func lineQuantile(k int, T, q, tol float64, noReaction bool) (float64, float64, error) {
	x0 := guess(1, T, q, noReaction)
	if noReaction {
		x0 = math.Sqrt(T) * distuv.UnitNormal.Quantile(q)
	}
	width := 6 * math.Max(1, math.Sqrt(math.Min(T, 4)))
	pr := lineProblem(k, T, []float64{x0 - width, x0 + width}, noReaction)
	var qs []float64
	var dens float64
	var st stats
	for l := 0; ; l++ {
		g := pr.level(l)
		if g.cost() > maxNodeSteps {
			return 0, 0, fmt.Errorf("%w at the finest grid allowed", errTolerance)
		}
		u, s := g.solve()
		st.nodeSteps += s.nodeSteps
		f := func(x float64) float64 { return g.valueAt(u, -x) - q }
		lo, hi := x0-width, x0+width
		if f(lo) > 0 || f(hi) < 0 {
			return 0, 0, fmt.Errorf("law: the %v quantile lies outside the searched window [%g, %g]", q, lo, hi)
		}
		for range 200 {
			mid := (lo + hi) / 2
			if f(mid) > 0 {
				hi = mid
			} else {
				lo = mid
			}
			if hi-lo < 1e-13*math.Max(1, math.Abs(mid)) {
				break
			}
		}
		xq := (lo + hi) / 2
		dens = (g.valueAt(u, -xq-1e-3) - g.valueAt(u, -xq+1e-3)) / 2e-3
		qs = append(qs, xq)
		if len(qs) < 3 {
			continue
		}
		r := estimate(wrap(qs), 0)
		e := r.err[0] - roundoff + (pr.bound+roundoff)/dens
		if len(qs) >= 4 && e*dens <= tol {
			return extrapolated(qs), e, nil
		}
	}
}

func wrap(xs []float64) [][]float64 {
	out := make([][]float64, len(xs))
	for i, x := range xs {
		out[i] = []float64{x}
	}
	return out
}

func extrapolated(xs []float64) float64 {
	n := len(xs)
	return xs[n-1] + (xs[n-1]-xs[n-2])/3
}

// Table is the distribution function tabulated on an even grid, with a monotone
// interpolant between the nodes.
type Table struct {
	Lo, Hi float64   // range of the table (original units)
	R, P   []float64 // nodes and P(R*_T <= R) there (made non-decreasing)
	Err    []float64 // error estimate at each node
	MaxErr float64   // largest node error
	slope  []float64 // Fritsch-Carlson slopes
}

// CDFTable tabulates the distribution function at n >= 2 even points of [lo, hi] (n
// solves for the radial law, one for the one-sided law) so that At is cheap, e.g. for a
// Kolmogorov-Smirnov statistic over many samples.
func CDFTable(m engine.Model, horizon float64, lo, hi float64, n int, opt Options) (*Table, error) {
	if n < 2 {
		return nil, fmt.Errorf("table needs at least 2 points, got %d", n)
	}
	if !(hi > lo) {
		return nil, fmt.Errorf("table range must have lo < hi, got [%v, %v]", lo, hi)
	}
	rs := make([]float64, n)
	for i := range rs {
		rs[i] = lo + (hi-lo)*float64(i)/float64(n-1)
	}
	vals, err := CDF(m, horizon, rs, opt)
	if err != nil {
		return nil, err
	}
	t := &Table{Lo: lo, Hi: hi, R: rs, P: make([]float64, n), Err: make([]float64, n)}
	run := 0.0
	for i, v := range vals {
		run = math.Max(run, v.P)
		t.P[i], t.Err[i] = run, v.Err
		t.MaxErr = math.Max(t.MaxErr, v.Err)
	}
	t.slope = monotoneSlopes(t.R, t.P)
	return t, nil
}

// monotoneSlopes returns node slopes for a monotone piecewise cubic Hermite interpolant
// ("Monotone piecewise cubic interpolation", SIAM J. Numer. Anal. 17 (1980)).
func monotoneSlopes(x, y []float64) []float64 {
	n := len(x)
	del := make([]float64, n-1)
	for i := range del {
		del[i] = (y[i+1] - y[i]) / (x[i+1] - x[i])
	}
	s := make([]float64, n)
	s[0], s[n-1] = del[0], del[n-2]
	for i := 1; i < n-1; i++ {
		if del[i-1]*del[i] > 0 {
			s[i] = 2 / (1/del[i-1] + 1/del[i]) // harmonic mean keeps monotonicity
		}
	}
	for i := range del {
		if del[i] == 0 {
			s[i], s[i+1] = 0, 0
		}
	}
	return s
}

// At returns the interpolated P(R*_T <= r): 0 or 1 outside a table that reaches them,
// else clamped to the end values.
func (t *Table) At(r float64) float64 {
	n := len(t.R)
	if r <= t.R[0] {
		return t.P[0]
	}
	if r >= t.R[n-1] {
		return t.P[n-1]
	}
	i := sort.SearchFloat64s(t.R, r) - 1
	i = min(max(i, 0), n-2)
	h := t.R[i+1] - t.R[i]
	s := (r - t.R[i]) / h
	h00 := (1 + 2*s) * (1 - s) * (1 - s)
	h10 := s * (1 - s) * (1 - s)
	h01 := s * s * (3 - 2*s)
	h11 := s * s * (s - 1)
	v := h00*t.P[i] + h10*h*t.slope[i] + h01*t.P[i+1] + h11*h*t.slope[i+1]
	return math.Min(math.Max(v, t.P[i]), t.P[i+1])
}
