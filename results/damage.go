package results

import (
	"fmt"
	"runtime/debug"

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
