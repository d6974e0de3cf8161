package engine

import (
	"math"
	"unsafe"
)

// waveBatch is how many broods wave3 takes off its stack at a time (binary branching;
// for k children, 2*waveBatch/k, so that a batch holds about as many nodes).
const waveBatch = 128

// brood is the children of one branching node, still to be walked: the parent's mixes
// (child i's key is childOf(a, b, i)), the children's birth time and birth position.
type brood struct {
	a, b  uint64
	birth float64
	p     vec
}

// wave3 walks the full subtree of the node with key k, born at birth at p (d <= 3). It
// takes a batch of broods at a time off a stack (up to waveBatch), and step walks each
// child one step: its lifetime and increment, and it is pushed as a brood or kept as a
// leaf without a branch; then the batch's leaves are recorded. It gives the same part
// as node, draw for draw and rounding for rounding (TestWaveMatchesNode).
//
// Why batches: in a depth-first walk each node's key, lifetime and leaf-or-branch test
// wait on the last node's, and that test goes either way near the horizon, so the
// processor can neither overlap nodes nor predict most leaf tests. A batch's nodes are
// independent of one another, so their draws overlap as in a plain loop of draws, and
// the only unpredictable outcome, leaf or branch, moves two counters instead of
// steering the code. The part does not depend on the order nodes are visited in: the
// top-K set breaks ties by position, the histogram and population are counts, and
// checkpoint sums are exact.
//
// Memory stays O(depth): a batch replaces at most b = max(1, 2*waveBatch/k) broods by at
// most b*k, so the stack grows by at most b*(k-1) broods (about 2*waveBatch) per tree
// level.
func (w *walker) wave3(k key, birth float64, p vec) {
	// The root is no one's child: walk it alone.
	death := birth + w.start(k)
	q := w.advance3(k, birth, min(death, w.horizon), p)
	if death > w.horizon {
		w.leaves3([]vec{q})
		return
	}
	a, b := k.mixes()
	st := append(w.stack[:0], brood{a, b, death, q})
	var batch [waveBatch]brood
	kids := w.k
	most := max(1, 2*waveBatch/kids) // broods per batch
	if len(w.leafBuf) < kids*most {
		w.leafBuf = make([]vec, kids*most)
	}
	leaves := w.leafBuf
	for len(st) > 0 {
		n := min(len(st), most)
		base := len(st) - n
		copy(batch[:], st[base:])
		if need := base + kids*n; need > cap(st) {
			st = append(st[:cap(st)], make([]brood, need-cap(st))...)
		}
		sp, lp := w.step(batch[:n], st[base:base+kids*n], leaves)
		st = st[:base+sp]
		w.leaves3(leaves[:lp])
	}
	w.stack = st[:0]
}

// step walks each child of a batch of broods one step, as node walks a node: the
// children living past the horizon are written to leaves, the others to out as broods,
// and the numbers of each are returned. Most children are taken by a fast path, which
// needs no rejection step, no checkpoint cut, and time left to move: waveKernel (binary
// branching, where this build has it) or fastStep. The others are walked by child3:
// fastStep calls it where it meets them; waveKernel lists them, and they are walked
// here, after the rest.
func (w *walker) step(batch []brood, out []brood, leaves []vec) (sp, lp int) {
	horizon := w.horizon // poll may move it between batches
	if w.k != 2 || !haveKernel || w.noKernel {
		return w.fastStep(batch, out, leaves, horizon)
	}
	c := waveConsts{horizon: horizon, beta: w.beta, sigma: w.sigma, lastCheck: w.lastCheck,
		exp: &w.expTab[0], norm: &w.normTab[0]}
	slow := &w.slowList // kept by the walker, so that it is not zeroed at every batch
	ob, lb, sb := waveKernel(w.d, !w.foldRate, !w.foldSigma, &batch[0], 2*len(batch), &out[0], &leaves[0], &slow[0], &c)
	sp, lp = ob/int(unsafe.Sizeof(brood{})), lb/int(unsafe.Sizeof(vec{}))
	for _, j := range slow[:sb/4] {
		br := &batch[j/2]
		k := childOf(br.a, br.b, int(j%2))
		death, q := w.child3(k, br.birth, br.p, horizon)
		leaf := put(&leaves[lp], &out[sp], k, death, q, horizon)
		sp, lp = sp+1-leaf, lp+leaf
	}
	return sp, lp
}

