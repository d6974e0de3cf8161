package results

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"math/rand/v2"

	bolt "go.etcd.io/bbolt"

	"bbmx/engine"
)

// AuditReport is the outcome of re-simulating a sample of stored replicates.
type AuditReport struct {
	Checked    int
	Mismatches []Conflict // Inputs holds "stored" and "re-simulated"
	NoRecords  []string   // cells that keep no per-replicate records, so were not checked
}

// Audit re-simulates up to sample stored replicates per cell, chosen at random with the
// given seed (reservoir sampling over the records, so every stored replicate is equally
// likely), and compares their encodings bit for bit with what is stored. A stored record
// that is damaged (does not decode, holds NaN) is a mismatch like any other. A store that
// keeps no records at all is an error: there is nothing to re-simulate, and an audit of
// nothing must not read as passed.
func (s *Store) Audit(sample int, seed uint64) (AuditReport, error) {
	var rep AuditReport
	if err := s.CheckStream(); err != nil {
		return rep, err
	}
	ids, err := s.Cells()
	if err != nil {
		return rep, err
	}
	type item struct{ key, stored []byte }
	for _, id := range ids {
		c, _, err := s.CellSketch(id)
		if err != nil {
			return rep, err
		}
		r := rand.New(rand.NewPCG(seed, uint64(len(id))))
		var res []item
		n := 0
		kept := true
		// The raw bytes are sampled, not decoded records: what cannot be decoded is
		// reported as a mismatch instead of stopping the audit.
		err = s.view(func(tx *bolt.Tx) error {
			rb := tx.Bucket(bucketCells).Bucket([]byte(id)).Bucket(keyRecords)
			if rb == nil {
				kept = false
				return nil
			}
			return rb.ForEach(func(k, v []byte) error {
				if len(k) != 16 {
					return fmt.Errorf("cell %s: corrupt record key %x", id, k)
				}
				n++
				if len(res) < sample {
					res = append(res, item{bytes.Clone(k), bytes.Clone(v)})
				} else if j := r.IntN(n); j < sample {
					res[j] = item{bytes.Clone(k), bytes.Clone(v)}
				}
				return nil
			})
		})
		if err != nil {
			return rep, err
		}
		if !kept {
			rep.NoRecords = append(rep.NoRecords, id)
			continue
		}
		for _, it := range res {
			sd, rp := binary.BigEndian.Uint64(it.key), binary.BigEndian.Uint64(it.key[8:])
			again, err := engine.Simulate(c, sd, rp)
			if err != nil {
				return rep, fmt.Errorf("cell %s replicate %d: %w", id, rp, err)
			}
			rep.Checked++
			if !bytes.Equal(again.AppendBinary(nil), it.stored) {
				rep.Mismatches = append(rep.Mismatches, Conflict{CellID: id, Seed: sd, Rep: rp, Inputs: [2]string{"stored", "re-simulated"}})
			}
		}
	}
	if len(ids) > 0 && len(rep.NoRecords) == len(ids) {
		return rep, fmt.Errorf("%s keeps no per-replicate records (made with keep_records = false): there is nothing to re-simulate", s.path)
	}
	return rep, nil
}
