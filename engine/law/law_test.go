package law

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"

	"bbmx/engine"
)

var std = func(d int) engine.Model { return engine.Model{Dim: d, Sigma: 1, Beta: 1, Children: 2} }

// Without branching the farthest particle is the only one: P(|sigma B_t| <= R) =
// P(chi^2_d <= R^2/(sigma^2 t)) (handbook fact; values from gonum's distuv.ChiSquared).
func TestPureDiffusionIsChiSquare(t *testing.T) {
	for _, c := range []struct {
		d        int
		sigma, T float64
	}{{1, 1, 1}, {2, 1, 10}, {3, 2, 3}, {4, 0.5, 20}, {7, 1, 2},
		// Short horizons and radii far below the coarse grid's step: the implicit steps
		// then reach far beyond the front, which the work-saving margin must follow
		// (with a fixed margin these gave P near 0, or ran to the finest grid and
		// failed). Here the Richardson estimate can understate the error (6.6e-9
		// against 8.6e-10 at d = 1, R = 0.002), so these are held to the tolerance
		// asked for rather than to the estimate.
		{1, 1, 0.001}, {2, 1, 0.01}} {
		m := engine.Model{Dim: c.d, Sigma: c.sigma, Beta: 1.5, Children: 2}
		chi := distuv.ChiSquared{K: float64(c.d)}
		var radii []float64
		for _, q := range []float64{0.02, 0.05, 0.3, 0.6, 0.95} {
			radii = append(radii, c.sigma*math.Sqrt(c.T*chi.Quantile(q)))
		}
		vals, err := CDF(m, c.T, radii, Options{Tolerance: 1e-7, noReaction: true})
		if err != nil {
			t.Fatal(err)
		}
		for _, v := range vals {
			exact := chi.CDF(v.Radius * v.Radius / (c.sigma * c.sigma * c.T))
			bound := v.Err
			if c.T < 0.1 {
				bound = 1e-7
			}
			if d := math.Abs(v.P - exact); d > bound || v.Err > 1e-7 {
				t.Errorf("d=%d sigma=%g T=%g R=%.4f: P=%.10f exact=%.10f (diff %.2e, err %.2e)",
					c.d, c.sigma, c.T, v.Radius, v.P, exact, d, v.Err)
			}
		}
	}
}

// One-sided, without branching: P(sigma B_t <= x) = Phi(x/(sigma sqrt t)) (handbook fact;
// gonum's distuv.UnitNormal). One solve serves all x, negative ones included.
func TestPureDiffusionOneSidedIsNormal(t *testing.T) {
	m := engine.Model{Dim: 1, Sigma: 1.5, Beta: 1, Children: 2}
	T := 4.0
	xs := []float64{-4, -1.3, 0, 0.77, 2.5, 5}
	vals, err := CDF(m, T, xs, Options{Tolerance: 1e-7, OneSided: true, noReaction: true})
	if err != nil {
		t.Fatal(err)
	}
	for _, v := range vals {
		exact := distuv.UnitNormal.CDF(v.Radius / (1.5 * 2))
		if d := math.Abs(v.P - exact); d > v.Err || v.Err > 1e-7 {
			t.Errorf("x=%g: P=%.10f exact=%.10f (diff %.2e, err %.2e)", v.Radius, v.P, exact, d, v.Err)
		}
	}
}