// fastStep is step's fast path in Go, for any number of children: each child is
// written to out or leaves, those that need a rejection step, a checkpoint cut or have
// no time left to move being walked by child3 where they are met. It returns the
// numbers of broods and leaves written.
func (w *walker) fastStep(batch []brood, out []brood, leaves []vec, horizon float64) (sp, lp int) {
	d, kids := w.d, w.k
	sigma, lastCheck := w.sigma, w.lastCheck
	expTab, normTab, foldRate, foldSigma := w.expTab, w.normTab, w.foldRate, w.foldSigma
	// One loop over the batch's nodes, not a loop per brood: a short inner loop's exit
	// is a branch the processor may mispredict once per brood.
	for j := range kids * len(batch) {
		bi, c := j>>1, j&1
		if kids != 2 {
			bi, c = j/kids, j%kids
		}
		br := &batch[bi]
		k := childOf(br.a, br.b, c)
		// e and z are scaled by 1/beta and sigma where the strips are (scaledStrips)
		e, ok := zigExpFrom(expTab, k.hi)
		if !foldRate {
			e = w.perRate(e)
		}
		death := br.birth + e
		dt := min(death, horizon) - br.birth
		sd := math.Sqrt(dt)
		if !foldSigma {
			sd *= sigma
		}
		z, ok0 := zigNormalFrom(normTab, k.lo)
		q := br.p
		q.x += float64(sd * z)
		ok = ok && ok0 && dt > 0 && br.birth > lastCheck
		if d > 1 {
			z, ok1 := zigNormalFrom(normTab, spareWord(k))
			q.y += float64(sd * z)
			ok = ok && ok1
		}
		if d > 2 {
			z, ok2 := zigNormalFrom(normTab, mix64(k.lo+normal2Gamma))
			q.z += float64(sd * z)
			ok = ok && ok2
		}
		if !ok {
			death, q = w.child3(k, br.birth, br.p, horizon)
		}
		leaf := put(&leaves[lp], &out[sp], k, death, q, horizon)
		sp, lp = sp+1-leaf, lp+leaf
	}
	return sp, lp
}

// put writes a walked child, with key k, death and position q at min(death, horizon),
// both as the leaf l and as the brood o, and returns 1 if it is a leaf (it lives past
// the horizon), else 0: the caller moves on the count of the one that stands, so the
// leaf test is no branch. Fields are written one by one (a composite literal is copied
// in 16-byte moves that stall on the 8-byte stores just made).
func put(l *vec, o *brood, k key, death float64, q vec, horizon float64) int {
	l.x, l.y, l.z = q.x, q.y, q.z
	o.a, o.b = k.mixes()
	o.birth = death
	o.p.x, o.p.y, o.p.z = q.x, q.y, q.z
	return int(math.Float64bits(horizon-death) >> 63) // death > horizon
}

// child3 is one child of wave3 walked in full, as node walks it: its death and its
// position at min(death, horizon), given its key and its birth time and position.
func (w *walker) child3(k key, birth float64, p vec, horizon float64) (float64, vec) {
	var r *nodeRand // see rejections
	e, ok := zigExp(k.hi)
	if !ok {
		e = w.rejections(k, &r).expSlow(k.hi)
	}
	death := birth + w.perRate(e)
	until := min(death, horizon)
	q := p
	if birth > w.lastCheck {
		if dt := until - birth; dt > 0 {
			sd := w.sigma * math.Sqrt(dt)
			z, ok := zigNormal(k.lo)
			if !ok {
				z = w.rejections(k, &r).normSlow(k.lo)
			}
			q.x += float64(sd * z)
			if w.d > 1 {
				u := spareWord(k)
				z, ok := zigNormal(u)
				if !ok {
					z = w.rejections(k, &r).normSlow(u)
				}
				q.y += float64(sd * z)
			}
			if w.d > 2 {
				u := mix64(k.lo + normal2Gamma)
				z, ok := zigNormal(u)
				if !ok {
					z = w.rejections(k, &r).normSlow(u)
				}
				q.z += float64(sd * z)
			}
		}
	} else {
		w.rejections(k, &r)
		q = w.advance3(k, birth, until, p)
	}
	return death, q
}

// rejections returns the generator for the rejection steps of the node with key k:
// *r, or if that is nil w.rng seeded with k, which *r is then set to. wave3 seeds a
// node's generator only when a draw needs it (2 to 5 nodes in 100): a node's later
// rejection steps must go on where its earlier ones left the generator.
func (w *walker) rejections(k key, r **nodeRand) *nodeRand {
	if *r == nil {
		w.rng.seed(k)
		*r = &w.rng
	}
	return *r
}

