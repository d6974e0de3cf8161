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
	// One engine's replicates only: a store's stream version says which bits its
	// replicates have, and the output keeps it.
	stream, err := srcs[0].Stream()
	if err != nil {
		return err
	}
	for i, s := range srcs[1:] {
		v, err := s.Stream()
		if err != nil {
			return err
		}
		if v != stream {
			return fmt.Errorf("%s holds replicates of random stream %d and %s of stream %d: merge stores made by the same engine version",
				inputs[0], stream, inputs[i+1], v)
		}
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
			var kept int
			err := s.view(func(tx *bolt.Tx) error {
				cb := tx.Bucket(bucketCells).Bucket([]byte(id))
				cj = bytes.Clone(cb.Get([]byte("cell")))
				if rb := cb.Bucket(keyRecords); rb != nil {
					kept = rb.Stats().KeyN
				}
				return nil
			})
			if err != nil {
				return err
			}
			if prev, ok := cellJSON[id]; ok && !bytes.Equal(prev, cj) {
				return fmt.Errorf("cell %s has different settings in %s and %s (model or observables differ): refusing to merge", id, inputs[holders[id][0]], inputs[i])
			}
			c, sk, err := s.CellSketch(id)
			if err != nil {
				return fmt.Errorf("%s: %w", inputs[i], err)
			}
			if kept == 0 {
				return fmt.Errorf("%s: cell %s holds no per-replicate records, which merging needs to check overlaps", inputs[i], id)
			}
			// The output's sketches are rebuilt from records, so a replicate counted in the
			// sketch without its record (a store kept records for only some of its tasks)
			// would vanish from the merge.
			if uint64(kept) != sk.N {
				return fmt.Errorf("%s: cell %s holds %d replicates but the records of only %d; merging rebuilds cells from records and would lose the rest",
					inputs[i], id, sk.N, kept)
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
		if len(holders[id]) < 2 {
			continue // one holder: nothing to conflict with (its records are read once, when written)
		}
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
	// The output is built under a temporary name and renamed when complete, so a merge
	// killed half way never leaves a store at out (its batches are not synced one by one).
	if _, err := os.Stat(out); err == nil {
		return fmt.Errorf("%s already exists", out)
	}
	tmp := out + ".merging"
	if fi, err := os.Stat(tmp); err == nil {
		// Left by a merge that was killed, unless it is one of this merge's inputs.
		for _, p := range inputs {
			if pi, err := os.Stat(p); err == nil && os.SameFile(fi, pi) {
				return fmt.Errorf("input %s is where the merge builds %s before renaming it: rename that input or choose another output", p, out)
			}
		}
		if err := os.Remove(tmp); err != nil {
			return fmt.Errorf("remove %s left by an earlier merge: %w", tmp, err)
		}
	}
	dst, err := createForMerge(tmp, spec, stream, srcs)
	if err != nil {
		return err
	}
	if err := writeMerged(dst, srcs, inputs, ids, holders, cells); err != nil {
		dst.Close()
		os.Remove(tmp)
		return err
	}
	if err := dst.Close(); err != nil {
		os.Remove(tmp)
		return err
	}
	return os.Rename(tmp, out)
}

// createForMerge creates the output store with a memory map as large as the inputs
// together (an upper bound of the output), so bbolt does not remap, and copy every dirty
// page, each time the growing file outgrows the map.
func createForMerge(out string, spec []byte, stream int, srcs []*Store) (*Store, error) {
	var total int64
	for _, s := range srcs {
		if fi, err := os.Stat(s.path); err == nil {
			total += fi.Size()
		}
	}
	return create(out, spec, stream, int(min(total+total/8, 1<<40)))
}

// walkRecords visits, in key order, every record key of cell id held by the inputs
// srcs[which[j]], calling fn with the key, the value from each of those inputs (nil
// where absent) and the first j holding it. Keys and values are valid only during fn.
func walkRecords(srcs []*Store, which []int, id string, fn func(k []byte, vals [][]byte, first int) error) error {
	names := make([]string, len(which))
	for j, i := range which {
		names[j] = srcs[i].path
	}
	g := damageGuard{what: "cell " + id + " of " + strings.Join(names, " or ")}
	return g.run(func() error { return walkRecordsUnguarded(srcs, which, id, fn) })
}

func walkRecordsUnguarded(srcs []*Store, which []int, id string, fn func(k []byte, vals [][]byte, first int) error) error {
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
var mergeBatchBytes = 16 << 20

// runRecords is how many consecutive decoded records are added to a sketch at once.
const runRecords = 4096

// mergeBatch is a run of records in key order, copied out of the inputs: 16-byte keys,
// concatenated values ending at ends[i], and the input each came from.
type mergeBatch struct {
	keys, vals []byte
	ends       []int
	src        []int
	last       bool // the cell's last batch: its sketch is due
}

// reset empties b for reuse, keeping its storage.
func (b *mergeBatch) reset() *mergeBatch {
	b.keys, b.vals, b.ends, b.src, b.last = b.keys[:0], b.vals[:0], b.ends[:0], b.src[:0], false
	return b
}

func (b *mergeBatch) value(i int) []byte {
	start := 0
	if i > 0 {
		start = b.ends[i-1]
	}
	return b.vals[start:b.ends[i]]
}

// cellSketcher builds one cell's sketch from the batches sent to it, decoding records
// into a reused run; it runs beside the writer, so decoding overlaps the bbolt writes.
// Each batch goes back to free when done; after a last batch the sketch (or the first
// error) is sent on done.
func cellSketcher(c engine.Cell, id string, inputs []string, in <-chan *mergeBatch, free chan<- *mergeBatch, done chan<- any) {
	sk := NewSketch(c)
	run := make([]engine.Record, 0, runRecords)
	var runSeed uint64
	var failed error
	addRun := func() {
		if len(run) > 0 && failed == nil {
			if err := sk.AddRecords(c, runSeed, run[0].Replicate, run); err != nil {
				failed = fmt.Errorf("cell %s: %w", id, err)
			}
		}
		run = run[:0]
	}
	for b := range in {
		for i := 0; i < len(b.ends) && failed == nil; i++ {
			k := b.keys[16*i : 16*i+16]
			seed, rep := binary.BigEndian.Uint64(k[:8]), binary.BigEndian.Uint64(k[8:])
			if n := len(run); n > 0 && (runSeed != seed || run[n-1].Replicate+1 != rep || n == runRecords) {
				addRun()
			}
			runSeed = seed
			// Decode into the run's spare records: their buffers are reused, run after run.
			run = run[:len(run)+1]
			rec := &run[len(run)-1]
			if _, err := engine.DecodeRecordInto(rec, b.value(i)); err != nil {
				failed = fmt.Errorf("%s: cell %s replicate %d: %w", inputs[b.src[i]], id, rep, err)
			} else if rec.Replicate != rep {
				failed = fmt.Errorf("%s: cell %s: record under key %x is replicate %d", inputs[b.src[i]], id, k, rec.Replicate)
			} else if err := checkFinite(rec); err != nil {
				failed = fmt.Errorf("%s: cell %s: %w: %w", inputs[b.src[i]], id, engine.ErrCorruptRecord, err)
			}
		}
		last := b.last
		free <- b
		if last {
			addRun()
			if failed != nil {
				done <- failed
			} else {
				done <- sk
			}
		}
	}
}

// writeMerged writes every record into dst in (cell, seed, replicate) order, committing in
// batches of about mergeBatchBytes; each cell's sketch is built from its records as they
// stream past (in a second goroutine) and written with the cell's last batch.
func writeMerged(dst *Store, srcs []*Store, inputs, ids []string, holders map[string][]int, cells map[string]engine.Cell) error {
	prov := map[string]map[string][]Range{} // input -> cell -> ranges
	// dst.db.NoSync: the batches are not synced one by one; the file is synced once at the
	// end. A crash mid-merge leaves an unusable output either way (the caller merges again);
	// the inputs are only read.
	dst.db.NoSync = true
	defer func() { dst.db.NoSync = false }()
	// Two batch buffers: the walker fills one while the sketcher decodes the other. A
	// buffer returns to free only once the sketcher is done with it; the writer has then
	// committed it too, since it commits a batch before taking the next buffer.
	free := make(chan *mergeBatch, 2)
	free <- &mergeBatch{}
	free <- &mergeBatch{}
	for _, id := range ids {
		c := cells[id].WithDefaults()
		cj, _ := json.Marshal(c)
		toSketch := make(chan *mergeBatch, 2)
		done := make(chan any, 1)
		go cellSketcher(c, id, inputs, toSketch, free, done)
		b := (<-free).reset()
		written := false
		flush := func(last bool) error {
			b.last = last
			toSketch <- b
			var sketch []byte
			err := dst.update(func(tx *bolt.Tx) error {
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
				for i := range b.ends {
					if err := rb.Put(b.keys[16*i:16*i+16], b.value(i)); err != nil {
						return err
					}
				}
				if !last {
					return nil
				}
				switch r := (<-done).(type) {
				case error:
					return r
				case *Sketch:
					sketch = r.AppendBinary(nil)
				}
				if err := cb.Put([]byte("cell"), cj); err != nil {
					return err
				}
				return cb.Put([]byte("sketch"), sketch)
			})
			if err != nil {
				return err
			}
			if !last {
				b = (<-free).reset()
			}
			return nil
		}
		err := walkRecords(srcs, holders[id], id, func(k []byte, vs [][]byte, first int) error {
			src := holders[id][first]
			b.keys = append(b.keys, k...)
			b.vals = append(b.vals, vs[first]...)
			b.ends = append(b.ends, len(b.vals))
			b.src = append(b.src, src)
			written = true
			if len(b.vals) >= mergeBatchBytes {
				if err := flush(false); err != nil {
					return err
				}
			}
			seed, rep := binary.BigEndian.Uint64(k[:8]), binary.BigEndian.Uint64(k[8:])
			pm := prov[inputs[src]]
			if pm == nil {
				pm = map[string][]Range{}
				prov[inputs[src]] = pm
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
		if err == nil && written {
			err = flush(true)
		} else if err == nil {
			free <- b // a cell without records is not written
		}
		close(toSketch)
		if err != nil {
			return err
		}
	}
	err := dst.update(func(tx *bolt.Tx) error {
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
	err := s.view(func(tx *bolt.Tx) error {
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
