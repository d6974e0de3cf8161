// Package coordinator runs a sweep: it plans the cells of a sweep into tasks, leases
// them to workers, accepts each task's result once, and commits results and task
// states to the sweep's store in batched transactions (group commit).
//
// The Coordinator is a state machine over a results.Store; its methods take and return
// the protocol's messages (package bbmx/proto/bbmx/v1), so the gRPC server is a thin
// transport around it (server.go) and `bbmx run` drives it in-process without any
// network at all.
//
// Invariants:
//   - What is done is read from the store: a cell's done replicates are its sketch's
//     ranges for the sweep's seed, and a split replicate's done parts are in the
//     coordinator/parts bucket (used only where they are exactly a part task of the
//     current plan: a resumed sweep may cut its replicates differently). Restarting on
//     the same store plans only what is missing, and the sketch refuses a range it
//     already holds, so nothing is counted twice.
//   - A task fails (lease expired, worker error, invalid result) only if it is still in
//     the state the failure was decided in: never while its result is being committed.
//   - Range tasks are cut at multiples of the cell's replicates-per-task, so the same
//     replicates form the same task (same id) before and after a restart.
//   - A result is accepted once per task id: the first valid result wins, whichever
//     lease it came from (results are deterministic); a later one is compared with the
//     stored digest and dropped, and a mismatch is logged loudly as a worker fault.
//   - A split replicate's parts are assembled (merged, made a record, checked) only when
//     the last one arrives. If they do not assemble, no part can be blamed: every part
//     of the replicate is dropped, from memory and from the store, and its part tasks
//     are queued again without counting a failed attempt; a part whose commit is in
//     flight at that moment is dropped and queued again when its commit returns. After
//     MaxFailures such drops of one replicate (counted across restarts) its part tasks
//     are parked, so a fault that recurs cannot loop forever.
//   - A reply to Submit is sent only after the result is durable.
//   - Parts reach the commit queue in the order they were validated (partOrder), so the
//     part that completes a replicate, whose commit deletes the replicate's stored
//     parts, is committed after every other part of it.
//   - The store is verified before planning (results.Store.Verify), and a failed commit
//     stops the sweep (Err): nothing is leased after it, since the task would only be
//     computed again and fail the same way.
//   - A heartbeat naming a pending task adopts it for its worker (the worker kept
//     computing across a coordinator restart or a late heartbeat), unless that worker
//     handed the task back itself.
package coordinator

import (
	"context"
	"crypto/rand"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"log/slog"
	"sort"
	"sync"
	"time"

	bolt "go.etcd.io/bbolt"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"bbmx/coordinator/sweep"
	"bbmx/engine"
	pb "bbmx/proto/bbmx/v1"
	"bbmx/results"
)

// Buckets of the coordinator's own state inside the store (see results/store.go).
var (
	bucketCoord = []byte("coordinator")
	keyTasks    = []byte("tasks") // task id -> taskRecord JSON (failed attempts, parked)
	keyDone     = []byte("done")  // task id -> SHA-256 of the accepted result
	keyParts    = []byte("parts") // cell id / replicate (8 bytes BE) / rootFrom (8 bytes BE) -> part encoding
)

// taskRecord is the persisted state of a task that has failed at least once.
type taskRecord struct {
	Failures uint32 `json:"failures"`
	Parked   bool   `json:"parked"`
	Error    string `json:"error,omitempty"`
	// AssemblyFailures: for a part task, how many times its replicate's parts failed
	// to assemble and were dropped (the largest over the replicate's tasks counts).
	AssemblyFailures uint32 `json:"assembly_failures,omitempty"`
}

