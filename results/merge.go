package results

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"os"
	"sort"
	"strings"

	bolt "go.etcd.io/bbolt"

	"bbmx/engine"
)

// Conflict is one replicate present in two inputs with different records.
type Conflict struct {
	CellID    string
	Seed, Rep uint64
	Inputs    [2]string
}

// MergeError lists every conflicting overlap found; the output is not written.
type MergeError struct{ Conflicts []Conflict }

func (e *MergeError) Error() string {
	var b strings.Builder
	fmt.Fprintf(&b, "%d replicate(s) differ between inputs, nothing written:", len(e.Conflicts))
	for i, c := range e.Conflicts {
		if i == 10 {
			fmt.Fprintf(&b, " ... and %d more", len(e.Conflicts)-10)
			break
		}
		fmt.Fprintf(&b, " cell %s seed %d replicate %d (%s vs %s);", c.CellID, c.Seed, c.Rep, c.Inputs[0], c.Inputs[1])
	}
	return b.String()
}

// MergeStores merges the stores at inputs into a new store at out. Inputs are opened
// read-only and never modified. Cells with the same id must have identical settings
// (same model and observables); the engine format is checked when each input opens.
// Replicates are keyed by (seed, replicate): disjoint ones are unioned, identical
// overlaps kept once, differing overlaps refused with a report. The output's sketches
// are rebuilt from the merged records, so they do not depend on the order of inputs.
// The provenance bucket records which input gave which replicate ranges.
func MergeStores(out string, inputs []string) error {
	if len(inputs) == 0 {
		return fmt.Errorf("no input stores")
	}
	srcs := make([]*Store, 0, len(inputs))
	defer func() {
		for _, s := range srcs {
			s.Close()
		}
	}()
	for _, p := range inputs {
		s, err := Open(p, true)
		if err != nil {
			return err
		}
		srcs = append(srcs, s)
	}
	spec, _, err := srcs[0].Spec()
	if err != nil {
		return err
	}
	// First pass: settings agree, and find conflicts, before anything is written.
	cells := map[string]engine.Cell{}
	cellJSON := map[string][]byte{}
	seen := map[string]map[[16]byte]origin{}
	var conflicts []Conflict
	for i, s := range srcs {
		ids, err := s.Cells()
		if err != nil {
			return err
		}
		for _, id := range ids {
			var cj []byte
			var hasRecords bool
			s.db.View(func(tx *bolt.Tx) error {
				cb := tx.Bucket(bucketCells).Bucket([]byte(id))
				cj = bytes.Clone(cb.Get([]byte("cell")))
				hasRecords = cb.Bucket(keyRecords) != nil
				return nil
			})
			if prev, ok := cellJSON[id]; ok && !bytes.Equal(prev, cj) {
				return fmt.Errorf("cell %s has different settings in %s and %s (model or observables differ): refusing to merge", id, inputs[0], inputs[i])
			}
			c, _, err := s.CellSketch(id)
			if err != nil {
				return fmt.Errorf("%s: %w", inputs[i], err)
			}
			if !hasRecords {
				return fmt.Errorf("%s: cell %s holds no per-replicate records, which merging needs to check overlaps", inputs[i], id)
			}
			cellJSON[id], cells[id] = cj, c
			if seen[id] == nil {
				seen[id] = map[[16]byte]origin{}
			}
			err = s.db.View(func(tx *bolt.Tx) error {
				return tx.Bucket(bucketCells).Bucket([]byte(id)).Bucket(keyRecords).ForEach(func(k, v []byte) error {
					var kk [16]byte
					copy(kk[:], k)
					if o, ok := seen[id][kk]; ok {
						if !bytes.Equal(o.data, v) {
							conflicts = append(conflicts, Conflict{CellID: id, Seed: binary.BigEndian.Uint64(k), Rep: binary.BigEndian.Uint64(k[8:]), Inputs: [2]string{inputs[o.input], inputs[i]}})
						}
						return nil
					}
					seen[id][kk] = origin{i, bytes.Clone(v)}
					return nil
				})
			})
			if err != nil {
				return err
			}
		}
	}
	if len(conflicts) > 0 {
		return &MergeError{Conflicts: conflicts}
	}
	dst, err := Create(out, spec)
	if err != nil {
		return err
	}
	if err := writeMerged(dst, inputs, cells, seen); err != nil {
		dst.Close()
		os.Remove(out)
		return err
	}
	return dst.Close()
}

