package results

import (
	"errors"
	"fmt"
	"runtime/debug"
	"sync/atomic"

	bolt "go.etcd.io/bbolt"
)

// damageGuard turns a panic or memory fault raised while bbolt reads a damaged file into
// an error naming the file. bbolt trusts the pages it maps: a flipped byte in a page
// header makes it panic, and a wrong page number or length makes it read outside the
// map, which kills the process unless faults are made panics (debug.SetPanicOnFault,
// which holds for the current goroutine only: every read here runs on the caller's).
// A panic raised inside a caller's callback (run through callOut) is not caught: it is
// the caller's bug, not damage, and keeps its own stack.
type damageGuard struct {
	what     string // the file or files read, for the message
	inCaller bool
}

func (g *damageGuard) run(fn func() error) (err error) {
	defer debug.SetPanicOnFault(debug.SetPanicOnFault(true))
	defer func() {
		if g.inCaller {
			return
		}
		if r := recover(); r != nil {
			err = fmt.Errorf("%s is damaged (%v): restore it from a copy", g.what, r)
		}
	}()
	return fn()
}

// callOut runs a caller's callback inside run, outside the guard's protection.
func (g *damageGuard) callOut(fn func() error) error {
	g.inCaller = true
	err := fn()
	g.inCaller = false
	return err
}

// view and update are bbolt's View and Update for the store's own reads and writes,
// with damage reported as an error.
func (s *Store) view(fn func(tx *bolt.Tx) error) error {
	g := damageGuard{what: s.path}
	return g.run(func() error { return s.db.View(fn) })
}

func (s *Store) update(fn func(tx *bolt.Tx) error) error {
	g := damageGuard{what: s.path}
	return g.run(func() error { return s.db.Update(fn) })
}

// verifySink keeps Verify's reads of values from being compiled away.
var verifySink atomic.Uint32

// Verify reads everything a reader of the store can reach (every bucket, key and value,
// a byte of every page each spans) and checks the file's page layout, and returns an
// error naming the file if any of it is damaged. Callers that read and write the store through Update and View, where a
// damaged page is not turned into an error (see callOut), run it first: the coordinator
// does before it plans or resumes a sweep. It reads the whole file once.
//
// Before any cursor moves, walkTree checks the trees' shape from the file itself: a
// branch page that leads back to itself would send bbolt's cursor down without end. It
// also checks that the free-page list names no page of the trees, none twice and none
// outside the file: the next write would be handed such a page and overwrite it.
//
// The layout check: the pages in use, each with the overflow pages its header counts,
// and the free pages must follow one another to the end of the file. It catches a
// damaged overflow count, which no read notices but which makes bbolt free that many
// pages when it rewrites the page: billions, for hours. bbolt's own consistency check
// (Tx.Check) is not used: it walks such a span page by page too, in a goroutine of its
// own, where a read outside the file cannot be caught. A store opened read-only has no
// free-page list loaded and gets the reads only; nothing is freed in it anyway.
func (s *Store) Verify() error {
	damaged := func(format string, a ...any) error {
		return fmt.Errorf("%s is damaged (%s): restore it from a copy", s.path, fmt.Sprintf(format, a...))
	}
	var touched byte
	defer func() { verifySink.Store(uint32(touched)) }() // the reads must not be optimised away
	return s.view(func(tx *bolt.Tx) error {
		// The trees' shape first: bbolt's cursors would follow a cycle without end.
		if err := walkTree(s.path, uint64(tx.ID())); err != nil {
			return damaged("%v", err)
		}
		var walk func(b *bolt.Bucket, path string) error
		walk = func(b *bolt.Bucket, path string) error {
			c := b.Cursor()
			for k, v := c.First(); k != nil; k, v = c.Next() {
				for i := 0; i < len(k); i += 4096 { // keys are short; damaged ones need not be
					touched ^= k[i]
				}
				if len(k) > 0 {
					touched ^= k[len(k)-1]
				}
				if v != nil {
					// Read a byte of every page the value spans: a wrong length or
					// page number faults here, not in a later reader.
					for i := 0; i < len(v); i += 4096 {
						touched ^= v[i]
					}
					if len(v) > 0 {
						touched ^= v[len(v)-1]
					}
					continue
				}
				nb := b.Bucket(k)
				if nb == nil {
					return damaged("%s/%q is neither a value nor a bucket", path, k)
				}
				if err := walk(nb, path+"/"+string(k)); err != nil {
					return err
				}
			}
			return nil
		}
		if err := tx.ForEach(func(name []byte, b *bolt.Bucket) error { return walk(b, string(name)) }); err != nil {
			return err
		}
		end := int(tx.Size() / int64(tx.DB().Info().PageSize))
		for id := 2; id < end; { // pages 0 and 1 are the meta pages
			p, err := tx.Page(id)
			if errors.Is(err, bolt.ErrFreePagesNotLoaded) {
				return nil
			}
			if err != nil {
				return err
			}
			switch p.Type {
			case "free":
				id++
			case "branch", "leaf", "freelist":
				if p.OverflowCount < 0 || p.OverflowCount >= end-id {
					return damaged("page %d claims %d more pages; the file has %d", id, p.OverflowCount, end)
				}
				id += 1 + p.OverflowCount
			default:
				return damaged("page %d is of type %s", id, p.Type)
			}
		}
		return nil
	})
}