// Options tune a coordinator; zero values take the defaults.
type Options struct {
	Lease       time.Duration // lease length (default 2m); heartbeats come every Lease/4
	MaxFailures uint32        // failed attempts before a task is parked (default 3); also the assembly failures before a split replicate's parts are parked
	Shard       int           // with Shards > 1, plan only the units whose index % Shards == Shard
	Shards      int
	Log         *slog.Logger
	// CommitWindow is how long the committer waits to gather more results into one
	// transaction after the first arrives (default 2ms).
	CommitWindow time.Duration
	// PerTask, if non-zero, overrides the replicates per range task (tests, benchmarks).
	PerTask uint64
	// Parts, if > 1, splits every replicate into this many subtree tasks at the sweep's
	// split_at (or T/2), whatever the cost model says (tests of the split path).
	Parts int
	// RetryParked queues the tasks parked by an earlier run again, their failure counts
	// (and their replicates' assembly failures) cleared. Without it a parked task stays
	// parked across restarts: a fault that recurs is not recomputed at every resume.
	RetryParked bool
}

// Coordinator is the state machine of one sweep over its store.
type Coordinator struct {
	opt   Options
	sw    *sweep.Sweep
	hash  [32]byte
	store *results.Store
	log   *slog.Logger

	mu       sync.Mutex
	cells    []*cellState
	byID     map[string]*task
	queue    []*task // pending tasks, in plan order; re-queued ones go to the front
	workers  map[string]time.Time
	nDone    int
	nParked  int
	broken   error // why the store can no longer be written (see Err); nil while it can
	stats    counters
	changed  chan struct{} // closed and replaced whenever the state changes
	commits  chan *commitReq
	stopOnce sync.Once
	stopped  chan struct{}
	sendMu   sync.RWMutex // Submit's send to commits against Close (see Submit)
	// partOrder makes the parts of split replicates reach commits in the order they
	// were validated (see Submit)
	partOrder sync.Mutex
	wg        sync.WaitGroup
}

type counters struct {
	completions, expiries, duplicates, rejected uint64
	assemblyFailures                            uint64 // split replicates whose parts did not assemble
	computeNS                                   int64
}

// Open checks that sw may run on st (a new store takes the sweep's spec; an existing
// one must have been made by a sweep that sw continues), plans every task that is not
// done yet, and starts the committer and the lease clock. Close stops them.
func Open(st *results.Store, sw *sweep.Sweep, opt Options) (*Coordinator, error) {
	if opt.Lease <= 0 {
		opt.Lease = 2 * time.Minute
	}
	if opt.MaxFailures == 0 {
		opt.MaxFailures = 3
	}
	if opt.CommitWindow <= 0 {
		opt.CommitWindow = 2 * time.Millisecond
	}
	if opt.Shards > 1 && (opt.Shard < 0 || opt.Shard >= opt.Shards) {
		return nil, fmt.Errorf("shard %d is outside 0..%d", opt.Shard, opt.Shards-1)
	}
	// Its own transactions below read the store unguarded: damage found now is an
	// error, not a crash or a commit that fails after minutes of simulation.
	if err := st.Verify(); err != nil {
		return nil, err
	}
	if err := st.CheckStream(); err != nil {
		return nil, err
	}
	if err := adoptSpec(st, sw); err != nil {
		return nil, err
	}
	if opt.RetryParked {
		n, err := unpark(st)
		if err != nil {
			return nil, err
		}
		if n > 0 && opt.Log != nil {
			opt.Log.Info("parked tasks queued again, their failure counts cleared", "tasks", n)
		}
	}
	c, err := planned(st, sw, opt)
	if err != nil {
		return nil, err
	}
	c.wg.Add(2)
	go c.committer()
	go c.clock()
	return c, nil
}

// unpark deletes the persisted state of every parked task, so the plan takes them as
// never failed, and returns how many there were.
func unpark(st *results.Store) (int, error) {
	n := 0
	err := st.Update(func(tx *bolt.Tx) error {
		cb := tx.Bucket(bucketCoord)
		if cb == nil {
			return nil
		}
		tb := cb.Bucket(keyTasks)
		if tb == nil {
			return nil
		}
		var parked [][]byte
		if err := tb.ForEach(func(k, v []byte) error {
			var r taskRecord
			if err := json.Unmarshal(v, &r); err != nil {
				return fmt.Errorf("corrupt task state for %s: %w", k, err)
			}
			if r.Parked {
				parked = append(parked, append([]byte(nil), k...))
			}
			return nil
		}); err != nil {
			return err
		}
		for _, k := range parked {
			if err := tb.Delete(k); err != nil {
				return err
			}
		}
		n = len(parked)
		return nil
	})
	if err != nil {
		return 0, fmt.Errorf("%s: %w", st.Path(), err)
	}
	return n, nil
}

