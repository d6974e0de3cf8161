package results

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"os"
	"sort"
	"strings"
	"time"

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
//
// The merge streams: each cell's records are read from all inputs at once with cursors,
// in key order, so memory is bounded by one write batch, not by the stores' size. A
// first pass over the records finds conflicts before anything is written; the second
// writes the union.
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
	// Settings agree and every cell holds records, before anything is read in bulk.
	cells := map[string]engine.Cell{}
	cellJSON := map[string][]byte{}
	holders := map[string][]int{} // cell id -> inputs holding it, in input order
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
			holders[id] = append(holders[id], i)
		}
	}
	ids := make([]string, 0, len(cells))
	for id := range cells {
		ids = append(ids, id)
	}
	sort.Strings(ids)
	// First pass: every replicate held by several inputs must be the same record in all.
	var conflicts []Conflict
	for _, id := range ids {
		err := walkRecords(srcs, holders[id], id, func(k []byte, vals [][]byte, first int) error {
			for j, v := range vals {
				if v != nil && j != first && !bytes.Equal(v, vals[first]) {
					conflicts = append(conflicts, Conflict{CellID: id, Seed: binary.BigEndian.Uint64(k), Rep: binary.BigEndian.Uint64(k[8:]),
						Inputs: [2]string{inputs[holders[id][first]], inputs[holders[id][j]]}})
				}
			}
			return nil
		})
		if err != nil {
			return err
		}
	}
	if len(conflicts) > 0 {
		return &MergeError{Conflicts: conflicts}
	}
	dst, err := createForMerge(out, spec, srcs)
	if err != nil {
		return err
	}
	if err := writeMerged(dst, srcs, inputs, ids, holders, cells); err != nil {
		dst.Close()
		os.Remove(out)
		return err
	}
	return dst.Close()
}

// createForMerge creates the output store and reopens it with a memory map as large as
// the inputs together (an upper bound of the output), so bbolt does not remap, and copy
// every dirty page, each time the growing file outgrows the map.
func createForMerge(out string, spec []byte, srcs []*Store) (*Store, error) {
	dst, err := Create(out, spec)
	if err != nil {
		return nil, err
	}
	if err := dst.Close(); err != nil {
		os.Remove(out)
		return nil, err
	}
	var total int64
	for _, s := range srcs {
		if fi, err := os.Stat(s.path); err == nil {
			total += fi.Size()
		}
	}
	db, err := bolt.Open(out, 0o644, &bolt.Options{Timeout: 2 * time.Second, InitialMmapSize: int(min(total+total/8, 1<<40))})
	if err != nil {
		os.Remove(out)
		return nil, fmt.Errorf("create %s: %w", out, err)
	}
	return &Store{db: db, path: out}, nil
}

// walkRecords visits, in key order, every record key of cell id held by the inputs
// srcs[which[j]], calling fn with the key, the value from each of those inputs (nil
// where absent) and the first j holding it. Keys and values are valid only during fn.
func walkRecords(srcs []*Store, which []int, id string, fn func(k []byte, vals [][]byte, first int) error) error {
	txs := make([]*bolt.Tx, 0, len(which))
	defer func() {
		for _, tx := range txs {
			tx.Rollback()
		}
	}()
	curs := make([]*bolt.Cursor, len(which))
	keys := make([][]byte, len(which))
	vals := make([][]byte, len(which))
	for j, i := range which {
		tx, err := srcs[i].db.Begin(false)
		if err != nil {
			return err
		}
		txs = append(txs, tx)
		curs[j] = tx.Bucket(bucketCells).Bucket([]byte(id)).Bucket(keyRecords).Cursor()
		keys[j], vals[j] = curs[j].First()
	}
	at := make([][]byte, len(which))
	for {
		var min []byte
		for _, k := range keys {
			if k != nil && (min == nil || bytes.Compare(k, min) < 0) {
				min = k
			}
		}
		if min == nil {
			return nil
		}
		first := -1
		for j, k := range keys {
			at[j] = nil
			if k != nil && bytes.Equal(k, min) {
				at[j] = vals[j]
				if first < 0 {
					first = j
				}
			}
		}
		if len(min) != 16 {
			return fmt.Errorf("cell %s: corrupt record key %x", id, min)
		}
		if err := fn(min, at, first); err != nil {
			return err
		}
		for j := range keys {
			if at[j] != nil {
				keys[j], vals[j] = curs[j].Next()
			}
		}
	}
}

