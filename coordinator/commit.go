package coordinator

import (
	"bytes"
	"context"
	"encoding/binary"
	"fmt"
	"math"
	"math/bits"
	"sort"
	"time"

	bolt "go.etcd.io/bbolt"

	"bbmx/engine"
	pb "bbmx/proto/bbmx/v1"
	"bbmx/results"
)

// commitReq is one validated result waiting for the group commit.
type commitReq struct {
	task       *task
	result     *results.TaskResult // nil for a part that does not complete its replicate
	part       []byte              // part encoding to keep until the replicate is complete
	dropParts  bool                // the replicate is complete: delete its stored parts
	replicates uint64              // replicates this commit completes
	round      uint32              // for a part: its replicate's drops when it was validated (cellState.dropped)
	digest     [32]byte
	done       chan error
}

// validate checks a submission against its task (in state committing, prev before)
// and turns it into a commit request. Nothing is written; a part is added to the
// in-memory assembly of its replicate. If it is the last part and the parts do not
// assemble, they are all dropped (dropUnassembledLocked) and an *assemblyError returned.
func (c *Coordinator) validate(t *task, prev taskState, req *pb.SubmitRequest) (*commitReq, error) {
	cell := t.cell.spec.Cell
	cr := &commitReq{task: t}
	if !t.split {
		if len(req.Part) != 0 {
			return nil, fmt.Errorf("a range task's result carries a part")
		}
		if uint64(len(req.Records)) != t.to-t.from {
			return nil, fmt.Errorf("%d records for %d replicates", len(req.Records), t.to-t.from)
		}
		recs := make([]engine.Record, len(req.Records))
		var enc []byte
		for i, b := range req.Records {
			rec, rest, err := engine.DecodeRecord(b)
			if err != nil {
				return nil, fmt.Errorf("record %d: %w", i, err)
			}
			if len(rest) != 0 {
				return nil, fmt.Errorf("record %d: trailing bytes", i)
			}
			if err := checkRecord(cell, &rec, t.from+uint64(i)); err != nil {
				return nil, fmt.Errorf("record %d: %w", i, err)
			}
			// Duplicates are compared by a digest of the bytes sent, so a result must
			// have exactly one spelling: an overlong varint, say, is refused.
			if enc = rec.AppendBinary(enc[:0]); !bytes.Equal(enc, b) {
				return nil, fmt.Errorf("record %d: not in canonical form", i)
			}
			recs[i] = rec
		}
		cr.result = &results.TaskResult{CellID: t.cell.spec.ID, Cell: cell, Seed: c.sw.Seed, From: t.from,
			Records: recs, KeepRecords: c.sw.KeepRecords}
		cr.replicates = t.to - t.from
		return cr, nil
	}
	if len(req.Records) != 0 {
		return nil, fmt.Errorf("a subtree task's result carries records")
	}
	p, err := engine.DecodePart(cell, req.Part)
	if err != nil {
		return nil, err
	}
	if p.Replicate != t.from || p.SplitAt != t.splitAt || p.Roots != t.roots || p.From != t.rootFrom || p.To != t.rootTo {
		return nil, fmt.Errorf("part covers replicate %d subtrees [%d,%d) of %d at %v; the task is replicate %d [%d,%d) of %d at %v",
			p.Replicate, p.From, p.To, p.Roots, p.SplitAt, t.from, t.rootFrom, t.rootTo, t.roots, t.splitAt)
	}
	c.mu.Lock()
	defer c.mu.Unlock()
	cr.round = t.cell.dropped[t.from]
	have := t.cell.parts[t.from]
	if have == nil {
		have = map[uint64]*engine.Part{}
		t.cell.parts[t.from] = have
	}
	have[t.rootFrom] = p
	// Complete when the parts tile [0, roots).
	next := uint64(0)
	for _, k := range sortedKeys(have) {
		if k != next {
			break
		}
		next = have[k].To
	}
	if next != t.roots {
		cr.part = req.Part
		return cr, nil
	}
	rec, err := assemble(cell, have, t.from)
	if err != nil {
		return nil, c.dropUnassembledLocked(t, prev, err)
	}
	cr.part = req.Part
	cr.dropParts = true
	cr.replicates = 1
	cr.result = &results.TaskResult{CellID: t.cell.spec.ID, Cell: cell, Seed: c.sw.Seed, From: t.from,
		Records: []engine.Record{rec}, KeepRecords: c.sw.KeepRecords}
	return cr, nil
}

