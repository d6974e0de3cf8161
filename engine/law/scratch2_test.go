package law

import (
	"encoding/json"
	"fmt"
	"os"
	"testing"
	"time"

	"bbmx/engine"
)

func TestScratchCollect(t *testing.T) {
	ts := []float64{25, 35, 50, 70, 100, 140, 200, 280, 400}
	type rec struct {
		D          int
		T, M, E, S float64
	}
	var jobs []rec
	for d := 1; d <= 4; d++ {
		for _, T := range ts {
			jobs = append(jobs, rec{D: d, T: T})
		}
	}
	parallel(len(jobs), 2, func(i int) error {
		st := time.Now()
		m := engine.Model{Dim: jobs[i].D, Sigma: 1, Beta: 1, Children: 2}
		r, e, err := Quantile(m, jobs[i].T, 0.5, Options{Tolerance: 1e-3, Threads: 1})
		if err != nil {
			t.Error(err)
		}
		jobs[i].M, jobs[i].E, jobs[i].S = r, e, time.Since(st).Seconds()
		fmt.Println(jobs[i])
		return nil
	})
	b, _ := json.Marshal(jobs)
	os.WriteFile("/tmp/medians.json", b, 0o644)
}
