package results

import (
	"bytes"
	"crypto/sha256"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"time"

	bolt "go.etcd.io/bbolt"

	"bbmx/engine"
)

// Store layout (bbolt), format "bbmx-store/1":
//
//	meta/format         "bbmx-store/1"
//	meta/engine         engine.FormatVersion (the record encoding), one byte
//	meta/stream         engine.StreamVersion of the engine that simulated the records, one
//	                    byte; absent in stores made before it was recorded, which are 1
//	meta/spec           the canonical sweep spec (opaque bytes, written by the planner)
//	meta/spec_sha256    SHA-256 of meta/spec: the sweep's identity
//	cells/<cell id>/cell      the engine.Cell as JSON
//	cells/<cell id>/sketch    the cell's Sketch encoding
//	cells/<cell id>/records/  key seed(8 bytes BE) ++ replicate(8 bytes BE) -> record encoding
//	provenance/...      which input store gave which ranges (written by merge)
//	coordinator/...     the coordinator's task states and pending subtree parts (see
//	                    package coordinator); never part of the content digest
//
// Every write is one bbolt transaction, so a crash leaves the store as of the last commit:
// a cell's sketch and its records always change together.
const storeFormat = "bbmx-store/1"

var (
	bucketMeta  = []byte("meta")
	bucketCells = []byte("cells")
	keyRecords  = []byte("records")
)

// Store is one sweep's results file.
type Store struct {
	db   *bolt.DB
	path string
}

// Create makes a new store at path holding the given canonical sweep spec. It refuses to
// overwrite an existing file.
func Create(path string, spec []byte) (*Store, error) {
	return create(path, spec, engine.StreamVersion, 0)
}

// create is Create for records of the given random-stream version (a merge's output
// takes its inputs'), with bbolt's memory map made mmapSize bytes at once when that is
// above zero (so a store known to grow large is not remapped again and again).
func create(path string, spec []byte, stream int, mmapSize int) (*Store, error) {
	// The file is made here, exclusively, before bbolt opens it: of several processes
	// creating one store at once, exactly one gets past this, and only that one may
	// remove the file if setting it up fails (a loser that opened the winner's store
	// would otherwise fail to set it up and delete it).
	f, err := os.OpenFile(path, os.O_RDWR|os.O_CREATE|os.O_EXCL, 0o644)
	if errors.Is(err, fs.ErrExist) {
		return nil, fmt.Errorf("%s already exists", path)
	}
	if err != nil {
		return nil, fmt.Errorf("create %s: %w", path, err)
	}
	f.Close()
	db, err := bolt.Open(path, 0o644, &bolt.Options{Timeout: 2 * time.Second, InitialMmapSize: mmapSize})
	if err != nil {
		os.Remove(path)
		return nil, fmt.Errorf("create %s: %w", path, err)
	}
	sum := sha256.Sum256(spec)
	err = db.Update(func(tx *bolt.Tx) error {
		m, err := tx.CreateBucket(bucketMeta)
		if err != nil {
			return err
		}
		for k, v := range map[string][]byte{"format": []byte(storeFormat), "engine": {engine.FormatVersion},
			"stream": {byte(stream)}, "spec": spec, "spec_sha256": sum[:]} {
			if err := m.Put([]byte(k), v); err != nil {
				return err
			}
		}
		_, err = tx.CreateBucket(bucketCells)
		return err
	})
	if err != nil {
		db.Close()
		os.Remove(path)
		return nil, err
	}
	return &Store{db: db, path: path}, nil
}

// OpenOrCreate opens the store at path for writing, or creates it (and its folder) with
// the given spec if there is no file there; created says which.
func OpenOrCreate(path string, spec []byte) (st *Store, created bool, err error) {
	st, err = Open(path, false)
	if !errors.Is(err, fs.ErrNotExist) {
		return st, false, err
	}
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		return nil, false, err
	}
	st, err = Create(path, spec)
	return st, err == nil, err
}