// planned makes a coordinator with its plan built from the store, not yet running.
func planned(st *results.Store, sw *sweep.Sweep, opt Options) (*Coordinator, error) {
	c := &Coordinator{opt: opt, sw: sw, hash: sw.Hash(), store: st, log: opt.Log,
		byID: map[string]*task{}, workers: map[string]time.Time{}, changed: make(chan struct{}),
		commits: make(chan *commitReq, 1024), stopped: make(chan struct{})}
	if c.log == nil {
		c.log = slog.New(slog.DiscardHandler)
	}
	return c, c.plan()
}

// adoptSpec writes the sweep's canonical form into a store that has none of ours yet,
// or checks that the sweep continues the one the store was made by.
func adoptSpec(st *results.Store, sw *sweep.Sweep) error {
	spec, _, err := st.Spec()
	if err != nil {
		return err
	}
	canon := sw.Canonical()
	if string(spec) == string(canon) {
		return nil
	}
	old, err := sweep.Decode(spec)
	if err != nil {
		return fmt.Errorf("%s was not made by a sweep (it holds %.60q): use a new store", st.Path(), spec)
	}
	if err := sw.CheckGrowth(old); err != nil {
		return fmt.Errorf("%s: %w", st.Path(), err)
	}
	return st.SetSpec(canon)
}

// plan builds the task list from what the store holds.
func (c *Coordinator) plan() error {
	records := map[string]taskRecord{}
	stored := map[string]map[uint64]map[uint64][]byte{}
	err := c.store.View(func(tx *bolt.Tx) error {
		cb := tx.Bucket(bucketCoord)
		if cb == nil {
			return nil
		}
		if tb := cb.Bucket(keyTasks); tb != nil {
			if err := tb.ForEach(func(k, v []byte) error {
				var r taskRecord
				if err := json.Unmarshal(v, &r); err != nil {
					return fmt.Errorf("corrupt task state for %s: %w", k, err)
				}
				records[string(k)] = r
				return nil
			}); err != nil {
				return err
			}
		}
		pb := cb.Bucket(keyParts)
		if pb == nil {
			return nil
		}
		return pb.ForEachBucket(func(cell []byte) error {
			m := map[uint64]map[uint64][]byte{}
			stored[string(cell)] = m
			return pb.Bucket(cell).ForEachBucket(func(rep []byte) error {
				if len(rep) != 8 {
					return fmt.Errorf("corrupt part key in cell %s", cell)
				}
				r := binary.BigEndian.Uint64(rep)
				m[r] = map[uint64][]byte{}
				return pb.Bucket(cell).Bucket(rep).ForEach(func(k, v []byte) error {
					if len(k) != 8 {
						return fmt.Errorf("corrupt part key in cell %s", cell)
					}
					m[r][binary.BigEndian.Uint64(k)] = append([]byte(nil), v...)
					return nil
				})
			})
		})
	})
	if err != nil {
		return fmt.Errorf("%s: %w", c.store.Path(), err)
	}
	have := map[string]bool{}
	ids, err := c.store.Cells()
	if err != nil {
		return fmt.Errorf("%s: %w", c.store.Path(), err) // else every cell would be planned anew
	}
	for _, id := range ids {
		have[id] = true
	}
	for _, cs := range c.sw.Cells() {
		var ranges []results.Range
		if have[cs.ID] {
			recorded, sk, err := c.store.CellSketch(cs.ID)
			if err != nil {
				return err
			}
			sj, _ := json.Marshal(recorded)
			if string(sj) != string(mustJSON(cs.Cell)) {
				return fmt.Errorf("cell %s in %s was recorded with other settings than this sweep's", cs.ID, c.store.Path())
			}
			ranges = sk.Ranges
		}
		sz := c.sw.Size(cs)
		if c.opt.PerTask > 0 && sz.Parts <= 1 {
			sz.PerTask = c.opt.PerTask
		}
		if c.opt.Parts > 1 {
			sz = sweep.Sizing{PerTask: 1, Parts: c.opt.Parts, SplitAt: c.sw.SplitAt}
			if sz.SplitAt == 0 {
				sz.SplitAt = cs.Cell.Horizon / 2
			}
		}
		cell, err := planCell(cs, sz, c.sw.Seed, ranges, stored[cs.ID])
		if err != nil {
			return err
		}
		kept := cell.tasks[:0]
		for _, t := range cell.tasks {
			if c.opt.Shards > 1 && int(t.unit%uint64(c.opt.Shards)) != c.opt.Shard {
				continue
			}
			kept = append(kept, t)
			c.byID[t.id] = t
			if r, ok := records[t.id]; ok && t.split {
				cell.dropped[t.from] = max(cell.dropped[t.from], r.AssemblyFailures)
			}
			if r, ok := records[t.id]; ok && t.state != stateDone {
				t.failures, t.lastErr = r.Failures, r.Error
				if r.Parked {
					t.state = stateParked
				}
			}
			switch t.state {
			case stateDone:
				c.nDone++
			case stateParked:
				c.nParked++
			default:
				c.queue = append(c.queue, t)
			}
		}
		cell.tasks = kept
		// The share: what is done plus what the kept tasks will add (a split replicate
		// once, however many of its parts are kept).
		cell.share = cell.done
		splitReps := map[uint64]bool{}
		for _, t := range kept {
			switch {
			case !t.split:
				cell.share += t.to - t.from
			case !splitReps[t.from]:
				splitReps[t.from] = true
				cell.share++
			}
		}
		c.cells = append(c.cells, cell)
	}
	return nil
}

