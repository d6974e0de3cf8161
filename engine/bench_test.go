package engine

import (
	"cmp"
	"fmt"
	"math/rand/v2"
	"slices"
	"testing"
	"time"
)

// BenchmarkNode reports the engine's cost per tree node (T = 10, no checkpoints).
func BenchmarkNode(b *testing.B) { benchNodes(b, 1, 2, 3) }

// BenchmarkNodeByDim is BenchmarkNode in higher dimensions (the general walk, node), the
// figures behind the cost model's NodeSeconds.
func BenchmarkNodeByDim(b *testing.B) { benchNodes(b, 4, 6, 10, 20, 40) }

func benchNodes(b *testing.B, dims ...int) {
	for _, d := range dims {
		b.Run(fmt.Sprintf("d=%d", d), func(b *testing.B) {
			c := Cell{Model: Model{Dim: d, Sigma: 1, Beta: 1, Children: 2}, Horizon: 10}.WithDefaults()
			w := newWalker(c)
			var nodes uint64
			for i := 0; i < b.N; i++ {
				p, err := w.run(1, uint64(i), 0, 0, 1)
				if err != nil {
					b.Fatal(err)
				}
				nodes += 2*p.pop - 1 // a binary tree with pop leaves
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(nodes), "ns/node")
		})
	}
}

// BenchmarkRawVariates is the floor: per node, what it takes to draw one exponential and
// d normals with nothing else. "engine" is the engine's own stream (random-stream
// version 3): the node's key is derived from a parent's (under this stream the key is
// the generator's output: its high half is the exponential's word, its low half and
// SplitMix64 outputs from it the normals' words), then the words go through the
// ziggurat. "pcg" reseeds rand.New(rand.NewPCG) from math/rand/v2 per node and draws
// through it: the generator of streams 1 and 2, for comparison.
func BenchmarkRawVariates(b *testing.B) {
	for _, d := range []int{1, 2, 3} {
		b.Run(fmt.Sprintf("engine/d=%d", d), func(b *testing.B) { rawEngine(b, d) })
		b.Run(fmt.Sprintf("pcg/d=%d", d), func(b *testing.B) {
			p := rand.NewPCG(0, 0)
			r := rand.New(p)
			var s float64
			for i := 0; i < b.N; i++ {
				p.Seed(uint64(i), uint64(i)*0x9e3779b97f4a7c15)
				s += r.ExpFloat64()
				for j := 0; j < d; j++ {
					s += r.NormFloat64()
				}
			}
			if s == 0.5 {
				b.Log(s)
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N), "ns/node")
		})
	}
}

// rawEngine draws, per iteration, one node's exponential and d normals as the walk
// does (the fast paths inline, the words of normals 0-2 as wave3 takes them), from a
// key derived from a parent's.
func rawEngine(b *testing.B, d int) {
	s := rawDraws(d, 0, b.N)
	if s == 0.5 {
		b.Log(s)
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N), "ns/node")
}

// rawDraws is rawEngine's loop for nodes from, from+1, ..., from+n-1; it returns the
// sum of the draws, so that they are not optimised away.
func rawDraws(d, from, n int) float64 {
	var r nodeRand
	var s float64
	for i := from; i < from+n; i++ {
		k := childOf(uint64(i), uint64(i)*0x9e3779b97f4a7c15, i&1)
		r.seed(k)
		e, ok := zigExp(k.hi)
		if !ok {
			e = r.expSlow(k.hi)
		}
		s += e
		for j := 0; j < d; j++ {
			u := normalWord(k, uint64(j))
			z, ok := zigNormal(u)
			if !ok {
				z = r.normSlow(u)
			}
			s += z
		}
	}
	return s
}

