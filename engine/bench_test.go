package engine

import (
	"fmt"
	"math/rand/v2"
	"testing"
)

// BenchmarkNode reports the engine's cost per tree node (T = 10, no checkpoints).
func BenchmarkNode(b *testing.B) {
	for _, d := range []int{1, 2, 3} {
		b.Run(fmt.Sprintf("d=%d", d), func(b *testing.B) {
			c := Cell{Model: Model{Dim: d, Sigma: 1, Beta: 1, Children: 2}, Horizon: 10}.WithDefaults()
			w := newWalker(c)
			var nodes uint64
			for i := 0; i < b.N; i++ {
				w.nodes = 0
				if _, err := w.run(1, uint64(i), 0, 0, 1); err != nil {
					b.Fatal(err)
				}
				nodes += w.nodes
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(nodes), "ns/node")
		})
	}
}

// BenchmarkRawVariates is the floor: per node, reseed the generator and draw one
// exponential and d normals, as the engine does, with nothing else. "engine" is the
// engine's own generator (PCG-DXSM and ziggurat, calls inlined); "stdlib" is
// rand.New(rand.NewPCG) from math/rand/v2, which gives the same numbers through an
// interface. Run with -benchtime of a few million iterations.
func BenchmarkRawVariates(b *testing.B) {
	for _, d := range []int{1, 2, 3} {
		b.Run(fmt.Sprintf("engine/d=%d", d), func(b *testing.B) { rawEngine(b, d, false) })
		// As "engine", with the node's key derived from a parent's as the walk does:
		// the floor for any walk under this stream's keying.
		b.Run(fmt.Sprintf("engine+key/d=%d", d), func(b *testing.B) { rawEngine(b, d, true) })
		b.Run(fmt.Sprintf("stdlib/d=%d", d), func(b *testing.B) {
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

// rawEngine draws, per iteration, one node's exponential and d normals from the engine's
// generator, reseeded with a fresh key (derived from a parent's as the walk does, if
// derive is set).
func rawEngine(b *testing.B, d int, derive bool) {
	var r nodeRand
	var s float64
	for i := 0; i < b.N; i++ {
		k := key{uint64(i), uint64(i) * 0x9e3779b97f4a7c15}
		if derive {
			k = k.child(i & 1)
		}
		r.seed(k)
		s += r.ExpFloat64()
		for j := 0; j < d; j++ {
			s += r.NormFloat64()
		}
	}
	if s == 0.5 {
		b.Log(s)
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N), "ns/node")
}

// skeleton is the walk with everything but the keys, the lifetimes and the recursion
// taken out: the part of a node's cost that is a chain of dependent steps (key, then
// lifetime, then the leaf-or-branch test) and cannot overlap with the next node.
type skeleton struct {
	horizon float64
	nodes   uint64
}

func (s *skeleton) node(k key, birth float64) {
	for {
		s.nodes++
		var r nodeRand
		r.seed(k)
		death := birth + r.ExpFloat64()
		if death > s.horizon {
			return
		}
		s.node(k.child(0), death)
		k, birth = k.child(1), death
	}
}

// BenchmarkWalkSkeleton reports the stripped walk's ns per node (binary, T = 10): the
// floor under BenchmarkNode that no change to the bookkeeping can go below.
func BenchmarkWalkSkeleton(b *testing.B) {
	s := &skeleton{horizon: 10}
	for i := 0; i < b.N; i++ {
		s.node(rootKey(1, 2, uint64(i)), 0)
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(s.nodes), "ns/node")
}
