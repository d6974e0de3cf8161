package engine

import (
	"bytes"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"testing"
	"unsafe"
)

// TestWaveMatchesNode: the batched walk for d <= 3 (wave3) gives the same parts, byte
// for byte, as the depth-first general walk (node) on cells that reach every branch of
// it: binary and ternary branching, beta a power of two and not (division against
// multiplication), beta and sigma taken from scaled strips and not, checkpoints (cut
// through advance), a small top-K (many offers), splits into subtree ranges, a horizon
// of 0.4 that leaves the root a leaf in many replicates, and one of 9.5 where most
// leaves lie left of the histogram. Deterministic.
func TestWaveMatchesNode(t *testing.T) {
	models := []Model{
		{Sigma: 1, Beta: 1, Children: 2},
		{Sigma: 2, Beta: 0.5, Children: 3},
		{Sigma: 0.7, Beta: 0.7, Children: 2},
		{Sigma: 0.5, Beta: 0.5, Children: 2}, // strips scaled by both (scaledStrips)
		{Sigma: 1.3, Beta: 0.1, Children: 9}, // 28 broods per batch
	}
	for d := 1; d <= 3; d++ {
		for mi, m := range models {
			m.Dim = d
			for _, c := range []Cell{
				{Model: m, Horizon: 6},
				{Model: m, Horizon: 6, Observe: Observe{TopK: 3, Checkpoints: []float64{1, 2.5, 6}}},
				{Model: m, Horizon: 0.4},
				{Model: m, Horizon: 9.5}, // leaves left of the histogram: leaves3 skips them
			} {
				c = c.WithDefaults()
				fast, loop, general := newWalker(c), newWalker(c), newWalker(c)
				loop.noKernel, general.general = true, true
				for rep := uint64(0); rep < 12; rep++ {
					for _, split := range []struct {
						at       float64
						from, to uint64
					}{{0, 0, 1}, {0.3, 0, 1}, {0.3, 1, 3}} {
						name := fmt.Sprintf("d=%d model %d T=%v checkpoints %v rep %d split %v", d, mi, c.Horizon, c.Observe.Checkpoints, rep, split)
						a, errA := fast.run(5, rep, split.at, split.from, split.to)
						l, errL := loop.run(5, rep, split.at, split.from, split.to)
						b, errB := general.run(5, rep, split.at, split.from, split.to)
						if (errA == nil) != (errB == nil) || (errL == nil) != (errB == nil) {
							t.Fatalf("%s: errors differ: %v, %v, %v", name, errA, errL, errB)
						}
						if errA != nil {
							continue // a range past the particles alive at the split time
						}
						if !bytes.Equal(a.AppendBinary(nil), b.AppendBinary(nil)) {
							t.Fatalf("%s: wave3 and node give different parts", name)
						}
						if !bytes.Equal(l.AppendBinary(nil), b.AppendBinary(nil)) {
							t.Fatalf("%s: wave3 without waveKernel and node give different parts", name)
						}
					}
				}
			}
		}
	}
}

// TestWaveRejectionSteps: wave3 seeds a node's generator for the ziggurat's rejection
// steps only when a draw needs one, so a node whose lifetime and a normal, or two
// normals, both need rejection steps must share one generator between them, in the
// order node draws them. Such nodes are about 1 in 10^4, too few for TestWaveMatchesNode
// to be sure to meet one, so this test searches for parents whose first child has each
// pattern, then walks from the parent (d = 3, horizon just past the parent's death, so
// the child is walked by wave3's batch loop) with and without a checkpoint that cuts the
// child's path, and compares with node byte for byte.
func TestWaveRejectionSteps(t *testing.T) {
	slow := func(k key) [4]bool {
		_, e := zigExp(k.hi)
		_, n0 := zigNormal(k.lo)
		_, n1 := zigNormal(spareWord(k))
		_, n2 := zigNormal(mix64(k.lo + normal2Gamma))
		return [4]bool{!e, !n0, !n1, !n2}
	}
	patterns := [][4]bool{
		{true, true, false, false}, // lifetime, then normal 0
		{true, false, true, false}, // lifetime, then normal 1
		{true, false, false, true}, // lifetime, then normal 2
		{false, true, true, false}, // normals 0 and 1
		{false, false, true, true}, // normals 1 and 2
		{true, true, true, false},  // lifetime, normals 0 and 1
	}
	for pi, want := range patterns {
		var parent key
		found := false
		for i := uint64(0); i < 1<<26 && !found; i++ {
			parent = key{hi: mix64(i), lo: mix64(i ^ 0x5851f42d4c957f2d)}
			found = slow(parent.child(0)) == want
		}
		if !found {
			t.Fatalf("pattern %d: no parent found", pi)
		}
		var r nodeRand
		r.seed(parent)
		life := expFromWord(parent.hi, &r)
		for _, checks := range [][]float64{nil, {life + 0.1}} {
			c := Cell{Model: Model{Dim: 3, Sigma: 1, Beta: 1, Children: 2}, Horizon: life + 0.2,
				Observe: Observe{Checkpoints: checks}}.WithDefaults()
			fast, loop, general := newWalker(c), newWalker(c), newWalker(c)
			loop.noKernel, general.general = true, true
			a, l, b := walkFrom(fast, parent), walkFrom(loop, parent), walkFrom(general, parent)
			if !bytes.Equal(a, b) || !bytes.Equal(l, b) {
				t.Errorf("pattern %v, checkpoints %v: wave3 (%v, without waveKernel %v) and node give different parts", want, checks, bytes.Equal(a, b), bytes.Equal(l, b))
			}
		}
	}
}

