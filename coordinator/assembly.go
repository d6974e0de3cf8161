package coordinator

import (
	"encoding/binary"
	"fmt"

	bolt "go.etcd.io/bbolt"

	"bbmx/engine"
)

// assemblyError is validate's answer when a replicate's parts, all present, do not
// assemble. The part that completed the replicate is not known to be at fault.
type assemblyError struct{ msg string }

func (e *assemblyError) Error() string { return e.msg }

// assemble merges the parts of replicate rep, which tile its subtrees, into its record
// and checks the record.
func assemble(cell engine.Cell, parts map[uint64]*engine.Part, rep uint64) (engine.Record, error) {
	var whole *engine.Part
	for _, k := range sortedKeys(parts) {
		q := parts[k].Clone() // Merge changes its receiver; the kept parts stay as received
		if whole == nil {
			whole = q
		} else if err := whole.Merge(q); err != nil {
			return engine.Record{}, err
		}
	}
	rec, err := whole.Record(cell)
	if err != nil {
		return engine.Record{}, err
	}
	if err := checkRecord(cell, &rec, rep); err != nil {
		return engine.Record{}, err
	}
	return rec, nil
}

// parkedForAssembly is the error a part task is parked with when its replicate's parts
// failed to assemble too often.
func parkedForAssembly(rep uint64, times uint32) string {
	return fmt.Sprintf("the parts of replicate %d failed to assemble %d times, all recomputed each time: "+
		"a fault that recurs (the engine or its build?), not one bad worker", rep, times)
}

// dropUnassembledLocked handles the parts of t's replicate that, t's included, tile it
// but do not assemble. Each passed its own checks, so which is corrupt cannot be told:
// all are dropped from memory and from the store, and the replicate's part tasks that
// were done, and t, are queued again without a failed attempt (a parked t stays
// parked). After MaxFailures drops of the replicate they are parked instead. Parts
// whose commit is still in flight are dropped when it returns (dropStalePartLocked).
// The store is written with mu held so that no part of the next round can be stored
// before this round's are deleted.
func (c *Coordinator) dropUnassembledLocked(t *task, prev taskState, cause error) error {
	cell, rep := t.cell, t.from
	cell.dropped[rep]++
	times := cell.dropped[rep]
	giveUp := times >= c.opt.MaxFailures
	delete(cell.parts, rep)
	c.stats.assemblyFailures++

	var affected []*task // t and its done siblings, in plan order
	for _, s := range cell.tasks {
		if s == t || (s.split && s.from == rep && s.state == stateDone) {
			affected = append(affected, s)
		}
	}
	// Backwards, so that the re-queued tasks lead the queue in plan order.
	for i := len(affected) - 1; i >= 0; i-- {
		s := affected[i]
		was := s.state
		if s == t {
			was = prev
		}
		if was == stateDone {
			c.nDone--
			s.digest = [32]byte{}
		}
		c.requeueOrParkLocked(s, was, giveUp, parkedForAssembly(rep, times)+"; last: "+cause.Error())
	}
	c.notify()

	err := c.store.Update(func(tx *bolt.Tx) error {
		if err := deleteStoredParts(tx, cell.spec.ID, rep, nil); err != nil {
			return err
		}
		return c.putStatesLocked(tx, affected)
	})
	if err != nil {
		// The dropped parts may be reloaded by a restart; planCell makes sure their
		// replicate is still assembled and checked then.
		c.log.Error("could not delete the parts of a split replicate that did not assemble", "cell", cell.spec.ID,
			"replicate", rep, "error", err)
	}
	if giveUp {
		c.log.Error("SPLIT REPLICATE PARKED: its parts failed to assemble again and again", "cell", cell.spec.ID,
			"replicate", rep, "times", times, "tasks", len(affected), "error", cause)
		return &assemblyError{fmt.Sprintf("replicate %d: the parts do not assemble (%v); this happened %d times, "+
			"so its part tasks are parked", rep, cause, times)}
	}
	c.log.Error("PARTS OF A SPLIT REPLICATE DID NOT ASSEMBLE: one is corrupt (worker fault), which one cannot be told; "+
		"all dropped and queued again", "cell", cell.spec.ID, "replicate", rep, "time", times, "max", c.opt.MaxFailures,
		"completing_task", t.id, "error", cause)
	return &assemblyError{fmt.Sprintf("replicate %d: the parts do not assemble (%v); one of them is corrupt, "+
		"so all were dropped and are queued again (drop %d; its tasks are parked at %d)", rep, cause, times, c.opt.MaxFailures)}
}