func mustJSON(v any) []byte { b, _ := json.Marshal(v); return b }

// Close stops the committer and the lease clock. Results already acknowledged are
// durable; the store stays open (the caller owns it).
func (c *Coordinator) Close() {
	c.sendMu.Lock() // no Submit between its check of stopped and its send (see Submit)
	c.stopOnce.Do(func() { close(c.stopped) })
	c.sendMu.Unlock()
	c.wg.Wait()
}

// Sweep is the sweep being run.
func (c *Coordinator) Sweep() *sweep.Sweep { return c.sw }

// notify wakes everyone waiting for a state change; call with mu held.
func (c *Coordinator) notify() {
	close(c.changed)
	c.changed = make(chan struct{})
}

// Finished reports whether no task is pending, leased or being committed, and how many
// tasks are parked.
func (c *Coordinator) Finished() (finished bool, parked int) {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.finishedLocked(), c.nParked
}

func (c *Coordinator) finishedLocked() bool { return c.nDone+c.nParked == len(c.byID) }

// Wait blocks until the sweep is finished (every task done or parked), the store fails
// (Err), or ctx ends.
func (c *Coordinator) Wait(ctx context.Context) error {
	for {
		c.mu.Lock()
		if c.broken != nil {
			err := c.broken
			c.mu.Unlock()
			return err
		}
		if c.finishedLocked() {
			c.mu.Unlock()
			return nil
		}
		ch := c.changed
		c.mu.Unlock()
		select {
		case <-ch:
		case <-ctx.Done():
			return ctx.Err()
		}
	}
}

// Err is why the coordinator stopped handing out work, or nil: a commit to the store
// failed (a damaged store, a full disk, a read-only file). Every result committed before
// is kept; the sweep resumes once the cause is fixed. Retrying would only compute the
// same results again and fail the same way.
func (c *Coordinator) Err() error {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.broken
}

// storeFailed records the first failed commit (see Err).
func (c *Coordinator) storeFailed(err error) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.broken == nil {
		c.broken = fmt.Errorf("writing to the store %s failed (%v): every result committed before is kept; fix the cause (or restore the store from a copy) and run again to resume", c.store.Path(), err)
		c.log.Error("store failed: no more work is handed out", "error", err)
		c.notify()
	}
}

