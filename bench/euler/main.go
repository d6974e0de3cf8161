// Command euler is a comparison baseline only: a naive time-stepped simulation of BBM
// (Euler steps of size dt over a slice of particles, branching with probability beta dt
// per step), timed against the exact engine on the same cell. It is not used by bbmx.
//
//	go run ./bench/euler --dim 3 --horizon 10 --replicates 3
package main

import (
	"flag"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"time"

	"bbmx/engine"
)

func euler(d int, horizon, dt float64, r *rand.Rand) (maxR float64, n int) {
	pos := make([]float64, d) // flat: particle i at pos[i*d:(i+1)*d]
	sd := math.Sqrt(dt)
	steps := int(math.Round(horizon / dt))
	for s := 0; s < steps; s++ {
		cur := len(pos) / d
		for i := 0; i < cur; i++ {
			p := pos[i*d : (i+1)*d]
			for j := range p {
				p[j] += sd * r.NormFloat64()
			}
			if r.Float64() < dt {
				pos = append(pos, pos[i*d:(i+1)*d]...)
			}
		}
	}
	n = len(pos) / d
	for i := 0; i < n; i++ {
		var rr float64
		for _, x := range pos[i*d : (i+1)*d] {
			rr += x * x
		}
		maxR = max(maxR, math.Sqrt(rr))
	}
	return maxR, n
}

func main() {
	d := flag.Int("dim", 3, "dimension")
	horizon := flag.Float64("horizon", 10, "horizon T")
	dt := flag.Float64("dt", 0.01, "Euler time step")
	reps := flag.Int("replicates", 3, "replicates of each method")
	flag.Parse()
	r := rand.New(rand.NewPCG(1, 2))
	cell := engine.Cell{Model: engine.Model{Dim: *d, Sigma: 1, Beta: 1, Children: 2}, Horizon: *horizon}
	// The two methods take turns, one replicate each, so that a change in the machine's
	// load during the run falls on both alike.
	var te, tx float64
	var eulerN int
	var exactN uint64
	for i := 0; i < *reps; i++ {
		start := time.Now()
		_, n := euler(*d, *horizon, *dt, r)
		te += time.Since(start).Seconds()
		eulerN += n
		start = time.Now()
		rec, err := engine.Simulate(cell, 1, uint64(i))
		tx += time.Since(start).Seconds()
		if err != nil {
			fmt.Fprintln(os.Stderr, err)
			os.Exit(1)
		}
		exactN += rec.Population
	}
	te /= float64(*reps)
	tx /= float64(*reps)
	// N_T varies a lot between replicates, so compare time per final particle as well.
	pe := te / (float64(eulerN) / float64(*reps))
	px := tx / (float64(exactN) / float64(*reps))
	fmt.Printf("d=%d T=%g: euler(dt=%g) %.4fs/replicate (mean N %.0f), exact %.4fs/replicate (mean N %.0f)\n",
		*d, *horizon, *dt, te, float64(eulerN)/float64(*reps), tx, float64(exactN)/float64(*reps))
	fmt.Printf("exact is %.1fx faster per replicate, %.1fx per final particle\n", te/tx, pe/px)
}
