// Command walk walks replicates of one cell with the engine and prints the number of
// tree nodes walked, and nothing else: a fixed workload for counting instructions and
// mispredicted branches per node under a simulator such as valgrind's cachegrind, where
// timings mean nothing.
//
//	go build -o /tmp/walk ./bench/walk
//	GOMAXPROCS=1 GOGC=off valgrind --tool=cachegrind --cache-sim=no --branch-sim=yes /tmp/walk --dim 1
//
// Instructions per node are cachegrind's I refs over the nodes printed (binary
// branching: a tree with N leaves has 2N - 1 nodes).
package main

import (
	"flag"
	"fmt"
	"os"

	"bbmx/engine"
)

func main() {
	dim := flag.Int("dim", 1, "dimension d (>= 1)")
	horizon := flag.Float64("horizon", 10, "horizon T (> 0)")
	replicates := flag.Int("replicates", 100, "replicates to walk")
	seed := flag.Uint64("seed", 1, "seed")
	flag.Parse()
	c := engine.Cell{Model: engine.Model{Dim: *dim, Sigma: 1, Beta: 1, Children: 2}, Horizon: *horizon}.WithDefaults()
	if err := c.Validate(); err != nil {
		fmt.Fprintln(os.Stderr, "walk:", err)
		os.Exit(2)
	}
	var nodes uint64
	for r := range *replicates {
		rec, err := engine.Simulate(c, *seed, uint64(r))
		if err != nil {
			fmt.Fprintln(os.Stderr, "walk:", err)
			os.Exit(1)
		}
		nodes += 2*rec.Population - 1
	}
	fmt.Println("nodes", nodes)
}