var bucketProvenance = []byte("provenance")

// mergeBatchBytes bounds the record bytes written per transaction of a merge (a
// variable so tests can make batches small and cross their boundaries).
var mergeBatchBytes = 32 << 20

// runRecords is how many consecutive decoded records are added to a sketch at once.
const runRecords = 4096

// writeMerged writes every record into dst in (cell, seed, replicate) order, committing in
// batches of about mergeBatchBytes; each cell's sketch is built from its records as they
// stream past and written with the cell's last batch.
func writeMerged(dst *Store, srcs []*Store, inputs, ids []string, holders map[string][]int, cells map[string]engine.Cell) error {
	prov := map[string]map[string][]Range{} // input -> cell -> ranges
	// dst.db.NoSync: the batches are not synced one by one; the file is synced once at the
	// end. A crash mid-merge leaves an unusable output either way (the caller merges again);
	// the inputs are only read.
	dst.db.NoSync = true
	defer func() { dst.db.NoSync = false }()
	for _, id := range ids {
		c := cells[id].WithDefaults()
		cj, _ := json.Marshal(c)
		sk := NewSketch(c)
		var (
			keys, vals []byte // the pending batch: 16-byte keys and concatenated values
			ends       []int  // end of each value in vals
			run        []engine.Record
			runSeed    uint64
			written    int
		)
		addRun := func() error {
			if len(run) == 0 {
				return nil
			}
			if err := sk.AddRecords(c, runSeed, run[0].Replicate, run); err != nil {
				return fmt.Errorf("cell %s: %w", id, err)
			}
			run = run[:0]
			return nil
		}
		flush := func(last bool) error {
			if last {
				if err := addRun(); err != nil {
					return err
				}
			}
			err := dst.db.Update(func(tx *bolt.Tx) error {
				cb, err := tx.Bucket(bucketCells).CreateBucketIfNotExists([]byte(id))
				if err != nil {
					return err
				}
				rb, err := cb.CreateBucketIfNotExists(keyRecords)
				if err != nil {
					return err
				}
				// Keys arrive in increasing order: full pages instead of half-full splits.
				rb.FillPercent = 1
				start := 0
				for n, end := range ends {
					if err := rb.Put(keys[16*n:16*n+16], vals[start:end]); err != nil {
						return err
					}
					start = end
				}
				if !last {
					return nil
				}
				if err := cb.Put([]byte("cell"), cj); err != nil {
					return err
				}
				return cb.Put([]byte("sketch"), sk.AppendBinary(nil))
			})
			keys, vals, ends = keys[:0], vals[:0], ends[:0]
			return err
		}
		err := walkRecords(srcs, holders[id], id, func(k []byte, vs [][]byte, first int) error {
			in := inputs[holders[id][first]]
			v := vs[first]
			seed, rep := binary.BigEndian.Uint64(k[:8]), binary.BigEndian.Uint64(k[8:])
			rec, _, err := engine.DecodeRecord(v)
			if err != nil {
				return fmt.Errorf("%s: cell %s replicate %d: %w", in, id, rep, err)
			}
			if rec.Replicate != rep {
				return fmt.Errorf("%s: cell %s: record under key %x is replicate %d", in, id, k, rec.Replicate)
			}
			if n := len(run); n > 0 && (runSeed != seed || run[n-1].Replicate+1 != rep || n == runRecords) {
				if err := addRun(); err != nil {
					return err
				}
			}
			runSeed = seed
			run = append(run, rec)
			keys = append(keys, k...)
			vals = append(vals, v...)
			ends = append(ends, len(vals))
			written++
			if len(vals) >= mergeBatchBytes {
				if err := flush(false); err != nil {
					return err
				}
			}
			pm := prov[in]
			if pm == nil {
				pm = map[string][]Range{}
				prov[in] = pm
			}
			rs := pm[id]
			if n := len(rs); n > 0 && rs[n-1].Seed == seed && rs[n-1].To == rep {
				rs[n-1].To++
			} else {
				rs = append(rs, Range{Seed: seed, From: rep, To: rep + 1})
			}
			pm[id] = rs
			return nil
		})
		if err != nil {
			return err
		}
		if written > 0 {
			if err := flush(true); err != nil {
				return err
			}
		}
	}
	err := dst.db.Update(func(tx *bolt.Tx) error {
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
	if err != nil {
		return err
	}
	return dst.db.Sync()
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