// scaledStrips scales the widths of the strips t (a copy of zigE or zigN) by s, and
// returns true, where a draw from them gives the same bits as the draw from the
// unscaled strips times s, and its product by any time step's square root (the
// increment) the same bits as that of the unscaled draw times s: for s a power of two
// from 2^-32 to 2^32. Scaling by a power of two is exact while nothing leaves the normal
// range, and nothing does: widths lie in (2^-36, 2^-28), draws below 2^32 widths, square
// roots of time steps in [2^-537, 2^512]. For other s it leaves t as it is and returns
// false. The fast paths then take the lifetime's 1/beta, or the increment's sigma, from
// the strips, and a multiply leaves the critical path of every child
// (TestWaveKernelMatchesLoop, TestWaveMatchesNode).
func scaledStrips(t []zigStrip, s float64) bool {
	if frac, e := math.Frexp(s); frac != 0.5 || e < -31 || e > 33 {
		return false
	}
	for i := range t {
		t[i].w *= s
	}
	return true
}

// leafLists are leaves3's lists, kept by the walker rather than cleared at every batch.
type leafLists struct {
	need, tops [2 * waveBatch]uint16 // leaves that can count; leaves worth offering
}

// leaves3 records leaves of wave3 (as leaf does one of node's), and polls the done
// channel when the population passes a multiple of pollLeaves.
//
// Most leaves lie far inside, left of the histogram and below the least top-K radius:
// their records change nothing but the population. So a first loop lists, without a
// branch, the leaves whose radius may reach w.needRadius (no leaf below it can count),
// testing |x| in one dimension and the squared radius in more, and only the listed
// leaves have their radius's square root taken and are counted in the histogram. The
// second loop calls nothing, so that the histogram's constants stay in registers: the
// leaves worth offering to the top-K set (at least its least radius as the batch began)
// are noted and offered after it. Offering them later changes nothing: the set keeps
// the K largest, whatever the order they come in. A batch has at most
// k*max(1, 2*waveBatch/k) <= 2*waveBatch leaves, the size of the lists.
func (w *walker) leaves3(ls []vec) {
	before := w.part.pop
	w.part.pop += uint64(len(ls))
	need, tops := &w.leafLists.need, &w.leafLists.tops
	t := w.needRadius()
	nn := 0
	switch w.d {
	case 1:
		// The radius, √(x²), is |x| or within a unit in the last place of it.
		for i := range ls {
			need[nn&(len(need)-1)] = uint16(i)
			if math.Abs(ls[i].x) >= t {
				nn++
			}
		}
	case 2:
		least := t * t
		for i := range ls {
			s := float64(ls[i].x*ls[i].x) + float64(ls[i].y*ls[i].y)
			need[nn&(len(need)-1)] = uint16(i)
			if s >= least {
				nn++
			}
		}
	default:
		least := t * t
		for i := range ls {
			need[nn&(len(need)-1)] = uint16(i)
			if ls[i].square() >= least {
				nn++
			}
		}
	}
	hist, bins, floor := w.hist, w.bins, w.topFloor
	// In one dimension the radius √(x²) is |x| exactly while x² neither underflows nor
	// overflows (TestRootOfSquare): for every listed leaf once t is at least 2^-511, and
	// below 2^511, past which the square root is taken.
	abs := w.d == 1 && t >= 0x1p-511
	nt := 0
	for _, i := range need[:nn] {
		r := math.Abs(ls[i].x)
		if !abs || r >= 0x1p511 {
			r = ls[i].radius()
		}
		hist[bins.slot(r)]++
		tops[nt&(len(tops)-1)] = i
		if r >= floor {
			nt++
		}
	}
	for _, i := range tops[:nt] {
		w.offer(ls[i].radius(), ls[i].coords(w.d))
	}
	if before/pollLeaves != w.part.pop/pollLeaves {
		w.poll()
	}
}

// needRadius is the radius below which a leaf surely counts in neither the histogram
// (its radius is left of the histogram's edge, w.leftEdge) nor the top-K set (its
// radius is below the least kept, w.topFloor), or 0 while every leaf may count. The two
// bounds are taken 2^-30 of themselves lower, so that the rounding of the square, of
// the square root and of the histogram's bin (a few units in the last place) cannot
// move a leaf across them.
func (w *walker) needRadius() float64 {
	const shrink = 1 - 0x1p-30
	t := min(w.leftEdge, w.topFloor) * shrink
	if !(t > 0) {
		return 0
	}
	return t
}