// Many-to-one (SPEC §3, common practice): the expected number of particles outside R is
// e^{gT} P(chi^2_d > R^2/(sigma^2 T)), which bounds 1 - P(R*_T <= R) from above; from
// below it is at least the chance that one given line of descent ends outside R. This
// pins the scaling in sigma, beta and k.
func TestManyToOneBounds(t *testing.T) {
	for _, m := range []engine.Model{
		{Dim: 2, Sigma: 2, Beta: 0.5, Children: 3},
		{Dim: 3, Sigma: 0.7, Beta: 2, Children: 2},
		{Dim: 1, Sigma: 1, Beta: 1, Children: 5},
	} {
		T := 3.0
		chi := distuv.ChiSquared{K: float64(m.Dim)}
		var radii []float64
		for _, z := range []float64{1, 2, 3, 4.5} {
			radii = append(radii, m.Sigma*math.Sqrt(T)*(math.Sqrt(float64(m.Dim))+z))
		}
		vals, err := CDF(m, T, radii, Options{Tolerance: 1e-7})
		if err != nil {
			t.Fatal(err)
		}
		for _, v := range vals {
			tail := chi.Survival(v.Radius * v.Radius / (m.Sigma * m.Sigma * T))
			lo, hi := tail, math.Min(1, math.Exp(m.Growth()*T)*tail)
			if q := 1 - v.P; q < lo-v.Err || q > hi+v.Err {
				t.Errorf("%+v R=%.3f: P(R* > R)=%.6g outside [%.6g, %.6g]", m, v.Radius, q, lo, hi)
			}
		}
	}
}

// Grid refinement: with h and every time step halved, the differences of successive
// levels shrink by 4 (second order in space and time), for pure diffusion and with the
// reaction. Once the start is forgotten (T = 30) the Richardson extrapolants'
// differences shrink by about 16 (fourth order); at short horizons several O(h^4) terms
// of either sign compete and the extrapolants' ratio wanders, which the error estimate
// detects (it then falls back to its conservative form).
func TestSecondOrder(t *testing.T) {
	for _, c := range []struct {
		d          int
		T, R       float64
		noReaction bool
	}{{3, 10, 7, true}, {2, 4, 5.5, false}, {1, 6, 8, false}, {4, 8, 11, false}, {3, 30, 40, false}} {
		p := radialProblem(c.d, 2, c.T, c.R, nodesTo(c.R, c.T), c.noReaction)
		var v []float64
		for l := 0; l <= 4; l++ {
			x, _ := p.values(l)
			v = append(v, x[0])
		}
		for i := 3; i < len(v); i++ {
			if ratio := (v[i-1] - v[i-2]) / (v[i] - v[i-1]); math.Abs(ratio-4) > 0.25 {
				t.Errorf("%+v: level ratio %.3f at level %d, want 4 (second order)", c, ratio, i)
			}
		}
		if c.T < 30 {
			continue
		}
		x := func(i int) float64 { return v[i] + (v[i]-v[i-1])/3 }
		for i := 3; i < len(v); i++ {
			if r := (x(i-1) - x(i-2)) / (x(i) - x(i-1)); r < 12 || r > 20 {
				t.Errorf("%+v: extrapolant ratio %.2f at level %d, want about 16", c, r, i)
			}
		}
	}
}

// w = 1 - u stays in [0, 1] before any clamping (Crank-Nicolson is not positivity
// preserving in general; the graded start and the damping steps keep it so here), and the
// distribution function is non-decreasing in R.
func TestRangeAndMonotone(t *testing.T) {
	for _, c := range []struct {
		d    int
		T, R float64
	}{{1, 50, 66}, {3, 50, 70}, {5, 20, 30}, {2, 0.01, 0.2}} {
		p := radialProblem(c.d, 2, c.T, c.R, nodesTo(c.R, c.T), false)
		for l := 0; l <= 3; l++ {
			_, st := p.values(l)
			if st.minU < -1e-12 || st.maxU > 1+1e-12 {
				t.Errorf("%+v level %d: u left [0,1]: min %.3g max-1 %.3g", c, l, st.minU, st.maxU-1)
			}
		}
	}
	m := std(3)
	var radii []float64
	for r := 30.0; r <= 40; r += 0.5 {
		radii = append(radii, r)
	}
	vals, err := CDF(m, 25, radii, Options{Tolerance: 1e-5})
	if err != nil {
		t.Fatal(err)
	}
	for i := 1; i < len(vals); i++ {
		a, b := vals[i-1], vals[i]
		if b.P < a.P-a.Err-b.Err || b.P < 0 || b.P > 1 {
			t.Errorf("not monotone: P(%g)=%v, P(%g)=%v", a.Radius, a.P, b.Radius, b.P)
		}
	}
	if !(vals[0].P < 0.05 && vals[len(vals)-1].P > 0.95) {
		t.Errorf("range [30, 40] at T=25, d=3 should span the bulk: %v .. %v", vals[0].P, vals[len(vals)-1].P)
	}
}

