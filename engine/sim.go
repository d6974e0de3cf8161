package engine

import (
	"fmt"
	"math"

	"bbmx/engine/exactsum"
)

// walker holds the state of one depth-first walk. It is reused across replicates by one
// goroutine; nothing in it is shared.
type walker struct {
	c       Cell
	d       int
	sigma   float64
	beta    float64
	k       int
	horizon float64
	centre  float64 // m_T
	hist0   float64 // -Window: left edge of the histogram
	invBin  float64
	nBins   int
	checks  []float64
	dirs    []float64 // flat grid of unit vectors
	nDirs   int
	// per-checkpoint constants
	theta, v, lambda float64
	zScale, wScale   []float64 // e^{-2 g s} and e^{-(g + lambda^2 sigma^2/2) s} in log form
	rng              nodeRand
	levels           [][]float64 // position buffers, one per tree depth
	part             *Part
	// split bookkeeping
	splitAt   float64
	from, to  uint64
	rootIndex uint64 // depth-first index of the next particle alive at splitAt
	prefix    bool   // whether this part takes contributions of nodes dead before splitAt
	nodes     uint64 // nodes visited (for cost accounting)
}

func newWalker(c Cell) *walker {
	c = c.WithDefaults()
	m := c.Model
	w := &walker{
		c: c, d: m.Dim, sigma: m.Sigma, beta: m.Beta, k: m.Children, horizon: c.Horizon,
		centre: m.Centring(c.Horizon), hist0: -c.Observe.Window, invBin: 1 / c.Observe.BinWidth,
		nBins: c.Bins(), checks: c.Observe.Checkpoints, nDirs: c.NumDirections(),
		theta: m.Theta(), v: m.Speed(), lambda: c.Observe.Lambda, rng: newNodeRand(),
	}
	w.dirs = DirectionGrid(m.Dim, w.nDirs)
	g := m.Growth()
	for _, s := range w.checks {
		w.zScale = append(w.zScale, -2*g*s)
		w.wScale = append(w.wScale, -(g+w.lambda*w.lambda*m.Sigma*m.Sigma/2)*s)
	}
	return w
}

func (w *walker) level(depth int) []float64 {
	for len(w.levels) <= depth {
		w.levels = append(w.levels, make([]float64, w.d))
	}
	return w.levels[depth]
}

// SimulatePart computes the part of replicate rep made of the subtrees rooted at the
// particles alive at time splitAt with depth-first index in [from, to). splitAt = 0,
// from = 0, to = 1 is the whole replicate. The cell must be valid (see Cell.Validate).
func SimulatePart(c Cell, seed, rep uint64, splitAt float64, from, to uint64) (*Part, error) {
	c = c.WithDefaults()
	if err := c.Validate(); err != nil {
		return nil, err
	}
	if !(splitAt >= 0) || splitAt >= c.Horizon {
		return nil, fmt.Errorf("split time %v is outside [0, horizon %v)", splitAt, c.Horizon)
	}
	if from >= to {
		return nil, fmt.Errorf("empty subtree range [%d,%d)", from, to)
	}
	w := newWalker(c)
	return w.run(seed, rep, splitAt, from, to)
}

// Simulate computes the record of replicate rep of cell c with the given sweep seed.
func Simulate(c Cell, seed, rep uint64) (Record, error) {
	c = c.WithDefaults()
	p, err := SimulatePart(c, seed, rep, 0, 0, 1)
	if err != nil {
		return Record{}, err
	}
	return p.Record(c)
}

// CountRoots returns the number of particles alive at splitAt in replicate rep: the
// number of subtrees a split at that time cuts the replicate into.
func CountRoots(c Cell, seed, rep uint64, splitAt float64) (uint64, error) {
	c = c.WithDefaults()
	if err := c.Validate(); err != nil {
		return 0, err
	}
	if !(splitAt >= 0) || splitAt >= c.Horizon {
		return 0, fmt.Errorf("split time %v is outside [0, horizon %v)", splitAt, c.Horizon)
	}
	w := newWalker(c)
	w.splitAt = splitAt
	w.from, w.to = 0, 0 // count only: no subtree is walked
	w.prefix = false
	w.top(rootKey(seed, c.Key(), rep), 0, w.level(0), 0)
	return w.rootIndex, nil
}

func (w *walker) newPart(rep uint64, splitAt float64, from, to uint64) *Part {
	p := &Part{Replicate: rep, SplitAt: splitAt, From: from, To: to, top: topK{k: w.c.Observe.TopK},
		hist: make([]uint64, w.nBins), checks: make([]partCheck, len(w.checks))}
	for i := range p.checks {
		p.checks[i].zdir = make([]exactsum.Acc, w.nDirs)
	}
	return p
}