func newID() string {
	var b [8]byte
	rand.Read(b[:])
	return hex.EncodeToString(b[:])
}

// Register introduces a worker.
func (c *Coordinator) Register(ctx context.Context, req *pb.RegisterRequest) (*pb.RegisterReply, error) {
	if req.EngineFormat != engine.Version {
		return nil, status.Errorf(codes.FailedPrecondition, "worker's engine is version %#x (random stream %d, record format %d); this coordinator's is %#x: run the same bbmx version",
			req.EngineFormat, req.EngineFormat>>8, req.EngineFormat&0xff, engine.Version)
	}
	id := newID()
	c.mu.Lock()
	c.workers[id] = time.Now()
	c.mu.Unlock()
	c.log.Info("worker registered", "worker", id, "host", req.Hostname, "threads", req.Threads)
	return &pb.RegisterReply{WorkerId: id, SweepName: c.sw.Name, SweepSha256: c.hash[:],
		HeartbeatMs: uint32(c.opt.Lease.Milliseconds() / 4), LeaseMs: uint32(c.opt.Lease.Milliseconds())}, nil
}

// Lease hands out up to MaxTasks pending tasks.
func (c *Coordinator) Lease(ctx context.Context, req *pb.LeaseRequest) (*pb.LeaseReply, error) {
	if req.WorkerId == "" {
		return nil, status.Error(codes.InvalidArgument, "lease without a worker id")
	}
	n := int(min(max(req.MaxTasks, 1), 1024))
	now := time.Now()
	deadline := now.Add(c.opt.Lease).UnixMilli()
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.broken != nil {
		return nil, status.Error(codes.FailedPrecondition, c.broken.Error())
	}
	c.workers[req.WorkerId] = now
	rep := &pb.LeaseReply{}
	for len(rep.Tasks) < n && len(c.queue) > 0 {
		t := c.queue[0]
		c.queue = c.queue[1:]
		if t.state != statePending {
			continue
		}
		t.state, t.worker, t.deadline, t.progress, t.handedBy = stateLeased, req.WorkerId, deadline, 0, ""
		t.attempts++
		rep.Tasks = append(rep.Tasks, c.taskMsg(t))
	}
	if len(rep.Tasks) > 0 {
		c.notify()
	}
	if len(rep.Tasks) == 0 {
		if c.finishedLocked() {
			rep.Complete = true
		} else {
			rep.RetryAfterMs = uint32(min(c.opt.Lease.Milliseconds()/8, 2000))
		}
	}
	return rep, nil
}

func (c *Coordinator) taskMsg(t *task) *pb.Task {
	return &pb.Task{TaskId: t.id, Attempt: t.attempts, CellId: t.cell.spec.ID, CellJson: t.cell.cellJSON,
		Seed: c.sw.Seed, From: t.from, To: t.to, SplitAt: t.splitAt, Roots: t.roots,
		RootFrom: t.rootFrom, RootTo: t.rootTo, DeadlineUnixMs: t.deadline}
}

// Heartbeat extends the worker's leases. A task that is pending again (its lease
// expired, or the coordinator restarted) is taken back by this worker; tasks that are
// done or held by another worker are reported lost.
func (c *Coordinator) Heartbeat(ctx context.Context, req *pb.HeartbeatRequest) (*pb.HeartbeatReply, error) {
	now := time.Now()
	deadline := now.Add(c.opt.Lease).UnixMilli()
	c.mu.Lock()
	defer c.mu.Unlock()
	c.workers[req.WorkerId] = now
	rep := &pb.HeartbeatReply{DeadlineUnixMs: deadline}
	for _, tp := range req.Tasks {
		t := c.byID[tp.TaskId]
		switch {
		case t == nil:
			rep.Lost = append(rep.Lost, tp.TaskId)
		case t.state == stateLeased && t.worker == req.WorkerId:
			t.deadline, t.progress = deadline, tp.Done
		case t.state == statePending && t.handedBy != req.WorkerId:
			// A task this worker holds but the coordinator does not know as leased (it
			// restarted, or the lease expired while the heartbeat was late): adopted.
			// Not one the worker itself handed back: a heartbeat sent just before the
			// hand-back must not take it again.
			t.state, t.worker, t.deadline, t.progress = stateLeased, req.WorkerId, deadline, tp.Done
			t.attempts++
			c.notify()
		case t.state == stateCommitting:
		default:
			rep.Lost = append(rep.Lost, tp.TaskId)
		}
	}
	return rep, nil
}

