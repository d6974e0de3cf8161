package engine

import "math"

// waveBatch is how many broods wave takes off its stack at a time (binary branching;
// for k children, 2*waveBatch/k, so that a batch holds about as many nodes).
const waveBatch = 128

// brood is the children of one branching node, still to be walked: the parent's mixes
// (child i's key is childOf(a, b, i)), the children's birth time and birth position.
type brood struct {
	a, b  uint64
	birth float64
	p     vec
}

// dims is the walk's dimension as a type, [d]struct{} for d = 1, 2, 3: wave and its
// loops are compiled once per dimension (len of a value of the type is then a
// constant), so that a d = 1 walk carries, draws and stores one coordinate, with no
// test of d per node.
type dims interface {
	[1]struct{} | [2]struct{} | [3]struct{}
}

// waveBufs are wave's working arrays, kept by the walker between walks: the broods of
// the batch being walked, the broods its children start (at most k per brood, so at
// most 2*waveBatch) and its leaves. They are fixed-size arrays behind one pointer so
// that the batch loop (flight) needs one register for all three and no bounds checks.
type waveBufs struct {
	batch  [waveBatch]brood
	out    [2 * waveBatch]brood
	leaves [2 * waveBatch]vec
}

// wave walks the full subtree of the node with key k, born at birth at p (d <= 3). It
// takes a batch of broods at a time off a stack (up to waveBatch), draws each child's
// lifetime and increment, and pushes the child's own brood or keeps it as a leaf without
// a branch, then records the batch's leaves. It gives the same part as node, draw for draw and
// rounding for rounding (TestWaveMatchesNode).
//
// Why batches: in a depth-first walk each node's key, lifetime and leaf-or-branch test
// wait on the last node's, and that test goes either way near the horizon, so the
// processor can neither overlap nodes nor predict most leaf tests. A batch's nodes are
// independent of one another, so their draws overlap as in a plain loop of draws, and
// the only unpredictable outcome, leaf or branch, moves a counter instead of steering
// the code. The part does not depend on the order nodes are visited in: the
// top-K set breaks ties by position, the histogram and population are counts, and
// checkpoint sums are exact.
//
// The common child (every draw on the ziggurat's fast path, born after the last
// checkpoint) is walked by flight, a loop that calls nothing, so the compiler keeps its
// values in registers; flight stops at any other child, which wave walks the general
// way (child) before flight goes on.
//
// Memory stays O(depth): a batch replaces at most b = max(1, 2*waveBatch/k) broods by at
// most b*k, so the stack grows by at most b*(k-1) broods (about 2*waveBatch) per tree
// level.
func wave[D dims](w *walker, k key, birth float64, p vec) {
	// The root is no one's child: walk it alone.
	death := birth + w.start(k)
	q := w.advance3(k, birth, min(death, w.horizon), p)
	if death > w.horizon {
		leaves[D](w, []vec{q})
		return
	}
	a, b := k.mixes()
	st := append(w.stack[:0], brood{a, b, death, q})
	if w.bufs == nil {
		w.bufs = new(waveBufs)
	}
	bf := w.bufs
	kids := w.k
	most := max(1, 2*waveBatch/kids) // broods per batch
	sigma, beta, lastCheck := w.sigma, w.beta, w.lastCheck
	for len(st) > 0 {
		n := min(len(st), most)
		base := len(st) - n
		copy(bf.batch[:n], st[base:])
		horizon := w.horizon // poll may move it between batches
		var at place
		for {
			if kids == 2 {
				at = flight[D, [2]struct{}](bf, at, n, kids, horizon, sigma, beta, lastCheck)
			} else {
				at = flight[D, [0]struct{}](bf, at, n, kids, horizon, sigma, beta, lastCheck)
			}
			if at.j == n*kids {
				break
			}
			br := &bf.batch[at.j/kids]
			death, q, ck := w.child(br, at.j%kids, horizon)
			bf.leaves[at.leaves()] = q
			o := &bf.out[at.out]
			o.a, o.b = ck.mixes()
			o.birth, o.p = death, q
			if death <= horizon {
				at.out++
			}
			at.j++
		}
		st = append(st[:base], bf.out[:at.out]...)
		leaves[D](w, bf.leaves[:at.leaves()])
	}
	w.stack = st[:0]
}

// arity is the branching as a type for flight: [2]struct{} for binary branching (the
// default), [0]struct{} for any number of children.
type arity interface {
	[2]struct{} | [0]struct{}
}

// place is where flight stands in a batch: the child to walk next (child j%k of brood
// j/k), and how many of the j children before it started broods. The other j - out
// were leaves.
type place struct{ j, out int }

// leaves is the number of leaves among the batch's children before j.
func (at place) leaves() int { return at.j - at.out }

