package report

import (
	"fmt"
	"slices"
	"sort"

	"bbmx/engine"
	"bbmx/results"
)

// replicate is the part of one stored record the fits use, kept compact so that large
// cells fit in memory.
type replicate struct {
	x      float64     // R*_T - m_T
	dir    []float64   // direction of the farthest particle
	z      []float64   // Z_s per checkpoint
	zdir   [][]float64 // Z_s(u) on the direction grid per checkpoint (d = 2 only)
	window float64     // particles with R - m_T in [-W, W)
	above  float64     // particles with R - m_T >= 0 (overflow bin included)
}

// cellData is one cell of the store with what was read of it.
type cellData struct {
	id    string
	cell  engine.Cell
	sk    *results.Sketch
	reps  []replicate // empty when the store keeps no records
	label string      // "d=2 T=4"
	tag   string      // file-name form "d2-T4"
	// partial is the number of records found when they did not cover every replicate
	// (they are then ignored).
	partial int
	// median of R*_T - m_T and its standard error, set by builder.cell (NaN if it could
	// not be estimated) for the centring fit
	median, medianSE float64
	// top sums up the replicates' top-K radii for the extremal-process tables as they
	// are read, so the radii (K floats a replicate) are not kept
	top topSums
}

// withinGrid is the number of x values, 0, 0.1, ..., 4, at which the mean number of
// particles within x of the maximum is tabulated.
const withinGrid = 41

// topSums accumulates what the extremal-process tables need from each replicate's
// kept radii R_(1) >= R_(2) >= ...: per k, the gaps R_(k) - R_(k+1) (count, mean and
// sum of squared deviations, updated as in Welford, "Note on a method for calculating
// corrected sums of squares and products", Technometrics, 1962), and per x on the grid,
// how many replicates have each number 0..K of radii within x of their maximum.
type topSums struct {
	gapN          []int
	gapMean, gapM []float64
	within        [withinGrid][]uint64
}

// add takes one replicate's kept radii, largest first.
func (t *topSums) add(top []float64, K int) {
	if t.gapN == nil {
		t.gapN, t.gapMean, t.gapM = make([]int, K), make([]float64, K), make([]float64, K)
		for i := range t.within {
			t.within[i] = make([]uint64, K+1)
		}
	}
	for k := 1; k < len(top) && k < K; k++ {
		g := top[k-1] - top[k]
		t.gapN[k]++
		d := g - t.gapMean[k]
		t.gapMean[k] += d / float64(t.gapN[k])
		t.gapM[k] += d * (g - t.gapMean[k])
	}
	for i := range t.within {
		x := 0.1 * float64(i)
		k := 0
		for k < len(top) && top[k] >= top[0]-x {
			k++
		}
		t.within[i][min(k, K)]++
	}
}

// loadCells reads every cell with at least one replicate, sorted by model, then horizon.
func loadCells(st *results.Store, opt Options) ([]*cellData, error) {
	ids, err := st.Cells()
	if err != nil {
		return nil, fmt.Errorf("report: %w", err)
	}
	var out []*cellData
	for _, id := range ids {
		c, sk, err := st.CellSketch(id)
		if err != nil {
			return nil, fmt.Errorf("report: %w", err)
		}
		if sk.N == 0 {
			continue
		}
		c = c.WithDefaults()
		cd := &cellData{id: id, cell: c, sk: sk}
		opt.logf("reading cell %s", id)
		zero := zeroBin(c)
		centre := c.Model.Centring(c.Horizon)
		var top []float64
		err = st.Records(id, func(_ uint64, r engine.Record) error {
			// dir is copied: it shares its backing array with every top radius's direction.
			rp := replicate{x: r.MaxRadius() - centre, dir: slices.Clone(r.Top[0].Dir)}
			top = top[:0]
			for _, p := range r.Top {
				top = append(top, p.Radius)
			}
			cd.top.add(top, c.Observe.TopK)
			for _, cs := range r.Checks {
				rp.z = append(rp.z, cs.Z)
				if c.Model.Dim == 2 {
					rp.zdir = append(rp.zdir, cs.ZDir)
				}
			}
			for j, v := range r.Hist {
				if j < len(r.Hist)-1 {
					rp.window += float64(v)
				}
				if j >= zero {
					rp.above += float64(v)
				}
			}
			cd.reps = append(cd.reps, rp)
			return nil
		})
		if err != nil {
			return nil, fmt.Errorf("report: %w", err)
		}
		if n := len(cd.reps); n > 0 && uint64(n) != sk.N {
			// Records kept by some tasks only: fits on them would describe a subset, so
			// the cell is treated as one without records.
			opt.logf("  cell %s: records for %d of %d replicates; using the sketch only", id, n, sk.N)
			cd.reps, cd.partial, cd.top = nil, n, topSums{}
		}
		out = append(out, cd)
	}
	labelCells(out)
	sort.SliceStable(out, func(i, j int) bool {
		a, b := out[i].cell, out[j].cell
		if ka, kb := modelKey(a.Model), modelKey(b.Model); ka != kb {
			return ka < kb
		}
		return a.Horizon < b.Horizon
	})
	return out, nil
}

// zeroBin is the index of the first intensity bin whose left edge is >= 0.
func zeroBin(c engine.Cell) int {
	o := c.Observe
	for j := 0; j < c.Bins(); j++ {
		if -o.Window+float64(j)*o.BinWidth >= -1e-9*o.BinWidth {
			return j
		}
	}
	return c.Bins() - 1
}

// modelKey orders and groups models; the standard model shows only its dimension.
func modelKey(m engine.Model) string {
	return fmt.Sprintf("%03d/%g/%g/%d", m.Dim, m.Sigma, m.Beta, m.Children)
}

func modelLabel(m engine.Model) string {
	s := fmt.Sprintf("d=%d", m.Dim)
	if m.Sigma != 1 || m.Beta != 1 || m.Children != 2 {
		s += fmt.Sprintf(" sigma=%g beta=%g k=%d", m.Sigma, m.Beta, m.Children)
	}
	return s
}

func modelTag(m engine.Model) string {
	s := fmt.Sprintf("d%d", m.Dim)
	if m.Sigma != 1 || m.Beta != 1 || m.Children != 2 {
		s += fmt.Sprintf("-s%g-b%g-k%d", m.Sigma, m.Beta, m.Children)
	}
	return s
}

// labelCells names the cells; cells that share model and horizon (different observation
// settings) get their store id appended so that names stay unique.
func labelCells(cs []*cellData) {
	seen := map[string]int{}
	for _, c := range cs {
		c.label = fmt.Sprintf("%s T=%g", modelLabel(c.cell.Model), c.cell.Horizon)
		c.tag = fmt.Sprintf("%s-T%g", modelTag(c.cell.Model), c.cell.Horizon)
		seen[c.tag]++
	}
	for _, c := range cs {
		if seen[c.tag] > 1 {
			c.label += " [" + c.id + "]"
			c.tag += "-" + safeName(c.id)
		}
	}
}

func safeName(s string) string {
	b := []byte(s)
	for i, ch := range b {
		ok := ch >= 'a' && ch <= 'z' || ch >= 'A' && ch <= 'Z' || ch >= '0' && ch <= '9' || ch == '-' || ch == '.'
		if !ok {
			b[i] = '_'
		}
	}
	return string(b)
}

// shifts returns R*_T - m_T per replicate.
func (c *cellData) shifts() []float64 {
	xs := make([]float64, len(c.reps))
	for i, r := range c.reps {
		xs[i] = r.x
	}
	return xs
}