// walkFrom walks the whole tree whose root has key k (rather than a replicate's root
// key) and returns the part's encoding.
func walkFrom(w *walker, k key) []byte {
	w.horizon = w.c.Horizon
	w.part = w.newPart(0, 0, 0, 1)
	w.splitAt, w.from, w.to, w.rootIndex, w.prefix = 0, 0, 1, 1, true
	origin := w.level(0)
	clear(origin)
	w.subtree(k, 0, origin, 0)
	w.part.Roots = 1
	return w.part.AppendBinary(nil)
}

// TestWaveKernelMatchesLoop: one step of a batch by waveKernel (assembly) and by
// fastStep (Go) write the same broods and leaves, bit for bit (in any order: a part
// does not depend on the order its nodes are walked in),
// for batches of made-up broods that reach every branch: births before, at and after
// the last checkpoint, births at the horizon (no time left to move) and just before
// it, positions far from the origin, and rates whose reciprocal is exact or not.
// Deterministic.
func TestWaveKernelMatchesLoop(t *testing.T) {
	if !haveKernel {
		t.Skip("no waveKernel on this architecture")
	}
	rng := rand.New(rand.NewPCG(11, 12))
	for d := 1; d <= 3; d++ {
		for _, ms := range [][2]float64{ // beta, sigma
			{1, 1.3}, {0.25, 1.3}, {0.7, 1.3}, {3, 1.3}, {1, 1}, {0.25, 0.5}, {3, 4},
			{0x1p40, 0x1p-40}, {0x1p-32, 0x1p32}, {0x1p33, 0x1p-33}, {0x1p-33, 0x1p33},
		} {
			beta, sigma := ms[0], ms[1]
			c := Cell{Model: Model{Dim: d, Sigma: sigma, Beta: beta, Children: 2}, Horizon: 5,
				Observe: Observe{Checkpoints: []float64{1, 2}}}.WithDefaults()
			kernel, loop := newWalker(c), newWalker(c)
			loop.noKernel = true
			for _, w := range []*walker{kernel, loop} { // as walkFrom sets a walk up
				w.part = w.newPart(0, 0, 0, 1)
				w.splitAt, w.from, w.to, w.rootIndex, w.prefix = 0, 0, 1, 1, true
			}
			for round := range 200 {
				n := 1 + rng.IntN(waveBatch)
				batch := make([]brood, n)
				for i := range batch {
					br := &batch[i]
					br.a, br.b = rng.Uint64(), rng.Uint64()
					switch rng.IntN(8) {
					case 0:
						br.birth = 2 // at the last checkpoint
					case 1:
						br.birth = 5 // at the horizon
					case 2:
						br.birth = math.Nextafter(5, 0)
					case 3:
						br.birth = rng.Float64() * 2
					default:
						br.birth = 2 + 3*rng.Float64()
					}
					br.p = vec{x: rng.NormFloat64() * 40}
					if d > 1 {
						br.p.y = rng.NormFloat64() * 40
					}
					if d > 2 {
						br.p.z = rng.NormFloat64() * 1e6
					}
				}
				outK, outL := make([]brood, 2*n), make([]brood, 2*n)
				leavesK, leavesL := make([]vec, 2*n), make([]vec, 2*n)
				spK, lpK := kernel.step(batch, outK, leavesK)
				spL, lpL := loop.step(batch, outL, leavesL)
				if spK != spL || lpK != lpL {
					t.Fatalf("d=%d beta=%v sigma=%v round %d: %d broods and %d leaves, against %d and %d", d, beta, sigma, round, spK, lpK, spL, lpL)
				}
				sortBits(outK[:spK])
				sortBits(outL[:spL])
				sortBits(leavesK[:lpK])
				sortBits(leavesL[:lpL])
				for i := range spK {
					if !sameBits(outK[i], outL[i]) {
						t.Fatalf("d=%d beta=%v sigma=%v round %d: brood %d is %+v, against %+v", d, beta, sigma, round, i, outK[i], outL[i])
					}
				}
				for i := range lpK {
					if !sameBits(leavesK[i], leavesL[i]) {
						t.Fatalf("d=%d beta=%v sigma=%v round %d: leaf %d is %+v, against %+v", d, beta, sigma, round, i, leavesK[i], leavesL[i])
					}
				}
				if !bytes.Equal(kernel.part.AppendBinary(nil), loop.part.AppendBinary(nil)) {
					t.Fatalf("d=%d beta=%v sigma=%v round %d: the checkpoint sums differ", d, beta, sigma, round)
				}
			}
		}
	}
}

