package sweep

import (
	"fmt"
	"math"
	"slices"
	"strings"
	"unicode"
	"unicode/utf8"

	"bbmx/engine"
)

// model is the sweep's model in dimension d.
func (s *Sweep) model(d int) engine.Model {
	return engine.Model{Dim: d, Sigma: s.Sigma, Beta: s.Beta, Children: s.Children}
}

// normalize checks every setting, naming the key of the first bad one, and brings the
// sweep to canonical form: dims, horizons and checkpoints sorted, lambda 0 replaced by
// theta/2, overrides sorted by cell with those equal to the default dropped. Parse and
// Decode both end here, so a file and its canonical form are checked the same way.
func (s *Sweep) normalize() *fieldError {
	if len(s.Name) > MaxNameBytes {
		return errAt("name", "is %d bytes long; at most %d", len(s.Name), MaxNameBytes)
	}
	if !utf8.ValidString(s.Name) || strings.ContainsFunc(s.Name, unicode.IsControl) {
		return errAt("name", "must be one line of printable text, got %q", s.Name)
	}
	// The model, one parameter at a time so the error names its key.
	for _, f := range []struct {
		key string
		set func(*engine.Model)
	}{
		{"model.sigma", func(m *engine.Model) { m.Sigma = s.Sigma }},
		{"model.beta", func(m *engine.Model) { m.Beta = s.Beta }},
		{"model.children", func(m *engine.Model) { m.Children = s.Children }},
	} {
		m := engine.DefaultModel()
		f.set(&m)
		if err := m.Validate(); err != nil {
			return errAt(f.key, "%v", err)
		}
	}
	if fe := s.checkGrid(); fe != nil {
		return fe
	}
	if !(s.TaskSeconds >= MinTaskSeconds && s.TaskSeconds <= MaxTaskSeconds) {
		return errAt("task_seconds", "the target wall time of one task must be between %d and %d seconds, got %v", MinTaskSeconds, MaxTaskSeconds, s.TaskSeconds)
	}
	if s.SplitAt == 0 {
		s.SplitAt = 0 // -0 becomes 0
	}
	if !(s.SplitAt >= 0 && s.SplitAt < s.Horizons[0]) {
		return errAt("split_at", "the split time must be in [0, %v) (0: automatic; it must be below the shortest horizon), got %v", s.Horizons[0], s.SplitAt)
	}
	if fe := s.checkObserve(); fe != nil {
		return fe
	}
	if fe := s.checkOverrides(); fe != nil {
		return fe
	}
	for _, c := range s.Cells() {
		if err := c.Cell.Validate(); err != nil {
			return errAt("grid", "cell %s: %v", c.ID, err)
		}
	}
	return nil
}

func (s *Sweep) checkGrid() *fieldError {
	if len(s.Dims) == 0 {
		return errAt("grid.dims", "must list at least one dimension")
	}
	if len(s.Horizons) == 0 {
		return errAt("grid.horizons", "must list at least one horizon")
	}
	for i, d := range s.Dims {
		if err := s.model(d).Validate(); err != nil {
			return errAt(indexKey("grid.dims", i), "%v", err)
		}
		if j := slices.Index(s.Dims, d); j < i {
			return errAt(indexKey("grid.dims", i), "dimension %d is listed twice", d)
		}
	}
	for i, t := range s.Horizons {
		c := engine.Cell{Model: s.model(2), Horizon: t, Observe: engine.DefaultObserve()}
		if err := c.Validate(); err != nil {
			return errAt(indexKey("grid.horizons", i), "%v", err)
		}
		if j := slices.Index(s.Horizons, t); j < i {
			return errAt(indexKey("grid.horizons", i), "horizon %v is listed twice", t)
		}
	}
	if n := len(s.Dims) * len(s.Horizons); n > MaxCells {
		return errAt("grid", "%d dims × %d horizons = %d cells; a sweep has at most %d", len(s.Dims), len(s.Horizons), n, MaxCells)
	}
	if s.Replicates < 1 || s.Replicates > MaxReplicates {
		return errAt("grid.replicates", "replicates must be between 1 and %d, got %d", MaxReplicates, s.Replicates)
	}
	slices.Sort(s.Dims)
	slices.Sort(s.Horizons)
	return nil
}

