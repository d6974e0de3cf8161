package engine

import (
	"context"
	"errors"
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
	cellKey uint64 // c.Key(), a hash, taken once rather than per replicate
	bins    histBins
	nBins   int
	checks  []float64
	dirs    []float64 // flat grid of unit vectors
	nDirs   int
	// per-checkpoint constants
	theta, v, lambda float64
	zScale, wScale   []float64 // e^{-2 g s} and e^{-(g + lambda^2 sigma^2/2) s} in log form
	// the current node's draws (see normalWord): its key, the number of normals drawn
	// so far, and the generator of the ziggurat's rejection steps
	cur    key
	nNorm  uint64
	rng    nodeRand
	levels [][]float64 // position buffers, one per tree depth
	// general makes subtree use node in every dimension (for tests of wave3)
	general bool
	// noKernel makes wave3 use its Go loop where it would use waveKernel (for tests)
	noKernel bool
	part     *Part
	// split bookkeeping
	splitAt   float64
	from, to  uint64
	rootIndex uint64 // depth-first index of the next particle alive at splitAt
	prefix    bool   // whether this part takes contributions of nodes dead before splitAt
	// hist is the part's histogram with an underflow slot in front (hist[1:] is the
	// part's) (slots from bins.slot); topFloor is the smallest kept top-K radius once K
	// are kept (-Inf before): the least radius worth offering
	hist     []uint64
	topFloor float64
	// leftEdge is the radius at the histogram's left edge, centre + hist0, or 0 where
	// leaves3 must not use it (see newWalker)
	leftEdge float64
	// invBeta = 1/beta, used instead of dividing when that gives the same bits (beta a
	// power of two, so 1/beta is exact)
	invBeta      float64
	invBetaExact bool
	// done, when closed, stops the walk (see pollLeaves); aborted says it was stopped
	done    <-chan struct{}
	aborted bool
	// lastCheck: the last checkpoint time (-1 if none); a node born after it has no
	// checkpoint to cut its path at
	lastCheck float64
	// the fast paths' ziggurat strips (see scaledStrips): the exponential's with widths
	// times 1/beta if foldRate, else zigE; the normal's with widths times sigma if
	// foldSigma, else zigN
	expTab              *[256]zigStrip
	normTab             *[128]zigStrip
	foldRate, foldSigma bool
	// slowList is the list of children waveKernel leaves to step (see step)
	slowList [2 * waveBatch]uint32
	// stack and leafBuf are wave3's pending broods and a batch's leaves, kept between
	// walks
	stack     []brood
	leafBuf   []vec
	leafLists leafLists
}