// sortBits sorts broods or vecs by their bytes.
func sortBits[T brood | vec](s []T) {
	slices.SortFunc(s, func(a, b T) int { return bytes.Compare(bitsOf(&a), bitsOf(&b)) })
}

func bitsOf[T brood | vec](p *T) []byte {
	return unsafe.Slice((*byte)(unsafe.Pointer(p)), unsafe.Sizeof(*p))
}

// sameBits is whether a and b, broods or vecs, are the same bits.
func sameBits[T brood | vec](a, b T) bool {
	return bytes.Equal(bitsOf(&a), bitsOf(&b))
}

// TestLeavesNearTheEdges: leaves3, which takes no square root of leaves whose squared
// radius shows they count in neither the histogram nor the top-K set, records leaves
// as leaf does, one by one, for radii within 300 floats of the histogram's left edge,
// of the top-K set's least radius (right and left of the edge), and of these bounds
// taken 2^-30 of themselves lower (where leaves3 starts to skip). Deterministic.
func TestLeavesNearTheEdges(t *testing.T) {
	for d := 1; d <= 3; d++ {
		for _, firstTop := range []float64{5, -1} { // the top-K set's first members, right or left of the edge
			c := Cell{Model: Model{Dim: d, Sigma: 1, Beta: 1, Children: 2}, Horizon: 10,
				Observe: Observe{TopK: 4}}.WithDefaults()
			fast, ref := newWalker(c), newWalker(c)
			edge := fast.leftEdge
			if !(edge > 1) {
				t.Fatalf("d=%d: no left edge to test at (%v)", d, edge)
			}
			fast.part, ref.part = fast.newPart(0, 0, 0, 1), ref.newPart(0, 0, 0, 1)
			rng := rand.New(rand.NewPCG(3, uint64(d)))
			at := func(r float64) vec { // a leaf at about radius r, in a random direction
				u := vec{x: 1}
				if d > 1 {
					u = vec{x: rng.NormFloat64(), y: rng.NormFloat64()}
					if d > 2 {
						u.z = rng.NormFloat64()
					}
					n := math.Sqrt(u.square())
					u = vec{u.x / n, u.y / n, u.z / n}
				}
				return vec{r * u.x, r * u.y, r * u.z}
			}
			walk := func(radii []float64) { // in batches, by leaves3 and by leaf
				for len(radii) > 0 {
					n := min(len(radii), 2*waveBatch)
					ls := make([]vec, n)
					for i, r := range radii[:n] {
						ls[i] = at(r)
					}
					radii = radii[n:]
					fast.leaves3(ls)
					for _, l := range ls {
						ref.leaf(l.coords(d))
					}
				}
			}
			var first []float64
			for i := range 8 {
				first = append(first, edge+firstTop+float64(i)/8)
			}
			walk(first)
			floor := fast.topFloor
			walk(slices.Concat(floatsNear(edge), floatsNear(edge*(1-0x1p-30)),
				floatsNear(floor), floatsNear(floor*(1-0x1p-30))))
			if !bytes.Equal(fast.part.AppendBinary(nil), ref.part.AppendBinary(nil)) {
				t.Errorf("d=%d, least top-K radius %v, left edge %v: leaves3 and leaf record different parts", d, floor, edge)
			}
		}
	}
}

// floatsNear is r and the 300 floats either side of it.
func floatsNear(r float64) []float64 {
	s := []float64{r}
	for k, lo, hi := 0, r, r; k < 300; k++ {
		lo, hi = math.Nextafter(lo, 0), math.Nextafter(hi, math.Inf(1))
		s = append(s, lo, hi)
	}
	return s
}

// TestRootOfSquare: √(x ⊗ x) = |x| in binary64 with rounding to nearest wherever x ⊗ x
// neither underflows nor overflows (from memory: a known property of radix 2, which
// leaves3 relies on in one dimension), for 2^-511 <= |x| < 2^511: a million random x
// spread over every exponent, and the ends and odd mantissas at the range's bounds.
// Deterministic.
func TestRootOfSquare(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	check := func(x float64) {
		if r := math.Sqrt(x * x); r != math.Abs(x) {
			t.Fatalf("√(x²) = %v for x = %v (%#x)", r, x, math.Float64bits(x))
		}
	}
	for range 1_000_000 {
		e := -511 + rng.IntN(1022)
		x := math.Ldexp(1+rng.Float64(), e) // [2^e, 2^(e+1))
		if x >= 0x1p511 {
			continue
		}
		if rng.IntN(2) == 0 {
			x = -x
		}
		check(x)
	}
	for _, x := range []float64{0x1p-511, math.Nextafter(0x1p-511, 1), math.Nextafter(0x1p511, 0), 1, 3, math.Nextafter(1, 2), math.Nextafter(2, 1)} {
		check(x)
		check(-x)
	}
}