func (w *walker) run(seed, rep uint64, splitAt float64, from, to uint64) (*Part, error) {
	w.part = w.newPart(rep, splitAt, from, to)
	w.splitAt, w.from, w.to, w.rootIndex, w.prefix = splitAt, from, to, 0, from == 0
	root := rootKey(seed, w.c.Key(), rep)
	origin := w.level(0)
	clear(origin)
	if splitAt == 0 {
		w.rootIndex = 1
		w.node(root, 0, origin, 0)
	} else {
		w.top(root, 0, origin, 0)
	}
	w.part.Roots = w.rootIndex
	if to > w.rootIndex {
		return nil, fmt.Errorf("replicate %d has %d particles alive at %v, fewer than the range end %d", rep, w.rootIndex, splitAt, to)
	}
	return w.part, nil
}

// top walks the tree above splitAt. Nodes that die before splitAt contribute (to the
// prefix part only) their checkpoint crossings; nodes alive at splitAt are numbered in
// depth-first order and those in [from, to) are walked in full.
func (w *walker) top(k key, birth float64, pos []float64, depth int) {
	w.rng.seed(k)
	death := birth + w.rng.ExpFloat64()/w.beta
	if death > w.splitAt {
		i := w.rootIndex
		w.rootIndex++
		if i >= w.from && i < w.to {
			w.node(k, birth, pos, depth)
		}
		return
	}
	end := w.level(depth + 1)
	copy(end, pos)
	w.advance(birth, death, end, w.prefix)
	for i := 0; i < w.k; i++ {
		w.top(k.child(i), death, end, depth+1)
	}
}

// node walks the full subtree of the node with key k, born at birth at position pos.
func (w *walker) node(k key, birth float64, pos []float64, depth int) {
	w.nodes++
	w.rng.seed(k)
	death := birth + w.rng.ExpFloat64()/w.beta
	end := w.level(depth + 1)
	copy(end, pos)
	if death > w.horizon {
		w.advance(birth, w.horizon, end, true)
		w.leaf(end)
		return
	}
	w.advance(birth, death, end, true)
	for i := 0; i < w.k; i++ {
		w.node(k.child(i), death, end, depth+1)
	}
}

// advance moves the particle at pos (born at birth) to time until, drawing its Brownian
// increment exactly and cutting it at every checkpoint s with birth <= s < until (and at
// s = until = horizon). Checkpoint contributions are recorded if record is set; the
// normals are drawn either way so the walk's randomness never depends on the split.
func (w *walker) advance(birth, until float64, pos []float64, record bool) {
	t := birth
	for ci, s := range w.checks {
		if s < birth {
			continue
		}
		if s > until || (s == until && until < w.horizon) {
			break
		}
		w.move(pos, s-t)
		t = s
		if record {
			w.checkpoint(ci, pos)
		}
	}
	w.move(pos, until-t)
}

// move adds an exact N(0, sigma^2 dt I_d) increment to pos.
func (w *walker) move(pos []float64, dt float64) {
	if dt <= 0 {
		return
	}
	sd := w.sigma * math.Sqrt(dt)
	for i := range pos {
		pos[i] += sd * w.rng.NormFloat64()
	}
}

// checkpoint adds one particle at position x to checkpoint ci's sums:
// Z_s(u) = sum (v s - <X,u>) exp(theta <X,u> - 2 g s), its sphere average in closed form
// via Phi_d, and W_s(lambda) = sum Phi_d(lambda |X|) exp(-(g + lambda^2 sigma^2/2) s).
func (w *walker) checkpoint(ci int, x []float64) {
	pc := &w.part.checks[ci]
	pc.n++
	s := w.checks[ci]
	var rr float64
	for _, xi := range x {
		rr += xi * xi
	}
	rho := math.Sqrt(rr)
	tr := w.theta * rho
	d := float64(w.d)
	// Sphere averages: avg exp(theta<X,u>) = Phi_d(theta rho),
	// avg <X,u> exp(theta<X,u>) = rho (theta rho / d) Phi_{d+2}(theta rho).
	e := math.Exp(tr + w.zScale[ci])
	pc.z.Add(e * (w.v*s*PhiScaled(w.d, tr) - rho*(tr/d)*PhiScaled(w.d+2, tr)))
	lr := w.lambda * rho
	pc.w.Add(math.Exp(lr+w.wScale[ci]) * PhiScaled(w.d, lr))
	vs := w.v * s
	for j := 0; j < w.nDirs; j++ {
		u := w.dirs[j*w.d : (j+1)*w.d]
		var p float64
		for i, xi := range x {
			p += xi * u[i]
		}
		pc.zdir[j].Add((vs - p) * math.Exp(w.theta*p+w.zScale[ci]))
	}
}

// leaf records a particle alive at the horizon at position x.
func (w *walker) leaf(x []float64) {
	p := w.part
	p.pop++
	var rr float64
	for _, xi := range x {
		rr += xi * xi
	}
	r := math.Sqrt(rr)
	if p.top.worthy(r) {
		p.top.offer(r, x)
	}
	b := (r - w.centre - w.hist0) * w.invBin
	if b >= 0 {
		i := int(b)
		if b >= float64(w.nBins-1) {
			i = w.nBins - 1
		}
		p.hist[i]++
	}
}