// Release hands leases back. With an error, each counts as a failed attempt.
func (c *Coordinator) Release(ctx context.Context, req *pb.ReleaseRequest) (*pb.ReleaseReply, error) {
	c.mu.Lock()
	var failed []*task
	for _, id := range req.TaskIds {
		t := c.byID[id]
		if t == nil || t.state != stateLeased || t.worker != req.WorkerId {
			continue
		}
		// Handed back either way: a heartbeat this worker sent before the release
		// must not take the task again.
		t.handedBy = req.WorkerId
		if req.Error == "" {
			c.requeueLocked(t)
			continue
		}
		failed = append(failed, t)
	}
	c.mu.Unlock()
	for _, t := range failed {
		c.fail(t, "worker error: "+req.Error, leasedTo(req.WorkerId))
	}
	return &pb.ReleaseReply{}, nil
}

// requeueLocked puts a task back at the front of the queue.
func (c *Coordinator) requeueLocked(t *task) {
	t.state, t.worker, t.progress = statePending, "", 0
	c.queue = append([]*task{t}, c.queue...)
	c.notify()
}

// fail counts a failed attempt, parks the task after MaxFailures, persists its state,
// and otherwise re-queues it; only if still(t) holds when it takes the lock, because
// the caller decided without it: a worker may have submitted the task's result
// meanwhile (it is then being committed or done), or it may have been handed back and
// leased again.
func (c *Coordinator) fail(t *task, why string, still func(*task) bool) {
	c.mu.Lock()
	if !still(t) {
		c.mu.Unlock()
		return
	}
	t.failures++
	t.lastErr = why
	rec := c.recordLocked(t)
	if t.failures >= c.opt.MaxFailures {
		rec.Parked = true
		t.state, t.worker = stateParked, ""
		c.nParked++
		c.notify()
		c.log.Error("task parked after repeated failures", "task", t.id, "failures", t.failures, "error", why)
	} else {
		c.requeueLocked(t)
		c.log.Warn("task attempt failed; re-queued", "task", t.id, "failures", t.failures, "error", why)
	}
	c.mu.Unlock()
	err := c.store.Update(func(tx *bolt.Tx) error {
		b, err := coordBucket(tx, keyTasks)
		if err != nil {
			return err
		}
		return b.Put([]byte(t.id), mustJSON(rec))
	})
	if err != nil {
		c.log.Error("could not persist task state", "task", t.id, "error", err)
	}
}

// recordLocked is the persisted state of t as it stands (parked is set by the caller).
func (c *Coordinator) recordLocked(t *task) taskRecord {
	rec := taskRecord{Failures: t.failures, Error: t.lastErr}
	if t.split {
		rec.AssemblyFailures = t.cell.dropped[t.from]
	}
	return rec
}

// leasedTo is fail's condition for a task a worker gave up: still leased to it.
func leasedTo(worker string) func(*task) bool {
	return func(t *task) bool { return t.state == stateLeased && t.worker == worker }
}

// expiredBy is fail's condition for the clock: still leased, the deadline past.
func expiredBy(now int64) func(*task) bool {
	return func(t *task) bool { return t.state == stateLeased && t.deadline < now }
}

func coordBucket(tx *bolt.Tx, name []byte) (*bolt.Bucket, error) {
	cb, err := tx.CreateBucketIfNotExists(bucketCoord)
	if err != nil {
		return nil, err
	}
	return cb.CreateBucketIfNotExists(name)
}