// dropStalePartLocked handles part task t (prev: its state before it was submitted)
// whose commit returned after its replicate's parts had been dropped for not
// assembling. Its part may be the corrupt one and may have been stored after the drop,
// so it is deleted from the store and t queued again (parked if the replicate's tasks
// are). Called with mu held while t is still committing, so t's next part cannot be
// stored before this one is deleted.
func (c *Coordinator) dropStalePartLocked(t *task, prev taskState) error {
	cell, rep := t.cell, t.from
	times := cell.dropped[rep]
	c.requeueOrParkLocked(t, prev, times >= c.opt.MaxFailures, parkedForAssembly(rep, times))
	c.notify()
	err := c.store.Update(func(tx *bolt.Tx) error {
		if err := deleteStoredParts(tx, cell.spec.ID, rep, &t.rootFrom); err != nil {
			return err
		}
		return c.putStatesLocked(tx, []*task{t})
	})
	if err != nil {
		c.log.Error("could not delete a part of a split replicate that did not assemble", "task", t.id, "error", err)
	}
	c.log.Warn("a part committed while its replicate's parts were dropped for not assembling; dropped too",
		"task", t.id, "parked", t.state == stateParked)
	if t.state == stateParked {
		return fmt.Errorf("replicate %d's parts did not assemble while this part was being committed; "+
			"it was dropped with them and the task is parked: %s", rep, t.lastErr)
	}
	return fmt.Errorf("replicate %d's parts did not assemble while this part was being committed; "+
		"it was dropped with them and is queued again", rep)
}

// requeueOrParkLocked settles part task s, which was in state was before its replicate's
// parts were dropped: parked with reason if park is set, still parked if it was, else
// queued again.
func (c *Coordinator) requeueOrParkLocked(s *task, was taskState, park bool, reason string) {
	switch {
	case park:
		if was != stateParked {
			c.nParked++
		}
		s.state, s.worker = stateParked, ""
		s.lastErr = reason
	case was == stateParked:
		s.state = stateParked
	default:
		c.requeueLocked(s)
	}
}

// deleteStoredParts deletes the stored parts of replicate rep of cell id: all of them if
// from is nil, else the one rooted at *from (and the replicate's bucket once empty).
func deleteStoredParts(tx *bolt.Tx, id string, rep uint64, from *uint64) error {
	parts, err := coordBucket(tx, keyParts)
	if err != nil {
		return err
	}
	cb := parts.Bucket([]byte(id))
	if cb == nil {
		return nil
	}
	rk := binary.BigEndian.AppendUint64(nil, rep)
	rb := cb.Bucket(rk)
	if rb == nil {
		return nil
	}
	if from != nil {
		if err := rb.Delete(binary.BigEndian.AppendUint64(nil, *from)); err != nil {
			return err
		}
		if k, _ := rb.Cursor().First(); k != nil {
			return nil
		}
	}
	return cb.DeleteBucket(rk)
}

// putStatesLocked writes the persisted state of tasks that are no longer done: no done
// digest, their failures, parking and their replicate's assembly failures.
func (c *Coordinator) putStatesLocked(tx *bolt.Tx, ts []*task) error {
	bs, err := coordBuckets(tx, keyDone, keyTasks)
	if err != nil {
		return err
	}
	done, tasks := bs[0], bs[1]
	for _, s := range ts {
		if err := done.Delete([]byte(s.id)); err != nil {
			return err
		}
		rec := c.recordLocked(s)
		rec.Parked = s.state == stateParked
		if err := tasks.Put([]byte(s.id), mustJSON(rec)); err != nil {
			return err
		}
	}
	return nil
}
