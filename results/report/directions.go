package report

import (
	"fmt"
	"math"

	"bbmx/results/fit"
)

// directions tests the farthest particle's direction for uniformity (exact at every T
// by the rotation invariance of the model) and, for d = 2, the probability-integral
// transform of its angle under the measure proportional to Z_s(u)^+ du (uniform in the
// limit of large s and T).
func (b *builder) directions(c *cellData) error {
	g := c.label
	if len(c.reps) == 0 {
		b.skip(g, "direction tests", "need the records (keep_records = false)")
		return nil
	}
	d := c.cell.Model.Dim
	n := len(c.reps)
	if d == 1 {
		plus := 0
		for _, r := range c.reps {
			if r.dir[0] > 0 {
				plus++
			}
		}
		st, err := fit.SignTest(plus, n)
		if err != nil {
			return fmt.Errorf("report: %s: %w", g, err)
		}
		lo, hi := wilson(plus, n, b.opt.z())
		b.row(Row{Group: g, Quantity: "share of farthest particles on the + side", Theory: "1/2 (symmetry)", Value: 0.5,
			Kind: KindExact, Estimate: float64(plus) / float64(n), Lo: lo, Hi: hi, P: st.P, N: n,
			Method: "exact binomial sign test; Wilson interval"})
		return nil
	}
	dirs := make([][]float64, n)
	for i, r := range c.reps {
		dirs[i] = r.dir
	}
	ray, err := fit.Rayleigh(dirs)
	if err != nil {
		return fmt.Errorf("report: %s: %w", g, err)
	}
	b.row(Row{Group: g, Quantity: "mean resultant length of the farthest direction", Theory: "uniform on the sphere", Value: nan,
		Kind: KindExact, Estimate: ray.MeanLength, Lo: nan, Hi: nan, P: ray.P, N: n, Method: "Rayleigh test"})
	if d != 2 {
		return b.plotDirections(c, nil)
	}
	angles, err := fit.Angles(dirs)
	if err != nil {
		return fmt.Errorf("report: %s: %w", g, err)
	}
	ks, err := fit.KSUniform(angles, 0, 2*math.Pi)
	if err != nil {
		return fmt.Errorf("report: %s: %w", g, err)
	}
	b.row(Row{Group: g, Quantity: "KS distance of the farthest angle to uniform", Theory: "uniform on [0, 2pi)", Value: nan,
		Kind: KindExact, Estimate: ks.D, Lo: nan, Hi: nan, P: ks.P, N: n, Method: "one-sample KS"})
	if err := b.plotDirections(c, angles); err != nil {
		return err
	}
	for j, cs := range c.sk.Checks {
		gs := fmt.Sprintf("%s s=%g", c.label, cs.Time)
		var pit []float64
		for i, r := range c.reps {
			if v, ok := anglePIT(r.zdir[j], angles[i]); ok {
				pit = append(pit, v)
			}
		}
		if len(pit) < 10 {
			b.skip(gs, "PIT of the farthest angle", fmt.Sprintf("only %d replicates have Z_s(u) > 0 somewhere", len(pit)))
			continue
		}
		ks, err := fit.KSUniform(pit, 0, 1)
		if err != nil {
			return fmt.Errorf("report: %s: %w", gs, err)
		}
		b.row(Row{Group: gs, Quantity: "KS distance of the angle's PIT under Z_s(u)+ du to uniform", Theory: "uniform on [0, 1]",
			Value: nan, Kind: KindLimit, Estimate: ks.D, Lo: nan, Hi: nan, P: ks.P, N: len(pit),
			Method: "one-sample KS; Z_s(u) linear between grid angles, negative parts set to 0"})
		if err := b.plotPIT(c, cs.Time, pit); err != nil {
			return err
		}
	}
	return nil
}

// anglePIT returns the probability-integral transform of angle a in [0, 2pi) under the
// density on the circle proportional to the piecewise-linear interpolant of max(f, 0),
// f given at the equally spaced angles 2 pi j / n. ok is false when the mass is zero.
func anglePIT(f []float64, a float64) (float64, bool) {
	n := len(f)
	if n == 0 {
		return 0, false
	}
	h := 2 * math.Pi / float64(n)
	pos := func(j int) float64 { return math.Max(f[j%n], 0) }
	var total, below float64
	k := min(int(a/h), n-1)
	for j := 0; j < n; j++ {
		seg := h * (pos(j) + pos(j+1)) / 2
		total += seg
		if j < k {
			below += seg
		}
	}
	if !(total > 0) {
		return 0, false
	}
	t := a - float64(k)*h
	below += pos(k)*t + (pos(k+1)-pos(k))*t*t/(2*h)
	return math.Min(math.Max(below/total, 0), 1), true
}