// flight walks the batch's children from the j-th on (brood j/k, child j%k), in
// order, until all n*k are done or a child needs what flight does not do: a rejection
// step of the ziggurat (about 1 draw in 100), a cut at a checkpoint (born before the
// last one), or no increment (a lifetime of 0). It returns where it stopped.
//
// It writes each child both as a brood and as a leaf, field by field (a composite
// literal is copied in 16-byte moves that stall on the 8-byte stores just made), and
// the counts say which one stands. The brood's words are written as soon as they are
// known, so that fewer values are live at once: with more than the processor's
// registers, the compiler spills some to memory in every iteration.
func flight[D dims, K arity](bf *waveBufs, at place, n, k int, horizon, sigma, beta, lastCheck float64) place {
	var dd D
	var kk K
	d, kids := len(dd), uint(k)
	if len(kk) == 2 {
		kids = 2 // a constant: j/kids and j%kids are a shift and a mask
	}
	j, sp := uint(at.j), uint(at.out)
	for end := uint(n) * kids; j < end; j++ {
		br := &bf.batch[(j/kids)&(waveBatch-1)]
		m := uint64(j%kids + 1)
		hi := mix64(br.a + m*childGammaHi) // childOf(br.a, br.b, j%kids)
		lo := mix64(br.b + m*childGammaLo)
		o := &bf.out[sp&(2*waveBatch-1)]
		o.a, o.b = key{hi, lo}.mixes()
		e, fast := zigExp(hi)
		z0, ok := zigNormal(lo)
		fast = fast && ok
		var z1, z2 float64
		if d > 1 {
			z1, ok = zigNormal(spareWord(key{hi, lo}))
			fast = fast && ok
		}
		if d > 2 {
			z2, ok = zigNormal(mix64(lo + normal2Gamma))
			fast = fast && ok
		}
		// e / beta is perRate's value: when perRate multiplies, 1/beta is exact and
		// both round the same exact quotient.
		death := br.birth + e/beta
		o.birth = death
		dt := min(death, horizon) - br.birth
		if !fast || !(dt > 0) || br.birth <= lastCheck {
			break
		}
		sd := sigma * math.Sqrt(dt)
		q := br.p
		q.x += float64(sd * z0)
		if d > 1 {
			q.y += float64(sd * z1)
		}
		if d > 2 {
			q.z += float64(sd * z2)
		}
		leaf := uint(math.Float64bits(horizon-death) >> 63) // death > horizon
		l := &bf.leaves[(j-sp)&(2*waveBatch-1)]
		o.p.x, l.x = q.x, q.x
		if d > 1 {
			o.p.y, l.y = q.y, q.y
		}
		if d > 2 {
			o.p.z, l.z = q.z, q.z
		}
		sp += 1 - leaf
	}
	return place{int(j), int(sp)}
}

// child walks child c of brood br the general way, as node walks a node: its lifetime
// and increment, through the ziggurat's rejection steps and cut at checkpoints where
// needed. It returns the child's death time, its position then and its key.
func (w *walker) child(br *brood, c int, horizon float64) (float64, vec, key) {
	k := childOf(br.a, br.b, c)
	var r *nodeRand // see rejections
	e, ok := zigExp(k.hi)
	if !ok {
		e = w.rejections(k, &r).expSlow(k.hi)
	}
	death := br.birth + w.perRate(e)
	until := min(death, horizon)
	q := br.p
	if br.birth > w.lastCheck {
		if dt := until - br.birth; dt > 0 {
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
		q = w.advance3(k, br.birth, until, br.p)
	}
	return death, q, k
}

// rejections returns the generator for the rejection steps of the node with key k:
// *r, or if that is nil w.rng seeded with k, which *r is then set to. child seeds a
// node's generator only when a draw needs it (2 to 5 nodes in 100): a node's later
// rejection steps must go on where its earlier ones left the generator.
func (w *walker) rejections(k key, r **nodeRand) *nodeRand {
	if *r == nil {
		w.rng.seed(k)
		*r = &w.rng
	}
	return *r
}

// leaves records leaves of wave (as leaf does one of node's), and polls the done
// channel when the population passes a multiple of pollLeaves. The loop over the leaves
// calls nothing, so that the histogram's constants stay in registers: the leaves worth
// offering to the top-K set (at least its least radius as the batch began) are noted and
// offered after it. Offering them later changes nothing: the set keeps the K largest,
// whatever the order they come in.
func leaves[D dims](w *walker, ls []vec) {
	before := w.part.pop
	w.part.pop += uint64(len(ls))
	hist, bins, floor := w.hist, w.bins, w.topFloor
	var tops [2 * waveBatch]uint16
	nt := 0
	for i := range ls {
		r := radius[D](&ls[i])
		hist[bins.slot(r)]++
		tops[nt&(len(tops)-1)] = uint16(i)
		if r >= floor {
			nt++
		}
	}
	for _, i := range tops[:nt] {
		q := &ls[i]
		w.offer(radius[D](q), q.coords(len(*new(D))))
	}
	if before/pollLeaves != w.part.pop/pollLeaves {
		w.poll()
	}
}

// radius is |q|: node's √(x² + y² + z²) without the terms of unused coordinates, which
// are +0 and leave the sum's bits as they are.
func radius[D dims](q *vec) float64 {
	var dd D
	s := float64(q.x * q.x)
	if len(dd) > 1 {
		s += float64(q.y * q.y)
	}
	if len(dd) > 2 {
		s += float64(q.z * q.z)
	}
	return math.Sqrt(s)
}