// BenchmarkWalkOverRaw measures walk / raw (the cost per node of the walk over that of
// drawing a node's variates, BenchmarkNode over BenchmarkRawVariates/engine) with the
// two taking turns every millisecond or so: each iteration walks one replicate (binary,
// T = 10) and then draws as many nodes' variates. On a machine whose load changes from
// second to second, the two separate benchmarks see different machines; here each pair
// sees about the same one. It reports the medians over iterations of walk and raw ns per
// node and of their ratio, and the median ratio over the quarter of iterations where
// the machine was quietest (quiet-walk/raw): where a fixed batch of 4,096 raw draws,
// timed just before the pair, was fastest. (Choosing by the pair's own raw time would
// favour pairs whose raw time came out low by chance, and overstate the ratio.)
func BenchmarkWalkOverRaw(b *testing.B) {
	for _, d := range []int{1, 2, 3} {
		b.Run(fmt.Sprintf("d=%d", d), func(b *testing.B) {
			c := Cell{Model: Model{Dim: d, Sigma: 1, Beta: 1, Children: 2}, Horizon: 10}.WithDefaults()
			w := newWalker(c)
			walk, raw, ratio := make([]float64, b.N), make([]float64, b.N), make([]float64, b.N)
			calm := make([]float64, b.N)
			var sink float64
			drawn := 0
			for i := 0; i < b.N; i++ {
				tc := time.Now()
				sink += rawDraws(d, 0, 4096)
				t0 := time.Now()
				calm[i] = float64(t0.Sub(tc))
				p, err := w.run(1, uint64(i), 0, 0, 1)
				if err != nil {
					b.Fatal(err)
				}
				t1 := time.Now()
				nodes := int(2*p.pop - 1)
				sink += rawDraws(d, drawn, nodes)
				drawn += nodes
				t2 := time.Now()
				walk[i] = float64(t1.Sub(t0).Nanoseconds()) / float64(nodes)
				raw[i] = float64(t2.Sub(t1).Nanoseconds()) / float64(nodes)
				ratio[i] = walk[i] / raw[i]
			}
			if sink == 0.5 {
				b.Log(sink)
			}
			b.ReportMetric(median(walk), "walk-ns/node")
			b.ReportMetric(median(raw), "raw-ns/node")
			b.ReportMetric(median(ratio), "walk/raw")
			b.ReportMetric(median(quietest(ratio, calm)), "quiet-walk/raw")
		})
	}
}

// quietest is x at the quarter of indices (at least one) where by is least.
func quietest(x, by []float64) []float64 {
	idx := make([]int, len(x))
	for i := range idx {
		idx[i] = i
	}
	slices.SortFunc(idx, func(i, j int) int { return cmp.Compare(by[i], by[j]) })
	var q []float64
	for _, i := range idx[:max(1, len(idx)/4)] {
		q = append(q, x[i])
	}
	return q
}

// median is the median of x (x is left as it is).
func median(x []float64) float64 {
	s := slices.Clone(x)
	slices.Sort(s)
	n := len(s)
	if n%2 == 1 {
		return s[n/2]
	}
	return (s[n/2-1] + s[n/2]) / 2
}

// skeleton is a depth-first walk with everything but the keys, the lifetimes and the
// recursion taken out: the part of a node's cost that is a chain of dependent steps
// (key, then lifetime, then the leaf-or-branch test) and, depth first, cannot overlap
// with the next node. The batched walk (wave3) is not bound by it.
type skeleton struct {
	horizon float64
	nodes   uint64
}

func (s *skeleton) node(k key, birth float64) {
	for {
		s.nodes++
		var r nodeRand
		r.seed(k)
		death := birth + expFromWord(k.hi, &r)
		if death > s.horizon {
			return
		}
		a, b := k.mixes()
		s.node(childOf(a, b, 0), death)
		k, birth = childOf(a, b, 1), death
	}
}

// BenchmarkWalkSkeleton reports the stripped walk's ns per node (binary, T = 10): the
// floor of a depth-first walk, whatever its bookkeeping.
func BenchmarkWalkSkeleton(b *testing.B) {
	s := &skeleton{horizon: 10}
	for i := 0; i < b.N; i++ {
		s.node(rootKey(1, 2, uint64(i)), 0)
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(s.nodes), "ns/node")
}

// BenchmarkKernelOverRaw is waveKernel's time per child over the raw draws' time per node
// (rawDraws), the two taking turns: 20 steps of one fixed batch of 256 children born in
// [8, 10) against the draws of 5,120 nodes. The batch is the same each time, so the
// processor learns its branches: a floor for the kernel, not the walk's cost.
func BenchmarkKernelOverRaw(b *testing.B) {
	if !haveKernel {
		b.Skip("no waveKernel on this architecture")
	}
	for _, d := range []int{1, 2, 3} {
		b.Run(fmt.Sprintf("d=%d", d), func(b *testing.B) {
			rng := rand.New(rand.NewPCG(1, 2))
			batch := make([]brood, waveBatch)
			for i := range batch {
				batch[i] = brood{a: rng.Uint64(), b: rng.Uint64(), birth: 8 + 2*rng.Float64()}
			}
			out, leaves := make([]brood, 2*waveBatch), make([]vec, 2*waveBatch)
			var slow [2 * waveBatch]uint32
			c := waveConsts{horizon: 10, beta: 1, sigma: 1, lastCheck: -1, exp: &zigE[0], norm: &zigN[0]}
			ratio := make([]float64, b.N)
			var sink float64
			for i := 0; i < b.N; i++ {
				t0 := time.Now()
				for range 20 {
					waveKernel(d, false, false, &batch[0], 2*waveBatch, &out[0], &leaves[0], &slow[0], &c)
				}
				t1 := time.Now()
				sink += rawDraws(d, i*20*2*waveBatch, 20*2*waveBatch)
				ratio[i] = float64(t1.Sub(t0)) / float64(time.Since(t1))
			}
			if sink == 0.5 {
				b.Log(sink)
			}
			b.ReportMetric(median(ratio), "kernel/raw")
		})
	}
}
