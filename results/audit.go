package results

import (
	"bytes"
	"fmt"
	"math/rand/v2"

	"bbmx/engine"
)

// AuditReport is the outcome of re-simulating a sample of stored replicates.
type AuditReport struct {
	Checked    int
	Mismatches []Conflict // Inputs holds "stored" and "re-simulated"
}

// Audit re-simulates up to sample stored replicates per cell, chosen at random with the
// given seed (reservoir sampling over the records, so every stored replicate is equally
// likely), and compares their encodings bit for bit with what is stored.
func (s *Store) Audit(sample int, seed uint64) (AuditReport, error) {
	var rep AuditReport
	if err := s.CheckStream(); err != nil {
		return rep, err
	}
	ids, err := s.Cells()
	if err != nil {
		return rep, err
	}
	type item struct {
		seed uint64
		rec  engine.Record
	}
	for _, id := range ids {
		c, _, err := s.CellSketch(id)
		if err != nil {
			return rep, err
		}
		r := rand.New(rand.NewPCG(seed, uint64(len(id))))
		var res []item
		n := 0
		err = s.Records(id, func(sd uint64, rec engine.Record) error {
			n++
			if len(res) < sample {
				res = append(res, item{sd, rec})
			} else if j := r.IntN(n); j < sample {
				res[j] = item{sd, rec}
			}
			return nil
		})
		if err != nil {
			return rep, err
		}
		for _, it := range res {
			again, err := engine.Simulate(c, it.seed, it.rec.Replicate)
			if err != nil {
				return rep, fmt.Errorf("cell %s replicate %d: %w", id, it.rec.Replicate, err)
			}
			rep.Checked++
			if !bytes.Equal(again.AppendBinary(nil), it.rec.AppendBinary(nil)) {
				rep.Mismatches = append(rep.Mismatches, Conflict{CellID: id, Seed: it.seed, Rep: it.rec.Replicate, Inputs: [2]string{"stored", "re-simulated"}})
			}
		}
	}
	return rep, nil
}