// coordBuckets is coordBucket for several names, in their order.
func coordBuckets(tx *bolt.Tx, names ...[]byte) ([]*bolt.Bucket, error) {
	bs := make([]*bolt.Bucket, len(names))
	for i, name := range names {
		b, err := coordBucket(tx, name)
		if err != nil {
			return nil, err
		}
		bs[i] = b
	}
	return bs, nil
}

// clock expires leases whose deadline passed.
func (c *Coordinator) clock() {
	defer c.wg.Done()
	tick := time.NewTicker(max(c.opt.Lease/8, 10*time.Millisecond))
	defer tick.Stop()
	for {
		select {
		case <-c.stopped:
			return
		case <-tick.C:
		}
		now := time.Now().UnixMilli()
		var expired []*task
		var workers []string
		c.mu.Lock()
		for _, t := range c.byID {
			if t.state == stateLeased && t.deadline < now {
				expired = append(expired, t)
			}
		}
		sort.Slice(expired, func(i, j int) bool { return expired[i].id < expired[j].id })
		for _, t := range expired {
			workers = append(workers, t.worker)
		}
		c.stats.expiries += uint64(len(expired))
		c.mu.Unlock()
		for i, t := range expired {
			c.fail(t, fmt.Sprintf("lease expired (worker %s stopped sending heartbeats)", workers[i]), expiredBy(now))
		}
	}
}

// Submit accepts one task's result. It returns after the result is durable.
func (c *Coordinator) Submit(ctx context.Context, req *pb.SubmitRequest) (*pb.SubmitReply, error) {
	sum := resultDigest(req)
	c.mu.Lock()
	t := c.byID[req.TaskId]
	if t == nil {
		c.mu.Unlock()
		return c.lateSubmit(req, sum)
	}
	switch t.state {
	case stateDone:
		stored := t.digest
		c.stats.duplicates++
		c.mu.Unlock()
		return c.compareDuplicate(req, sum, stored)
	case stateCommitting:
		c.stats.duplicates++
		c.mu.Unlock()
		return &pb.SubmitReply{Duplicate: true, Message: "another result for this task is being committed"}, nil
	}
	prev := t.state
	t.state = stateCommitting
	c.mu.Unlock()

	// A part is queued for commit in the order parts are validated: the part that
	// completes a replicate deletes the replicate's stored parts in its commit, so a part
	// validated before it but queued after it would be stored for good.
	unlockOrder := func() {}
	if t.split {
		c.partOrder.Lock()
		unlockOrder = c.partOrder.Unlock
	}
	cr, err := c.validate(t, prev, req)
	if err != nil {
		unlockOrder()
	}
	var notAssembled *assemblyError
	if errors.As(err, &notAssembled) {
		// Not this worker's fault as far as anyone can tell: validate has dropped the
		// replicate's parts and queued its tasks again (or parked them).
		return nil, status.Errorf(codes.FailedPrecondition, "task %s: %v", t.id, err)
	}
	if err != nil {
		c.mu.Lock()
		t.state = prev
		c.stats.rejected++
		c.mu.Unlock()
		c.log.Error("REJECTED a result that fails validation: worker fault", "task", t.id, "worker", req.WorkerId, "error", err)
		// counts an attempt; a parked or done task stays so
		c.fail(t, "invalid result: "+err.Error(), func(t *task) bool { return t.state == statePending || t.state == stateLeased })
		return nil, status.Errorf(codes.InvalidArgument, "task %s: result rejected: %v", t.id, err)
	}
	cr.digest = sum
	cr.done = make(chan error, 1)
	// The send is gated by sendMu so that Close cannot slip in between the check and
	// the send: once stopped is closed no request enters the queue, and every request
	// that did is committed by the committer's final drain.
	c.sendMu.RLock()
	select {
	case <-c.stopped:
		c.sendMu.RUnlock()
		unlockOrder()
		c.restore(t, prev, cr)
		return nil, status.Error(codes.Unavailable, "coordinator is shutting down")
	default:
		c.commits <- cr
		c.sendMu.RUnlock()
		unlockOrder()
	}
	if err := <-cr.done; err != nil {
		c.restore(t, prev, cr)
		c.log.Error("commit failed", "task", t.id, "error", err)
		return nil, status.Errorf(codes.Internal, "task %s: could not commit: %v", t.id, err)
	}
	c.mu.Lock()
	if cr.part != nil && !cr.dropParts && cr.round != t.cell.dropped[t.from] {
		err := c.dropStalePartLocked(t, prev)
		c.mu.Unlock()
		return nil, status.Errorf(codes.FailedPrecondition, "task %s: %v", t.id, err)
	}
	if prev == stateParked {
		c.nParked--
	}
	t.state, t.digest, t.worker = stateDone, sum, ""
	if cr.dropParts {
		delete(t.cell.parts, t.from) // the replicate is committed whole
	}
	c.nDone++
	c.stats.completions++
	c.stats.computeNS += max(req.ComputeNs, 0)
	t.cell.done += cr.replicates
	c.notify()
	c.mu.Unlock()
	return &pb.SubmitReply{Accepted: true}, nil
}