func newWalker(c Cell) *walker {
	c = c.WithDefaults()
	m := c.Model
	w := &walker{
		c: c, d: m.Dim, sigma: m.Sigma, beta: m.Beta, k: m.Children, horizon: c.Horizon,
		bins:  histBins{centre: m.Centring(c.Horizon), hist0: -c.Observe.Window, invBin: 1 / c.Observe.BinWidth},
		nBins: c.Bins(), checks: c.Observe.Checkpoints, nDirs: c.NumDirections(),
		theta: m.Theta(), v: m.Speed(), lambda: c.Observe.Lambda,
	}
	w.dirs = DirectionGrid(m.Dim, w.nDirs)
	w.cellKey = c.Key()
	w.lastCheck = -1
	if n := len(w.checks); n > 0 {
		w.lastCheck = w.checks[n-1]
	}
	if frac, _ := math.Frexp(m.Beta); frac == 0.5 {
		w.invBeta, w.invBetaExact = 1/m.Beta, true
	}
	e, n := zigE, zigN
	w.foldRate, w.foldSigma = scaledStrips(e[:], 1/m.Beta), scaledStrips(n[:], m.Sigma)
	w.expTab, w.normTab = &e, &n
	w.bins.lastBin = float64(w.nBins - 1)
	// The histogram's left edge as a radius, where leaves3 may leave radii below it
	// uncounted: not where the edge is so small against the centre that the rounding
	// of r - centre could move a radius across it (the bound is taken 2^-30 of itself
	// lower), nor where it is not positive.
	if e := w.bins.centre + w.bins.hist0; e > w.bins.centre*0x1p-20 {
		w.leftEdge = e
	}
	g := m.Growth()
	for _, s := range w.checks {
		w.zScale = append(w.zScale, -2*g*s)
		w.wScale = append(w.wScale, -(g+float64(w.lambda*w.lambda*m.Sigma*m.Sigma/2))*s)
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
	return SimulatePartContext(context.Background(), c, seed, rep, splitAt, from, to)
}

// SimulatePartContext is SimulatePart that stops soon after ctx is cancelled (within
// pollLeaves leaves, milliseconds), returning ctx.Err(): one part may be minutes of
// work, too long to finish after a worker is told to stop.
func SimulatePartContext(ctx context.Context, c Cell, seed, rep uint64, splitAt float64, from, to uint64) (*Part, error) {
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
	w.done = ctx.Done()
	p, err := w.run(seed, rep, splitAt, from, to)
	if errors.Is(err, errWalkStopped) {
		return nil, ctx.Err()
	}
	return p, err
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

// pollLeaves: the walk looks at its done channel once per this many leaves (at most
// twice as many nodes, as every branching has at least two children: a few milliseconds
// of work), so a cancelled task stops promptly even inside one replicate.
const pollLeaves = 1 << 16

// errWalkStopped is returned by run when the walk was stopped through its done channel;
// callers report their context's error instead.
var errWalkStopped = errors.New("walk stopped")

// poll stops the walk if the done channel is closed: it sets aborted and moves the
// horizon to -Inf, so every node still to be visited is a leaf at once and the walk
// unwinds after a few nodes per level, with no test on the hot path beyond the leaf
// count's. run discards the part and restores the horizon.
func (w *walker) poll() {
	select {
	case <-w.done:
		w.aborted = true
		w.horizon = math.Inf(-1)
	default:
	}
}

func (w *walker) newPart(rep uint64, splitAt float64, from, to uint64) *Part {
	w.hist = make([]uint64, w.nBins+1)
	w.topFloor = math.Inf(-1)
	p := &Part{Replicate: rep, SplitAt: splitAt, From: from, To: to, top: topK{k: w.c.Observe.TopK},
		hist: w.hist[1:], checks: make([]partCheck, len(w.checks))}
	for i := range p.checks {
		p.checks[i].zdir = make([]exactsum.Acc, w.nDirs)
	}
	return p
}

func (w *walker) run(seed, rep uint64, splitAt float64, from, to uint64) (*Part, error) {
	w.horizon = w.c.Horizon // poll may have moved it
	w.part = w.newPart(rep, splitAt, from, to)
	w.splitAt, w.from, w.to, w.rootIndex, w.prefix = splitAt, from, to, 0, from == 0
	root := rootKey(seed, w.cellKey, rep)
	origin := w.level(0)
	clear(origin)
	if splitAt == 0 {
		w.rootIndex = 1
		w.subtree(root, 0, origin, 0)
	} else {
		w.top(root, 0, origin, 0)
	}
	if w.aborted {
		w.aborted = false
		return nil, errWalkStopped
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
	death := birth + w.start(k)
	if death > w.splitAt {
		i := w.rootIndex
		w.rootIndex++
		if i >= w.from && i < w.to {
			w.subtree(k, birth, pos, depth)
		}
		return
	}
	end := w.level(depth + 1)
	w.advance(birth, death, pos, end, w.prefix)
	for i := 0; i < w.k; i++ {
		w.top(k.child(i), death, end, depth+1)
	}
}

// subtree walks the full subtree of the node with key k, born at birth at position pos
// (w.level(depth)): in batches with wave3 in up to three dimensions, else depth first
// with node.
func (w *walker) subtree(k key, birth float64, pos []float64, depth int) {
	if w.d > 3 || w.general {
		w.node(k, birth, pos, depth)
		return
	}
	w.wave3(k, birth, vecOf(pos))
}

// vec is a position in at most three dimensions, the unused coordinates 0. wave3 carries
// positions in these rather than in slices: the compiler keeps them in registers, and
// the code has no bounds checks and no loops over the coordinates.
type vec struct{ x, y, z float64 }

// vecOf is the vec of a position of 1, 2 or 3 coordinates.
func vecOf(s []float64) vec {
	var v vec
	v.x = s[0]
	if len(s) > 1 {
		v.y = s[1]
	}
	if len(s) > 2 {
		v.z = s[2]
	}
	return v
}

// coords is v's first d coordinates.
func (v vec) coords(d int) []float64 { return []float64{v.x, v.y, v.z}[:d] }

// radius is |v| as leaf computes it, √(x² + y² + z²): the unused coordinates' terms are
// +0 and leave the sum's bits as they are.
func (v *vec) radius() float64 { return math.Sqrt(v.square()) }

// square is radius's x² + y² + z², rounded as it rounds it.
func (v *vec) square() float64 { return float64(v.x*v.x) + float64(v.y*v.y) + float64(v.z*v.z) }

// advance3 is advance for wave3: the position at time until of the node with key k,
// born at birth at p, cut at the checkpoints in between. w.rng must be the node's
// generator as it stands after the node's lifetime's draw.
func (w *walker) advance3(k key, birth, until float64, p vec) vec {
	var buf [6]float64
	pos, end := buf[:w.d], buf[3:3+w.d]
	copy(pos, p.coords(w.d))
	w.cur, w.nNorm = k, 0
	w.advance(birth, until, pos, end, true)
	return vecOf(end)
}

// start makes k the current node (its draws come next) and returns its lifetime.
func (w *walker) start(k key) float64 {
	w.rng.seed(k)
	w.cur, w.nNorm = k, 0
	return w.perRate(expFromWord(k.hi, &w.rng))
}

// perRate turns a standard exponential into a lifetime at rate beta: e / beta, by
// multiplying with 1/beta where that gives the same bits (beta a power of two).
func (w *walker) perRate(e float64) float64 {
	if w.invBetaExact {
		return float64(e * w.invBeta)
	}
	return e / w.beta
}

// node walks the full subtree of the node with key k, born at birth at position pos.
// The last child is walked by the loop rather than by a call, so the recursion depth
// and the call count are those of the other children only.
func (w *walker) node(k key, birth float64, pos []float64, depth int) {
	last := w.k - 1
	for {
		w.rng.seed(k) // start's body written out (start does not inline)
		e, ok := zigExp(k.hi)
		if !ok {
			e = w.rng.expSlow(k.hi)
		}
		death := birth + w.perRate(e)
		end := w.level(depth + 1)
		until := min(death, w.horizon)
		if birth > w.lastCheck {
			// No checkpoint to cut at (most nodes): one increment, normals 0 to d-1.
			// This is move's body written out on purpose (move does not inline), with
			// normalWord unrolled: keep the two the same.
			end = end[:len(pos)]
			if dt := until - birth; dt > 0 {
				sd := w.sigma * math.Sqrt(dt)
				words := [2]uint64{k.lo, spareWord(k)}
				for i := range min(len(pos), 2) {
					z, ok := zigNormal(words[i])
					if !ok {
						z = w.rng.normSlow(words[i])
					}
					end[i] = pos[i] + float64(sd*z)
				}
				v := k.lo + normal2Gamma // normal n's word is mix64(k.lo + n*normalGamma), n >= 2
				for i := 2; i < len(pos); i++ {
					u := mix64(v)
					v += normalGamma
					z, ok := zigNormal(u)
					if !ok {
						z = w.rng.normSlow(u)
					}
					end[i] = pos[i] + float64(sd*z)
				}
			} else {
				copy(end, pos)
			}
		} else {
			w.cur, w.nNorm = k, 0
			w.advance(birth, until, pos, end, true)
		}
		if death > w.horizon {
			w.leaf(end)
			return
		}
		ka, kb := k.mixes()
		for i := 0; i < last; i++ {
			w.node(childOf(ka, kb, i), death, end, depth+1)
		}
		k, birth, pos, depth = childOf(ka, kb, last), death, end, depth+1
	}
}

// advance sets end to the position at time until of the particle born at birth at pos,
// drawing its Brownian increment exactly and cutting it at every checkpoint s with
// birth <= s < until (and at s = until = horizon). Checkpoint contributions are recorded if
// record is set; the normals are drawn either way so the walk's randomness never depends
// on the split.
func (w *walker) advance(birth, until float64, pos, end []float64, record bool) {
	t := birth
	src := pos
	for ci, s := range w.checks {
		if s < birth {
			continue
		}
		if s > until || (s == until && until < w.horizon) {
			break
		}
		w.move(src, end, s-t)
		src, t = end, s
		if record {
			w.checkpoint(ci, end)
		}
	}
	w.move(src, end, until-t)
}

// move sets end = pos + an exact N(0, sigma^2 dt I_d) increment (end = pos if dt <= 0,
// drawing nothing); end and pos have the same length and may be the same slice. The
// normals are the current node's next ones (see normalWord).
func (w *walker) move(pos, end []float64, dt float64) {
	end = end[:len(pos)]
	if dt <= 0 {
		copy(end, pos)
		return
	}
	sd := w.sigma * math.Sqrt(dt)
	for i := range pos {
		u := normalWord(w.cur, w.nNorm)
		w.nNorm++
		end[i] = pos[i] + float64(sd*normFromWord(u, &w.rng))
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
		rr += float64(xi * xi)
	}
	rho := math.Sqrt(rr)
	tr := float64(w.theta * rho)
	d := float64(w.d)
	// Sphere averages: avg exp(theta<X,u>) = Phi_d(theta rho),
	// avg <X,u> exp(theta<X,u>) = rho (theta rho / d) Phi_{d+2}(theta rho).
	e := pexp(tr + w.zScale[ci])
	pc.z.Add(e * (float64(w.v*s*PhiScaled(w.d, tr)) - float64(rho*(tr/d)*PhiScaled(w.d+2, tr))))
	lr := float64(w.lambda * rho)
	pc.w.Add(pexp(lr+w.wScale[ci]) * PhiScaled(w.d, lr))
	vs := float64(w.v * s)
	for j := 0; j < w.nDirs; j++ {
		u := w.dirs[j*w.d : (j+1)*w.d]
		var p float64
		for i, xi := range x {
			p += float64(xi * u[i])
		}
		pc.zdir[j].Add((vs - p) * pexp(float64(w.theta*p)+w.zScale[ci]))
	}
}

// leaf records a particle alive at the horizon at position x. Its branches are all
// predictable (the top-K test fails for all but a handful of leaves, and the histogram's
// bin is chosen without a branch), so the walk need not wait for the leaf's radius
// before going on to the next node.
func (w *walker) leaf(x []float64) {
	w.tally()
	var rr float64
	for _, xi := range x {
		rr += float64(xi * xi)
	}
	r := math.Sqrt(rr)
	if r >= w.topFloor {
		w.offer(r, x)
	}
	w.count(r)
}

// tally counts a leaf, and polls the done channel once every pollLeaves leaves.
func (w *walker) tally() {
	if w.part.pop++; w.part.pop%pollLeaves == 0 {
		w.poll()
	}
}

// offer puts a leaf at radius r and position x among the top-K candidates.
func (w *walker) offer(r float64, x []float64) {
	t := &w.part.top
	t.offer(r, x)
	if len(t.items) == t.k {
		w.topFloor = t.items[0].r
	}
}

// count adds a leaf at radius r to the histogram, left of it to the underflow slot.
func (w *walker) count(r float64) { w.hist[w.bins.slot(r)]++ }

// histBins places radii in the histogram of R - m_T on [hist0, ∞): centre is m_T, hist0
// is -Window (the left edge), invBin is 1/BinWidth and lastBin the last bin's index, as
// a float.
type histBins struct{ centre, hist0, invBin, lastBin float64 }

// slot is the slot of w.hist that radius r is counted in: 1 + its bin (the last bin takes
// all larger radii), or 0, the underflow slot, left of the histogram. Most leaves of a
// large tree lie far inside, so leaves fall left and right of the histogram's edge at
// random: the slot is chosen from b's sign bit without a branch (b is never -0 or NaN: r
// is finite and r - centre - hist0 is +0 when it is zero).
func (h histBins) slot(r float64) int {
	b := min((r-h.centre-h.hist0)*h.invBin, h.lastBin)
	inside := int(math.Float64bits(b)>>63) - 1 // 0 if b < 0, else all ones
	return (int(b) + 1) & inside
}