// checkRecord validates a decoded record against its cell: sizes, finiteness, ranges.
func checkRecord(c engine.Cell, r *engine.Record, rep uint64) error {
	o := c.Observe
	switch {
	case r.Replicate != rep:
		return fmt.Errorf("is replicate %d, want %d", r.Replicate, rep)
	case r.Dim != c.Model.Dim:
		return fmt.Errorf("has dimension %d, the cell %d", r.Dim, c.Model.Dim)
	case r.Population < 1:
		return fmt.Errorf("has no particles")
	case len(r.Top) == 0 || len(r.Top) > o.TopK || uint64(len(r.Top)) > r.Population:
		return fmt.Errorf("has %d top radii (top-K %d, population %d)", len(r.Top), o.TopK, r.Population)
	case len(r.Hist) != c.Bins():
		return fmt.Errorf("has %d histogram bins, want %d", len(r.Hist), c.Bins())
	case len(r.Checks) != len(o.Checkpoints):
		return fmt.Errorf("has %d checkpoints, want %d", len(r.Checks), len(o.Checkpoints))
	}
	var hsum, carry uint64
	for _, h := range r.Hist {
		hsum, carry = bits.Add64(hsum, h, 0)
		if carry != 0 || hsum > r.Population {
			return fmt.Errorf("histogram counts more particles than the population %d", r.Population)
		}
	}
	for i, p := range r.Top {
		if !finite(p.Radius) || p.Radius < 0 || (i > 0 && p.Radius > r.Top[i-1].Radius) {
			return fmt.Errorf("top radius %d (%v) is not finite, negative or out of order", i, p.Radius)
		}
		if len(p.Dir) != c.Model.Dim {
			return fmt.Errorf("top direction %d has %d coordinates", i, len(p.Dir))
		}
		var n2 float64
		for _, x := range p.Dir {
			n2 += x * x
		}
		if !finite(n2) || math.Abs(n2-1) > 1e-9 {
			return fmt.Errorf("top direction %d is not a unit vector", i)
		}
	}
	for i, cs := range r.Checks {
		if cs.Time != o.Checkpoints[i] {
			return fmt.Errorf("checkpoint %d is at %v, want %v", i, cs.Time, o.Checkpoints[i])
		}
		if cs.Population < 1 || !finite(cs.Z) || !finite(cs.W) || cs.W < 0 || len(cs.ZDir) != c.NumDirections() {
			return fmt.Errorf("checkpoint %d has an impossible population, martingale value or direction grid", i)
		}
		for _, z := range cs.ZDir {
			if !finite(z) {
				return fmt.Errorf("checkpoint %d has a non-finite Z_s(u)", i)
			}
		}
	}
	return nil
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// committer gathers validated results into batches and commits each batch, with the
// task digests and part bookkeeping, in one store transaction (group commit).
func (c *Coordinator) committer() {
	defer c.wg.Done()
	for {
		var batch []*commitReq
		select {
		case <-c.stopped:
			c.drainCommits()
			return
		case cr := <-c.commits:
			batch = append(batch, cr)
		}
		timer := time.NewTimer(c.opt.CommitWindow)
	gather:
		for len(batch) < 4096 {
			select {
			case cr := <-c.commits:
				batch = append(batch, cr)
			case <-timer.C:
				break gather
			}
		}
		timer.Stop()
		c.commitAndReply(batch)
	}
}

// drainCommits commits what is already queued when the coordinator closes.
func (c *Coordinator) drainCommits() {
	for {
		var batch []*commitReq
		for len(batch) < 4096 {
			select {
			case cr := <-c.commits:
				batch = append(batch, cr)
				continue
			default:
			}
			break
		}
		if len(batch) == 0 {
			return
		}
		c.commitAndReply(batch)
	}
}

// commitAndReply commits a batch in one transaction and gives every waiting Submit the
// outcome.
func (c *Coordinator) commitAndReply(batch []*commitReq) {
	err := c.commitBatch(batch)
	if err != nil {
		c.storeFailed(err)
	}
	for _, cr := range batch {
		cr.done <- err
	}
}

func (c *Coordinator) commitBatch(batch []*commitReq) error {
	var trs []results.TaskResult
	for _, cr := range batch {
		if cr.result != nil {
			trs = append(trs, *cr.result)
		}
	}
	if joinAdjacent {
		trs = coalesce(trs)
	}
	return c.store.Commit(trs, func(tx *bolt.Tx) error {
		bs, err := coordBuckets(tx, keyDone, keyTasks, keyParts)
		if err != nil {
			return err
		}
		done, tasks, parts := bs[0], bs[1], bs[2]
		for _, cr := range batch {
			t := cr.task
			if err := done.Put([]byte(t.id), cr.digest[:]); err != nil {
				return err
			}
			if tasks.Get([]byte(t.id)) != nil {
				if err := tasks.Delete([]byte(t.id)); err != nil {
					return err
				}
			}
			if cr.part == nil {
				continue
			}
			cb, err := parts.CreateBucketIfNotExists([]byte(t.cell.spec.ID))
			if err != nil {
				return err
			}
			var rk [8]byte
			binary.BigEndian.PutUint64(rk[:], t.from)
			if cr.dropParts {
				if cb.Bucket(rk[:]) != nil {
					if err := cb.DeleteBucket(rk[:]); err != nil {
						return err
					}
				}
				continue
			}
			rb, err := cb.CreateBucketIfNotExists(rk[:])
			if err != nil {
				return err
			}
			var pk [8]byte
			binary.BigEndian.PutUint64(pk[:], t.rootFrom)
			if err := rb.Put(pk[:], cr.part); err != nil {
				return err
			}
		}
		return nil
	})
}

// coalesce joins the results of a batch that continue each other (same cell, the next
// replicates) into one result, so the store reads, merges and writes each cell's
// sketch once per run of adjacent replicates rather than once per task. The sketch's
// ranges join adjacent replicates anyway, and its counts and exact sums do not depend
// on grouping, so the store ends up with the same bytes.
// joinAdjacent is switched off only by the benchmark that measures what coalesce saves.
var joinAdjacent = true

func coalesce(trs []results.TaskResult) []results.TaskResult {
	if len(trs) < 2 {
		return trs
	}
	sort.SliceStable(trs, func(i, j int) bool {
		if trs[i].CellID != trs[j].CellID {
			return trs[i].CellID < trs[j].CellID
		}
		return trs[i].From < trs[j].From
	})
	out := trs[:1]
	for _, r := range trs[1:] {
		last := &out[len(out)-1]
		if r.CellID == last.CellID && r.Seed == last.Seed && r.KeepRecords == last.KeepRecords &&
			r.From == last.From+uint64(len(last.Records)) && len(last.Records) > 0 && len(r.Records) > 0 {
			last.Records = append(last.Records[:len(last.Records):len(last.Records)], r.Records...)
			continue
		}
		out = append(out, r)
	}
	return out
}

// Status reports progress per cell.
func (c *Coordinator) Status(ctx context.Context, req *pb.StatusRequest) (*pb.StatusReply, error) {
	return c.StatusNow(), nil
}

// StatusNow is the current status (Status without a request).
func (c *Coordinator) StatusNow() *pb.StatusReply {
	c.mu.Lock()
	defer c.mu.Unlock()
	rep := &pb.StatusReply{SweepName: c.sw.Name, SweepSha256: c.hash[:], Complete: c.finishedLocked() && c.nParked == 0,
		Completions: c.stats.completions, LeaseExpiries: c.stats.expiries, ComputeSeconds: float64(c.stats.computeNS) / 1e9}
	cutoff := time.Now().Add(-2 * c.opt.Lease)
	for _, seen := range c.workers {
		if seen.After(cutoff) {
			rep.Workers++
		}
	}
	for _, cell := range c.cells {
		cs := &pb.CellStatus{CellId: cell.spec.ID, ReplicatesWanted: cell.spec.Replicates, ReplicatesDone: cell.done,
			TasksTotal: uint64(len(cell.tasks))}
		for _, t := range cell.tasks {
			switch t.state {
			case stateDone:
				cs.TasksDone++
			case stateLeased, stateCommitting:
				cs.TasksLeased++
			case stateParked:
				cs.TasksParked++
				rep.Parked = append(rep.Parked, &pb.ParkedTask{TaskId: t.id, Attempts: t.failures, Error: t.lastErr})
			}
		}
		rep.Cells = append(rep.Cells, cs)
	}
	return rep
}

// Share returns, per cell, how many replicates this coordinator's store will hold when
// its plan is done: the whole cell, or with Options.Shards a shard's share of it.
func (c *Coordinator) Share() map[string]uint64 {
	c.mu.Lock()
	defer c.mu.Unlock()
	out := map[string]uint64{}
	for _, cell := range c.cells {
		out[cell.spec.ID] = cell.share
	}
	return out
}

// InFlight returns, per cell, replicates done plus the progress reported by heartbeats
// of leased range tasks (for progress displays).
func (c *Coordinator) InFlight() map[string]uint64 {
	c.mu.Lock()
	defer c.mu.Unlock()
	out := map[string]uint64{}
	for _, cell := range c.cells {
		n := cell.done
		for _, t := range cell.tasks {
			if t.state == stateLeased && !t.split {
				n += min(t.progress, t.to-t.from)
			}
		}
		out[cell.spec.ID] = n
	}
	return out
}
