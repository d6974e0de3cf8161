package law

import (
	"fmt"
	"math"
)

// grid describes one discretisation of one problem in scaled units (diffusion
// coefficient 1/2, linear reaction rate 1). Level l of a problem halves h and every time
// step of level l-1, so the levels are nested and Richardson extrapolation applies.
type grid struct {
	line bool    // true: the line (one-sided law); false: radial in dimension dim
	dim  int     // dimension (radial case)
	k    int     // children per branching
	h    float64 // space step
	n    int     // number of intervals; nodes 0..n
	x0   float64 // position of node 0 (0 for radial; <= 0 on the line)
	jump int     // node index of the jump of the start data

	horizon float64 // scaled horizon
	tg      float64 // end of the graded part of the time mesh
	mg, mu  int     // graded and uniform step counts

	noReaction bool // pure diffusion (for testing against the chi-square law)
}

// tiny is the level below which u is set to zero: values below it only arise far
// ahead of the front, and computing with subnormal numbers (below 2.2e-308) is many
// times slower. A perturbation of u grows at most like e^t (the reaction's slope is at
// most 1 in scaled units), so the effect on the answer is at most
// steps * tiny * e^T (derived), negligible for T up to about 600.
const tiny = 1e-300

// snap: u within snap of 1 (w below a few units of round-off) is set to exactly 1, so
// that round-off noise does not keep the region behind the front active.
const snap = 1e-14

// trim enables leaving the region behind the front out of the steps (a variable so that
// a test can compare with the untrimmed solve).
var trim = true

// trailMargin is the number of nodes kept in the step beyond the last node with u < 1,
// plus the reach of the implicit step: (I + aL)^-1 spreads a change over a distance of
// about sqrt(a) per factor e (L is minus the discrete Laplacian), so within 33 sqrt(a)
// it falls below 1e-14 (derived: e^-33 = 4.7e-15). On a coarse grid that is a few nodes,
// but with a large step against a fine grid (short horizons, small radii) it is many:
// a fixed margin then held w at 0 like a wall and gave wrong probabilities with small
// error estimates.
const trailMargin = 24

// trailReach is 33 (see trailMargin).
const trailReach = 33

// stats records what a solve saw; the tests read it.
type stats struct {
	minU, maxU float64 // extremes of u before clamping (ideally within [0, 1])
	nodeSteps  float64 // work done: nodes times steps
}

// times returns the time mesh 0 = t_0 < ... < t_M = horizon.
func (g *grid) times() []float64 {
	ts := make([]float64, 0, g.mg+g.mu+1)
	for i := 0; i <= g.mg; i++ {
		s := float64(i) / float64(g.mg)
		ts = append(ts, g.tg*s*s)
	}
	for i := 1; i <= g.mu; i++ {
		ts = append(ts, g.tg+(g.horizon-g.tg)*float64(i)/float64(g.mu))
	}
	ts[len(ts)-1] = g.horizon
	return ts
}

// coefficients returns cp, cm with (L u)_i = cp_i (u_i - u_{i+1}) + cm_i (u_i - u_{i-1}),
// the negative Laplacian on the nodes. Radial: finite volumes with exact shell volumes
// V_i = ((r_i+h/2)^d - (r_i-h/2)^d)/d and face areas (r_i+h/2)^{d-1}; written as ratios so
// that large d and large i do not overflow.
func (g *grid) coefficients() (cp, cm []float64) {
	cp = make([]float64, g.n+1)
	cm = make([]float64, g.n+1)
	ih2 := 1 / (g.h * g.h)
	if g.line {
		for i := range cp {
			cp[i], cm[i] = ih2, ih2
		}
		return
	}
	d := float64(g.dim)
	cp[0] = 2 * d * ih2
	for i := 1; i <= g.n; i++ {
		a := float64(i) + 0.5
		// 1 - ((i-1/2)/(i+1/2))^d, computed without cancellation.
		q := -math.Expm1(d * math.Log1p(-1/a))
		cp[i] = d * ih2 / (a * q)
		cm[i] = cp[i] * math.Exp((d-1)*math.Log1p(-1/a))
	}
	return
}

// reaction applies the exact flow of u' = ((1-u) - (1-u)^k)/(k-1) over time s.
// With z = (1-u)^{1-k} the equation is z' = z - 1 (a Bernoulli equation), so
// z(s) - 1 = (z(0) - 1) e^s; for k = 2 this is the logistic flow u e^s/(1 - u + u e^s).
type reaction struct {
	k     int
	e, km float64 // e^s, k-1
}

func newReaction(k int, s float64) reaction {
	return reaction{k: k, e: math.Exp(s), km: float64(k - 1)}
}

func (r reaction) apply(u float64) float64 {
	if u <= 0 {
		return 0
	}
	if u >= 1 {
		return 1
	}
	if r.k == 2 {
		return u * r.e / (1 + u*(r.e-1))
	}
	a := math.Expm1(-r.km*math.Log1p(-u)) * r.e
	return -math.Expm1(-math.Log1p(a) / r.km)
}

