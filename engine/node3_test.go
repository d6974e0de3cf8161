package engine

import (
	"bytes"
	"fmt"
	"testing"
)

// TestNode3MatchesNode: the walk written out for d <= 3 (node3) gives the same parts,
// byte for byte, as the general walk (node) on cells that reach every branch of it:
// binary and ternary branching, beta a power of two and not (division against
// multiplication), checkpoints (cut through advance), a small top-K (many offers),
// splits into subtree ranges, and a horizon of 0.4 that leaves the root a leaf in many
// replicates. Deterministic.
func TestNode3MatchesNode(t *testing.T) {
	models := []Model{
		{Sigma: 1, Beta: 1, Children: 2},
		{Sigma: 2, Beta: 0.5, Children: 3},
		{Sigma: 0.7, Beta: 0.7, Children: 2},
	}
	for d := 1; d <= 3; d++ {
		for mi, m := range models {
			m.Dim = d
			for _, c := range []Cell{
				{Model: m, Horizon: 6},
				{Model: m, Horizon: 6, Observe: Observe{TopK: 3, Checkpoints: []float64{1, 2.5, 6}}},
				{Model: m, Horizon: 0.4},
			} {
				c = c.WithDefaults()
				fast, general := newWalker(c), newWalker(c)
				general.general = true
				for rep := uint64(0); rep < 12; rep++ {
					for _, split := range []struct {
						at       float64
						from, to uint64
					}{{0, 0, 1}, {0.3, 0, 1}, {0.3, 1, 3}} {
						name := fmt.Sprintf("d=%d model %d T=%v checkpoints %v rep %d split %v", d, mi, c.Horizon, c.Observe.Checkpoints, rep, split)
						a, errA := fast.run(5, rep, split.at, split.from, split.to)
						b, errB := general.run(5, rep, split.at, split.from, split.to)
						if (errA == nil) != (errB == nil) {
							t.Fatalf("%s: errors differ: %v, %v", name, errA, errB)
						}
						if errA != nil {
							continue // a range past the particles alive at the split time
						}
						if !bytes.Equal(a.AppendBinary(nil), b.AppendBinary(nil)) {
							t.Fatalf("%s: node3 and node give different parts", name)
						}
					}
				}
			}
		}
	}
}