// origin is where a replicate's record came from during a merge.
type origin struct {
	input int
	data  []byte
}

var bucketProvenance = []byte("provenance")

// writeMerged writes every record into dst in (cell, seed, replicate) order, in runs of
// consecutive replicates, committing in batches; the sketches follow from the records.
func writeMerged(dst *Store, inputs []string, cells map[string]engine.Cell, seen map[string]map[[16]byte]origin) error {
	ids := make([]string, 0, len(cells))
	for id := range cells {
		ids = append(ids, id)
	}
	sort.Strings(ids)
	prov := map[string]map[string][]Range{} // input -> cell -> ranges
	const batchRecords = 20000
	var batch []TaskResult
	pending := 0
	flush := func() error {
		if len(batch) == 0 {
			return nil
		}
		err := dst.Commit(batch, nil)
		batch, pending = nil, 0
		return err
	}
	for _, id := range ids {
		c := cells[id]
		cur := -1 // index in batch of the run being filled
		for _, k := range keysSorted(seen[id]) {
			o := seen[id][k]
			seed, rep := binary.BigEndian.Uint64(k[:8]), binary.BigEndian.Uint64(k[8:])
			rec, _, err := engine.DecodeRecord(o.data)
			if err != nil {
				return fmt.Errorf("%s: cell %s replicate %d: %w", inputs[o.input], id, rep, err)
			}
			if pending >= batchRecords {
				if err := flush(); err != nil {
					return err
				}
				cur = -1
			}
			if cur < 0 || batch[cur].Seed != seed || batch[cur].From+uint64(len(batch[cur].Records)) != rep {
				batch = append(batch, TaskResult{CellID: id, Cell: c, Seed: seed, From: rep, KeepRecords: true})
				cur = len(batch) - 1
			}
			batch[cur].Records = append(batch[cur].Records, rec)
			pending++
			pm := prov[inputs[o.input]]
			if pm == nil {
				pm = map[string][]Range{}
				prov[inputs[o.input]] = pm
			}
			rs := pm[id]
			if n := len(rs); n > 0 && rs[n-1].Seed == seed && rs[n-1].To == rep {
				rs[n-1].To++
			} else {
				rs = append(rs, Range{Seed: seed, From: rep, To: rep + 1})
			}
			pm[id] = rs
		}
	}
	if err := flush(); err != nil {
		return err
	}
	return dst.db.Update(func(tx *bolt.Tx) error {
		b, err := tx.CreateBucketIfNotExists(bucketProvenance)
		if err != nil {
			return err
		}
		for in, m := range prov {
			j, _ := json.Marshal(m)
			if err := b.Put([]byte(in), j); err != nil {
				return err
			}
		}
		return nil
	})
}

// Provenance returns, for a merged store, which input gave which replicate ranges per cell.
func (s *Store) Provenance() (map[string]map[string][]Range, error) {
	out := map[string]map[string][]Range{}
	err := s.db.View(func(tx *bolt.Tx) error {
		b := tx.Bucket(bucketProvenance)
		if b == nil {
			return nil
		}
		return b.ForEach(func(k, v []byte) error {
			m := map[string][]Range{}
			if err := json.Unmarshal(v, &m); err != nil {
				return fmt.Errorf("corrupt provenance for %s: %w", k, err)
			}
			out[string(k)] = m
			return nil
		})
	})
	return out, err
}

// keysSorted returns the map's keys in byte order: (seed, replicate) big endian.
func keysSorted[V any](m map[[16]byte]V) [][16]byte {
	ks := make([][16]byte, 0, len(m))
	for k := range m {
		ks = append(ks, k)
	}
	sort.Slice(ks, func(i, j int) bool { return bytes.Compare(ks[i][:], ks[j][:]) < 0 })
	return ks
}