// Open opens an existing store; readOnly allows many readers at once. A file that is not
// a bbmx store, or one written by another format version, is a clear error.
func Open(path string, readOnly bool) (*Store, error) {
	if _, err := os.Stat(path); err != nil {
		return nil, fmt.Errorf("open store: %w", err)
	}
	if err := preflight(path); err != nil {
		return nil, err
	}
	var db *bolt.DB
	g := damageGuard{what: path}
	err := g.run(func() error {
		var err error
		db, err = bolt.Open(path, 0o644, &bolt.Options{Timeout: 2 * time.Second, ReadOnly: readOnly})
		if err != nil {
			if errors.Is(err, bolt.ErrTimeout) {
				return fmt.Errorf("%s is in use by another process", path)
			}
			return fmt.Errorf("%s is not a readable bbmx store: %w", path, err)
		}
		return db.View(func(tx *bolt.Tx) error {
			m := tx.Bucket(bucketMeta)
			if m == nil || tx.Bucket(bucketCells) == nil {
				return fmt.Errorf("%s is a bbolt file but not a bbmx store", path)
			}
			if f := m.Get([]byte("format")); string(f) != storeFormat {
				return fmt.Errorf("%s has store format %q; this bbmx reads %q", path, f, storeFormat)
			}
			if e := m.Get([]byte("engine")); len(e) != 1 || e[0] != engine.FormatVersion {
				return fmt.Errorf("%s holds records of engine format %v; this bbmx writes %d", path, e, engine.FormatVersion)
			}
			return nil
		})
	})
	if err != nil {
		if db != nil {
			db.Close()
		}
		return nil, err
	}
	return &Store{db: db, path: path}, nil
}

// Close closes the store.
func (s *Store) Close() error { return s.db.Close() }

// Stream returns the random-stream version (engine.StreamVersion) of the engine that
// simulated the store's records.
func (s *Store) Stream() (int, error) {
	v := 1 // stores from before the version was recorded
	err := s.view(func(tx *bolt.Tx) error {
		if b := tx.Bucket(bucketMeta).Get([]byte("stream")); b != nil {
			if len(b) != 1 || b[0] == 0 {
				return fmt.Errorf("%s: meta/stream is %v, not a stream version", s.path, b)
			}
			v = int(b[0])
		}
		return nil
	})
	return v, err
}

// CheckStream returns an error unless this engine would simulate the store's replicates
// bit for bit: what growing, resuming and auditing need. Reading (show, report, export)
// needs no check.
func (s *Store) CheckStream() error {
	v, err := s.Stream()
	if err != nil {
		return err
	}
	if v != engine.StreamVersion {
		return fmt.Errorf("%s was simulated by an engine with random stream %d; this bbmx's engine uses stream %d, so "+
			"the same replicates would come out different. Read it (show, report, export) with this bbmx, but resume, "+
			"grow or audit it with the bbmx that made it, or start a new store", s.path, v, engine.StreamVersion)
	}
	return nil
}

// Spec returns the canonical sweep spec and its SHA-256.
func (s *Store) Spec() (spec []byte, sum [32]byte, err error) {
	err = s.view(func(tx *bolt.Tx) error {
		m := tx.Bucket(bucketMeta)
		spec = bytes.Clone(m.Get([]byte("spec")))
		copy(sum[:], m.Get([]byte("spec_sha256")))
		return nil
	})
	return spec, sum, err
}

// SetSpec replaces the canonical sweep spec (a sweep that grew: more replicates, cells).
// The caller checks that the new spec may continue the store.
func (s *Store) SetSpec(spec []byte) error {
	sum := sha256.Sum256(spec)
	return s.update(func(tx *bolt.Tx) error {
		m := tx.Bucket(bucketMeta)
		if err := m.Put([]byte("spec"), spec); err != nil {
			return err
		}
		return m.Put([]byte("spec_sha256"), sum[:])
	})
}