// restore undoes a Submit whose commit did not happen.
func (c *Coordinator) restore(t *task, prev taskState, cr *commitReq) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if cr.part != nil {
		delete(t.cell.parts[t.from], t.rootFrom)
	}
	if prev == statePending || prev == stateLeased {
		c.requeueLocked(t)
	} else {
		t.state = prev
	}
}

// lateSubmit handles a result for a task this coordinator did not plan: usually one
// finished before a restart. Its digest, if kept, is compared.
func (c *Coordinator) lateSubmit(req *pb.SubmitRequest, sum [32]byte) (*pb.SubmitReply, error) {
	var stored []byte
	err := c.store.View(func(tx *bolt.Tx) error {
		if cb := tx.Bucket(bucketCoord); cb != nil {
			if db := cb.Bucket(keyDone); db != nil {
				stored = append([]byte(nil), db.Get([]byte(req.TaskId))...)
			}
		}
		return nil
	})
	if err != nil {
		return nil, status.Errorf(codes.Internal, "task %s: reading the store: %v", req.TaskId, err)
	}
	if len(stored) != 32 {
		return nil, status.Errorf(codes.NotFound, "task %s is not part of this sweep", req.TaskId)
	}
	c.mu.Lock()
	c.stats.duplicates++
	c.mu.Unlock()
	return c.compareDuplicate(req, sum, [32]byte(stored))
}

func (c *Coordinator) compareDuplicate(req *pb.SubmitRequest, sum, stored [32]byte) (*pb.SubmitReply, error) {
	if sum != stored {
		c.log.Error("DUPLICATE RESULT DIFFERS from the accepted one: worker fault (bad hardware or a different bbmx build?)",
			"task", req.TaskId, "worker", req.WorkerId)
		return &pb.SubmitReply{Duplicate: true, Message: "result differs from the one already accepted; dropped (worker fault logged)"}, nil
	}
	return &pb.SubmitReply{Duplicate: true, Message: "already done; identical result dropped"}, nil
}

// resultDigest is the SHA-256 of a submission's payload.
func resultDigest(req *pb.SubmitRequest) [32]byte {
	h := sha256.New()
	var n [8]byte
	for _, r := range req.Records {
		binary.BigEndian.PutUint64(n[:], uint64(len(r)))
		h.Write(n[:])
		h.Write(r)
	}
	binary.BigEndian.PutUint64(n[:], uint64(len(req.Part)))
	h.Write(n[:])
	h.Write(req.Part)
	var out [32]byte
	h.Sum(out[:0])
	return out
}

// Inspect reports the progress of the sweep a store was made by, without running
// anything (for `bbmx status --store`).
func Inspect(st *results.Store) (*pb.StatusReply, error) {
	spec, _, err := st.Spec()
	if err != nil {
		return nil, err
	}
	sw, err := sweep.Decode(spec)
	if err != nil {
		return nil, fmt.Errorf("%s was not made by a sweep: %w", st.Path(), err)
	}
	c, err := planned(st, sw, Options{Lease: time.Minute})
	if err != nil {
		return nil, err
	}
	return c.StatusNow(), nil
}