func (s *Sweep) checkObserve() *fieldError {
	o := &s.Observe
	base := engine.Cell{Model: s.model(2), Horizon: 1, Observe: engine.DefaultObserve()}
	check := func(key string, set func(*engine.Observe)) *fieldError {
		c := base
		set(&c.Observe)
		if err := c.Validate(); err != nil {
			return errAt(key, "%v", err)
		}
		return nil
	}
	if fe := check("observe.top_k", func(b *engine.Observe) { b.TopK = o.TopK }); fe != nil {
		return fe
	}
	// The window alone (two bins), the bin width alone (with the default window), then
	// both (the number of bins), blamed on the bin width only if it is not the default:
	// a window too wide for the default bin is the window's fault.
	if fe := check("observe.window", func(b *engine.Observe) { b.Window, b.BinWidth = o.Window, o.Window }); fe != nil {
		return fe
	}
	if fe := check("observe.bin_width", func(b *engine.Observe) { b.BinWidth = o.BinWidth }); fe != nil {
		return fe
	}
	both := "observe.bin_width"
	if o.BinWidth == engine.DefaultObserve().BinWidth {
		both = "observe.window"
	}
	if fe := check(both, func(b *engine.Observe) { b.Window, b.BinWidth = o.Window, o.BinWidth }); fe != nil {
		return fe
	}
	if fe := check("observe.directions", func(b *engine.Observe) { b.Directions = o.Directions }); fe != nil {
		return fe
	}
	if fe := check("observe.lambda", func(b *engine.Observe) { b.Lambda = o.Lambda }); fe != nil {
		return fe
	}
	if o.Lambda == 0 {
		o.Lambda = s.model(1).Theta() / 2
	}
	if len(o.Checkpoints) > engine.MaxCheckpoints {
		return errAt("observe.checkpoints", "at most %d checkpoints, got %d", engine.MaxCheckpoints, len(o.Checkpoints))
	}
	for i, t := range o.Checkpoints {
		if !(t > 0) || math.IsInf(t, 0) {
			return errAt(indexKey("observe.checkpoints", i), "a checkpoint must be a positive finite time, got %v", t)
		}
		if j := slices.Index(o.Checkpoints, t); j < i {
			return errAt(indexKey("observe.checkpoints", i), "checkpoint %v is listed twice", t)
		}
	}
	if o.Checkpoints == nil {
		o.Checkpoints = []float64{}
	}
	slices.Sort(o.Checkpoints)
	return nil
}

// CellID is a cell's identity in a store, for sweeps and `bbmx sim --store` alike.
func CellID(dim int, horizon float64) string { return fmt.Sprintf("d%d-T%g", dim, horizon) }

func (s *Sweep) checkOverrides() *fieldError {
	seen := map[string]bool{}
	kept := []Override{}
	for i, o := range s.Overrides {
		p := indexKey("grid.override", i)
		id := CellID(o.Dim, o.Horizon)
		if !slices.Contains(s.Dims, o.Dim) {
			return errAt(joinKey(p, "dim"), "names cell %s, but dimension %d is not in grid.dims %v", id, o.Dim, s.Dims)
		}
		if !slices.Contains(s.Horizons, o.Horizon) {
			return errAt(joinKey(p, "horizon"), "names cell %s, but horizon %v is not in grid.horizons %v", id, o.Horizon, s.Horizons)
		}
		if seen[id] {
			return errAt(p, "cell %s is overridden twice", id)
		}
		seen[id] = true
		if o.Replicates < 1 || o.Replicates > MaxReplicates {
			return errAt(joinKey(p, "replicates"), "replicates must be between 1 and %d, got %d", MaxReplicates, o.Replicates)
		}
		if o.Replicates != s.Replicates {
			kept = append(kept, o)
		}
	}
	slices.SortFunc(kept, func(a, b Override) int {
		if a.Dim != b.Dim {
			return a.Dim - b.Dim
		}
		if a.Horizon < b.Horizon {
			return -1
		}
		if a.Horizon > b.Horizon {
			return 1
		}
		return 0
	})
	s.Overrides = kept
	return nil
}

// replicates is the replicate count of cell (d, T).
func (s *Sweep) replicates(d int, t float64) uint64 {
	for _, o := range s.Overrides {
		if o.Dim == d && o.Horizon == t {
			return o.Replicates
		}
	}
	return s.Replicates
}

// Cells returns the cells of the grid, dims outer and horizons inner. Each cell has the
// sweep's model in its dimension, its horizon, and the observation settings with only
// the checkpoints at or before its horizon, with engine defaults applied.
func (s *Sweep) Cells() []CellSpec {
	out := make([]CellSpec, 0, len(s.Dims)*len(s.Horizons))
	for _, d := range s.Dims {
		for _, t := range s.Horizons {
			o := s.Observe
			o.Checkpoints = nil
			for _, c := range s.Observe.Checkpoints {
				if c <= t {
					o.Checkpoints = append(o.Checkpoints, c)
				}
			}
			cell := engine.Cell{Model: s.model(d), Horizon: t, Observe: o}.WithDefaults()
			out = append(out, CellSpec{ID: CellID(d, t), Cell: cell, Replicates: s.replicates(d, t)})
		}
	}
	return out
}