// Update runs fn in a read-write transaction: for a caller's own buckets (the
// coordinator's task states), never the cells, which only Commit writes.
func (s *Store) Update(fn func(tx *bolt.Tx) error) error { return s.db.Update(fn) }

// View runs fn in a read-only transaction.
func (s *Store) View(fn func(tx *bolt.Tx) error) error { return s.db.View(fn) }

// Path is the store's file name.
func (s *Store) Path() string { return s.path }

// ContentDigest is the SHA-256 of what the store holds as results: every cell's id,
// settings, sketch and records, in key order. Two stores with equal digests hold the
// same results bit for bit, however they were made (one process, many workers, shards
// merged afterwards); the spec, provenance and coordinator state are left out.
func (s *Store) ContentDigest() ([32]byte, error) {
	h := sha256.New()
	put := func(b []byte) {
		var n [8]byte
		binary.BigEndian.PutUint64(n[:], uint64(len(b)))
		h.Write(n[:])
		h.Write(b)
	}
	err := s.view(func(tx *bolt.Tx) error {
		return tx.Bucket(bucketCells).ForEachBucket(func(id []byte) error {
			cb := tx.Bucket(bucketCells).Bucket(id)
			put(id)
			put(cb.Get([]byte("cell")))
			put(cb.Get([]byte("sketch")))
			if rb := cb.Bucket(keyRecords); rb != nil {
				return rb.ForEach(func(k, v []byte) error {
					put(k)
					put(v)
					return nil
				})
			}
			return nil
		})
	})
	var out [32]byte
	if err != nil {
		return out, err // the hash may have been cut off inside a write
	}
	h.Sum(out[:0])
	return out, nil
}

// TaskResult is what one finished task adds to a cell: replicates [From, From+len(Records))
// of Seed.
type TaskResult struct {
	CellID  string
	Cell    engine.Cell
	Seed    uint64
	From    uint64
	Records []engine.Record
	// KeepRecords stores the per-replicate records as well as the sketch.
	KeepRecords bool
}

// Commit adds a batch of task results in one transaction (group commit). If extra is not
// nil it runs inside the same transaction, so a caller's own state (task states) commits
// atomically with the results. Any error leaves the store unchanged.
func (s *Store) Commit(batch []TaskResult, extra func(tx *bolt.Tx) error) error {
	g := damageGuard{what: s.path}
	return g.run(func() error { return s.db.Update(func(tx *bolt.Tx) error { return s.commit(tx, batch, extra, &g) }) })
}

func (s *Store) commit(tx *bolt.Tx, batch []TaskResult, extra func(tx *bolt.Tx) error, g *damageGuard) error {
	cells := tx.Bucket(bucketCells)
	// Each cell's sketch is decoded once per transaction, takes every result of the
	// batch, and is encoded once at the end: counts and exact sums do not depend on
	// grouping, so this gives the same bytes as one merge per result.
	type open struct {
		cb *bolt.Bucket
		cj []byte // the cell's settings, which every result for it must share
		sk *Sketch
	}
	touched := map[string]*open{}
	var order []string
	for _, r := range batch {
		c := r.Cell.WithDefaults()
		cj, _ := json.Marshal(c)
		o := touched[r.CellID]
		if o != nil && !bytes.Equal(o.cj, cj) {
			return fmt.Errorf("cell %s: settings differ from the stored cell", r.CellID)
		}
		if o == nil {
			cb, err := cells.CreateBucketIfNotExists([]byte(r.CellID))
			if err != nil {
				return err
			}
			if old := cb.Get([]byte("cell")); old != nil && !bytes.Equal(old, cj) {
				return fmt.Errorf("cell %s: settings differ from the stored cell", r.CellID)
			}
			if err := cb.Put([]byte("cell"), cj); err != nil {
				return err
			}
			sk := NewSketch(c)
			if raw := cb.Get([]byte("sketch")); raw != nil {
				if sk, err = DecodeSketch(raw); err != nil {
					return fmt.Errorf("cell %s: %w", r.CellID, err)
				}
			}
			o = &open{cb: cb, cj: cj, sk: sk}
			touched[r.CellID] = o
			order = append(order, r.CellID)
		}
		if err := o.sk.AddRecords(c, r.Seed, r.From, r.Records); err != nil {
			return fmt.Errorf("cell %s: %w", r.CellID, err)
		}
		if r.KeepRecords {
			rb, err := o.cb.CreateBucketIfNotExists(keyRecords)
			if err != nil {
				return err
			}
			var buf []byte
			for i := range r.Records {
				buf = r.Records[i].AppendBinary(buf[:0])
				if err := rb.Put(recordKey(r.Seed, r.Records[i].Replicate), bytes.Clone(buf)); err != nil {
					return err
				}
			}
		}
	}
	for _, id := range order {
		o := touched[id]
		if err := o.cb.Put([]byte("sketch"), o.sk.AppendBinary(nil)); err != nil {
			return err
		}
	}
	if extra != nil {
		return g.callOut(func() error { return extra(tx) })
	}
	return nil
}

