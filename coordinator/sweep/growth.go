package sweep

import (
	"fmt"
	"slices"
)

// CheckGrowth reports whether s may continue a store made by old. It may when it is the
// same experiment, grown: seed, model (sigma, beta, children), every observation setting
// and keep_records are equal; every cell of old is still in the grid (dims and horizons
// may be added, not removed) with at least as many replicates. Name, task_seconds and
// split_at may change: they do not change any replicate's result. The error names the
// first difference and says why it matters.
func (s *Sweep) CheckGrowth(old *Sweep) error {
	if s.Seed != old.Seed {
		return fmt.Errorf("the store was made with seed %d; this sweep has seed %d: a different seed is a different sweep", old.Seed, s.Seed)
	}
	for _, f := range []struct {
		key      string
		old, new float64
	}{
		{"model.sigma", old.Sigma, s.Sigma},
		{"model.beta", old.Beta, s.Beta},
		{"model.children", float64(old.Children), float64(s.Children)},
	} {
		if f.old != f.new {
			return fmt.Errorf("the store was made with %s = %v; this sweep has %v: a changed model is a different experiment (start a new store)", f.key, f.old, f.new)
		}
	}
	o, n := old.Observe, s.Observe
	for _, f := range []struct {
		key      string
		old, new any
		same     bool
	}{
		{"observe.top_k", o.TopK, n.TopK, o.TopK == n.TopK},
		{"observe.window", o.Window, n.Window, o.Window == n.Window},
		{"observe.bin_width", o.BinWidth, n.BinWidth, o.BinWidth == n.BinWidth},
		{"observe.checkpoints", o.Checkpoints, n.Checkpoints, slices.Equal(o.Checkpoints, n.Checkpoints)},
		{"observe.directions", o.Directions, n.Directions, o.Directions == n.Directions},
		{"observe.lambda", o.Lambda, n.Lambda, o.Lambda == n.Lambda},
	} {
		if !f.same {
			return fmt.Errorf("the store records %s = %v; this sweep has %v: the observables' settings must stay the same for records to be pooled", f.key, f.old, f.new)
		}
	}
	if old.KeepRecords != s.KeepRecords {
		return fmt.Errorf("the store was made with keep_records = %v; this sweep has %v: a store either keeps every replicate's record or none", old.KeepRecords, s.KeepRecords)
	}
	for _, d := range old.Dims {
		if !slices.Contains(s.Dims, d) {
			return fmt.Errorf("the store's sweep has dimension %d, which this sweep drops: a sweep may add dims and horizons, not remove them", d)
		}
	}
	for _, t := range old.Horizons {
		if !slices.Contains(s.Horizons, t) {
			return fmt.Errorf("the store's sweep has horizon %v, which this sweep drops: a sweep may add dims and horizons, not remove them", t)
		}
	}
	for _, c := range old.Cells() {
		d, t := c.Cell.Model.Dim, c.Cell.Horizon
		if r := s.replicates(d, t); r < c.Replicates {
			return fmt.Errorf("cell %s has %d replicates in the store's sweep but %d here: replicate counts may grow, not shrink", c.ID, c.Replicates, r)
		}
	}
	return nil
}