// solve runs the scheme and returns u = 1 - w at the horizon on all nodes.
func (g *grid) solve() ([]float64, stats) {
	n := g.n
	cp, cm := g.coefficients()
	u := make([]float64, n+1)
	for i := range u {
		switch {
		case i < g.jump:
			u[i] = 0
		case i == g.jump:
			u[i] = 0.5
		default:
			u[i] = 1
		}
	}
	// Boundary values (held fixed): u_n = 1; on the line also u_0 = 0.
	first := 0
	if g.line {
		first = 1
	}
	last := n - 1
	// Behind the front u rounds to exactly 1 (w < 1.1e-16); nodes beyond the last one
	// below 1, plus a margin, are left out of the step (their w is below round-off and
	// decays there), so the work follows the front instead of the whole domain.
	hi := last
	st := stats{minU: 0, maxU: 1}

	ts := g.times()
	m := len(ts) - 1
	dp := make([]float64, n+1) // forward-sweep values

	// step applies the diffusion part (I + a L) u_new = (I - b L) u_old, with a = b for
	// Crank-Nicolson and b = 0 for backward Euler, then the reaction (if set). The
	// Thomas factorisation depends on a only and is reused while the step is uniform.
	var fa, fb float64 = -1, -1
	f := factorisation{}
	step := func(a, b float64, react *reaction) {
		if a != fa || b != fb {
			f.build(cp, cm, first, last, a, b)
			fa, fb = a, b
		}
		prev := 0.0
		last := hi
		for i := first; i <= last; i++ {
			lo := 0.0
			if i > 0 {
				lo = u[i-1]
			}
			rhs := f.e[i]*u[i] + f.bp[i]*u[i+1] + f.bm[i]*lo
			if i == first && i > 0 { // known left boundary value (line)
				rhs += f.am[i] * u[i-1]
			}
			if i == last {
				rhs += f.ap[i] * u[i+1]
			}
			prev = (rhs + f.am[i]*prev) * f.inv[i]
			dp[i] = prev
		}
		next := 0.0
		top := first - 1 // last node with u < 1 after the step
		for i := last; i >= first; i-- {
			x := dp[i]
			if i < last {
				x += f.cpr[i] * next
			}
			if x < st.minU { // before any clamping: the tests read these
				st.minU = x
			}
			if x > st.maxU {
				st.maxU = x
			}
			if x < tiny { // keep out of the slow subnormal range (see tiny)
				x = 0
			}
			next = x
			if react != nil {
				u[i] = react.apply(x)
			} else {
				u[i] = min(max(x, 0), 1)
			}
			if u[i] > 1-snap {
				u[i] = 1
			}
			if top < first && u[i] < 1 {
				top = i
			}
		}
		st.nodeSteps += float64(last - first + 1)
		if trim {
			reach := math.Ceil(trailReach * math.Sqrt(a) / g.h)
			hi = min(n-1, max(top, first)+trailMargin+int(min(reach, float64(n))))
		}
	}
	reactOver := func(s float64) *reaction {
		if g.noReaction {
			return nil
		}
		r := newReaction(g.k, s)
		return &r
	}
	if r := reactOver((ts[1] - ts[0]) / 2); r != nil {
		for i := first; i <= last; i++ {
			u[i] = r.apply(u[i])
		}
	}
	for j := 1; j <= m; j++ {
		tau := ts[j] - ts[j-1]
		// Reaction to the middle of the next step (Strang halves merged).
		var rs float64
		if j < m {
			rs = (tau + ts[j+1] - ts[j]) / 2
		} else {
			rs = tau / 2
		}
		if j <= 2 { // Rannacher: two backward Euler half-steps
			step(tau/4, 0, nil)
			step(tau/4, 0, reactOver(rs))
		} else {
			step(tau/4, tau/4, reactOver(rs))
		}
	}
	return u, st
}

// valueAt interpolates the solution u at scaled position x with a six-point Lagrange
// polynomial (error O(h^6), below the scheme's own error) and returns w = 1 - u.
func (g *grid) valueAt(u []float64, x float64) float64 {
	s := (x - g.x0) / g.h
	i := int(math.Floor(s))
	if math.Abs(s-math.Round(s)) < 1e-9 {
		j := int(math.Round(s))
		return 1 - u[j]
	}
	lo := min(max(i-2, 0), g.n-5)
	var w float64
	for a := lo; a < lo+6; a++ {
		l := 1.0
		for b := lo; b < lo+6; b++ {
			if b != a {
				l *= (s - float64(b)) / float64(a-b)
			}
		}
		w += l * (1 - u[a])
	}
	return w
}

func (g grid) String() string {
	return fmt.Sprintf("h=%g n=%d steps=%d+%d", g.h, g.n, g.mg, g.mu)
}

// factorisation holds, for one step size, the explicit coefficients
// (u_i e_i + bp_i u_{i+1} + bm_i u_{i-1}) and the Thomas factors of I + a L, whose
// off-diagonals are -am_i (left) and -ap_i (right).
type factorisation struct {
	e, bp, bm, am, ap, inv, cpr []float64
}

func (f *factorisation) build(cp, cm []float64, first, last int, a, b float64) {
	n := len(cp)
	if len(f.e) != n {
		*f = factorisation{e: make([]float64, n), bp: make([]float64, n), bm: make([]float64, n),
			am: make([]float64, n), ap: make([]float64, n), inv: make([]float64, n), cpr: make([]float64, n)}
	}
	prevC := 0.0
	for i := first; i <= last; i++ {
		f.bp[i], f.bm[i] = b*cp[i], b*cm[i]
		f.e[i] = 1 - f.bp[i] - f.bm[i]
		f.am[i], f.ap[i] = a*cm[i], a*cp[i]
		al := f.am[i]
		if i == first {
			al = 0
		}
		inv := 1 / (1 + f.am[i] + f.ap[i] - al*prevC)
		f.inv[i] = inv
		if i == last {
			prevC = 0
		} else {
			prevC = f.ap[i] * inv
		}
		f.cpr[i] = prevC
	}
}