// d = 1: {max |X| <= R} is contained in {max X <= R}, and its complement is at most the
// union of {max X > R} and {min X < -R}, which have equal probability (derived):
// 2 P(max X <= R) - 1 <= P(max |X| <= R) <= P(max X <= R).
func TestOneSidedVersusTwoSided(t *testing.T) {
	m := std(1)
	for _, T := range []float64{5, 30} {
		radii := []float64{0.9*math.Sqrt2*T - 1, math.Sqrt2*T - 1, math.Sqrt2 * T, math.Sqrt2*T + 1.5}
		two, err := CDF(m, T, radii, Options{Tolerance: 1e-6})
		if err != nil {
			t.Fatal(err)
		}
		one, err := CDF(m, T, radii, Options{Tolerance: 1e-6, OneSided: true})
		if err != nil {
			t.Fatal(err)
		}
		for i := range radii {
			e := one[i].Err + two[i].Err
			if two[i].P > one[i].P+e || two[i].P < 2*one[i].P-1-e {
				t.Errorf("T=%g R=%g: two-sided %.8f, one-sided %.8f", T, radii[i], two[i].P, one[i].P)
			}
			if two[i].P > 0.01 && !(two[i].P < one[i].P-10*e) {
				t.Errorf("T=%g R=%g: two-sided %.8f should be clearly below one-sided %.8f", T, radii[i], two[i].P, one[i].P)
			}
		}
	}
}

// The reaction step is the exact flow of u' = ((1-u) - (1-u)^k)/(k-1): check it against
// a classical fourth-order Runge-Kutta integration with small steps, and the flow property.
func TestReactionFlow(t *testing.T) {
	for _, k := range []int{2, 3, 6} {
		f := func(u float64) float64 { return ((1 - u) - math.Pow(1-u, float64(k))) / float64(k-1) }
		for _, u0 := range []float64{1e-200, 1e-9, 0.3, 0.97, 1 - 1e-12} {
			s := 1.7
			u := u0
			n := 20000
			dt := s / float64(n)
			for range n {
				k1 := f(u)
				k2 := f(u + dt/2*k1)
				k3 := f(u + dt/2*k2)
				k4 := f(u + dt*k3)
				u += dt / 6 * (k1 + 2*k2 + 2*k3 + k4)
			}
			got := newReaction(k, s).apply(u0)
			if math.Abs(got-u)/math.Max(u, 1e-300) > 1e-9 && math.Abs(got-u) > 1e-12 {
				t.Errorf("k=%d u0=%g: exact flow %.15g, RK4 %.15g", k, u0, got, u)
			}
			two := newReaction(k, 0.6).apply(newReaction(k, s-0.6).apply(u0))
			if math.Abs(two-got) > 1e-13*math.Max(got, 1e-300) && math.Abs(two-got) > 1e-15 {
				t.Errorf("k=%d u0=%g: flow property fails: %.17g vs %.17g", k, u0, two, got)
			}
		}
	}
}

// Leaving the region where u rounds to 1 out of the steps changes the answer only at
// round-off level.
func TestTrailingRegionRoundoff(t *testing.T) {
	for _, d := range []int{1, 3} {
		T := 150.0
		R := guess(d, T, 0.5, false)
		p := radialProblem(d, 2, T, R, nodesTo(R, T), false)
		a, sa := p.values(0)
		trim = false
		b, sb := p.values(0)
		trim = true
		if math.Abs(a[0]-b[0]) > 1e-13 {
			t.Errorf("d=%d: trimmed %.16f vs full %.16f", d, a[0], b[0])
		}
		if !(sa.nodeSteps < 0.9*sb.nodeSteps) {
			t.Errorf("d=%d: trimming saved nothing (%g vs %g node-steps)", d, sa.nodeSteps, sb.nodeSteps)
		}
	}
}