func recordKey(seed, rep uint64) []byte {
	k := make([]byte, 16)
	binary.BigEndian.PutUint64(k, seed)
	binary.BigEndian.PutUint64(k[8:], rep)
	return k
}

// Cells returns the ids of the cells the store holds, in key order.
func (s *Store) Cells() ([]string, error) {
	var ids []string
	err := s.view(func(tx *bolt.Tx) error {
		return tx.Bucket(bucketCells).ForEachBucket(func(k []byte) error {
			ids = append(ids, string(k))
			return nil
		})
	})
	return ids, err
}

// CellSketch returns a cell's settings and its sketch.
func (s *Store) CellSketch(id string) (engine.Cell, *Sketch, error) {
	var c engine.Cell
	var sk *Sketch
	err := s.view(func(tx *bolt.Tx) error {
		cb := tx.Bucket(bucketCells).Bucket([]byte(id))
		if cb == nil {
			return fmt.Errorf("no cell %q in the store", id)
		}
		if err := json.Unmarshal(cb.Get([]byte("cell")), &c); err != nil {
			return fmt.Errorf("cell %s: corrupt settings: %w", id, err)
		}
		var err error
		sk, err = DecodeSketch(cb.Get([]byte("sketch")))
		if err != nil {
			return fmt.Errorf("cell %s: %w", id, err)
		}
		return nil
	})
	return c, sk, err
}

// Records calls fn for every stored record of a cell, in (seed, replicate) order.
func (s *Store) Records(id string, fn func(seed uint64, r engine.Record) error) error {
	g := damageGuard{what: s.path}
	return g.run(func() error { return s.db.View(func(tx *bolt.Tx) error { return s.records(tx, id, fn, &g) }) })
}

func (s *Store) records(tx *bolt.Tx, id string, fn func(seed uint64, r engine.Record) error, g *damageGuard) error {
	cb := tx.Bucket(bucketCells).Bucket([]byte(id))
	if cb == nil {
		return fmt.Errorf("no cell %q in the store", id)
	}
	rb := cb.Bucket(keyRecords)
	if rb == nil {
		return nil
	}
	return rb.ForEach(func(k, v []byte) error {
		if len(k) != 16 {
			return fmt.Errorf("cell %s: corrupt record key", id)
		}
		rec, rest, err := engine.DecodeRecord(v)
		if err != nil || len(rest) != 0 {
			return fmt.Errorf("cell %s: record %x: %w", id, k, engine.ErrCorruptRecord)
		}
		if rec.Replicate != binary.BigEndian.Uint64(k[8:]) {
			return fmt.Errorf("cell %s: record under key %x is replicate %d", id, k, rec.Replicate)
		}
		if err := checkFinite(&rec); err != nil {
			return fmt.Errorf("cell %s: %w: %w", id, engine.ErrCorruptRecord, err)
		}
		return g.callOut(func() error { return fn(binary.BigEndian.Uint64(k), rec) })
	})
}