// The error estimate is honest: a result at tolerance 1e-4 is within its stated error of
// one at tolerance 1e-8 (derived from the solver itself at a much finer grid).
func TestErrorEstimateCovers(t *testing.T) {
	m := std(3)
	T := 20.0
	radii := []float64{24, 27, 29}
	coarse, err := CDF(m, T, radii, Options{Tolerance: 1e-4})
	if err != nil {
		t.Fatal(err)
	}
	fine, err := CDF(m, T, radii, Options{Tolerance: 1e-8})
	if err != nil {
		t.Fatal(err)
	}
	for i := range radii {
		if d := math.Abs(coarse[i].P - fine[i].P); d > coarse[i].Err || coarse[i].Err > 1e-4 || fine[i].Err > 1e-8 {
			t.Errorf("R=%g: coarse %.10f ± %.2e, fine %.10f ± %.2e", radii[i], coarse[i].P, coarse[i].Err, fine[i].P, fine[i].Err)
		}
	}
}

// Quantiles invert the distribution function, radial and one-sided.
func TestQuantileInverts(t *testing.T) {
	for _, c := range []struct {
		m        engine.Model
		T        float64
		oneSided bool
	}{{std(2), 15, false}, {std(1), 15, true}, {engine.Model{Dim: 3, Sigma: 2, Beta: 0.5, Children: 3}, 6, false}} {
		for _, q := range []float64{0.1, 0.5, 0.9} {
			opt := Options{Tolerance: 1e-6, OneSided: c.oneSided}
			r, e, err := Quantile(c.m, c.T, q, opt)
			if err != nil {
				t.Fatal(err)
			}
			v, err := CDF(c.m, c.T, []float64{r - e, r + e}, opt)
			if err != nil {
				t.Fatal(err)
			}
			if !(v[0].P <= q+v[0].Err && v[1].P >= q-v[1].Err) || e > 1e-4 {
				t.Errorf("%+v T=%g q=%g: radius %.8f ± %.2e has P %.8f .. %.8f", c.m, c.T, q, r, e, v[0].P, v[1].P)
			}
		}
	}
}

// The table reproduces the distribution function at its nodes, is monotone, and between
// nodes stays close to direct evaluation.
func TestCDFTable(t *testing.T) {
	for _, oneSided := range []bool{false, true} {
		m := std(1)
		T := 10.0
		tab, err := CDFTable(m, T, 8, 18, 41, Options{Tolerance: 1e-6, OneSided: oneSided})
		if err != nil {
			t.Fatal(err)
		}
		prev := -1.0
		for r := 7.0; r <= 19; r += 0.01 {
			p := tab.At(r)
			if p < prev || p < 0 || p > 1 {
				t.Fatalf("table not monotone at %g: %v after %v", r, p, prev)
			}
			prev = p
		}
		mid := []float64{9.13, 12.4, 15.77}
		vals, err := CDF(m, T, mid, Options{Tolerance: 1e-6, OneSided: oneSided})
		if err != nil {
			t.Fatal(err)
		}
		for _, v := range vals {
			// node spacing 0.25: the monotone cubic is accurate to ~1e-4 here (derived)
			if d := math.Abs(tab.At(v.Radius) - v.P); d > 1e-3 {
				t.Errorf("one-sided=%v: At(%g)=%.6f, direct %.6f", oneSided, v.Radius, tab.At(v.Radius), v.P)
			}
		}
	}
}

func TestBadInput(t *testing.T) {
	if _, err := CDF(std(0), 1, []float64{1}, Options{}); err == nil {
		t.Error("d = 0 accepted")
	}
	if _, err := CDF(std(2), -1, []float64{1}, Options{}); err == nil {
		t.Error("negative horizon accepted")
	}
	if _, err := CDF(std(2), 1, []float64{-1}, Options{}); err == nil {
		t.Error("negative radius accepted")
	}
	if _, _, err := Quantile(std(2), 1, 1, Options{}); err == nil {
		t.Error("quantile level 1 accepted")
	}
	if _, err := CDF(std(2), 1, []float64{1}, Options{OneSided: true}); err == nil {
		t.Error("one-sided in d = 2 accepted")
	}
	if _, err := CDF(std(2), 1, []float64{1}, Options{Tolerance: -1}); err == nil {
		t.Error("negative tolerance accepted")
	}
}
