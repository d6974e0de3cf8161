package coordinator

import (
	"bytes"
	"context"
	"path/filepath"
	"strings"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"bbmx/coordinator/sweep"
	"bbmx/engine"
	pb "bbmx/proto/bbmx/v1"
	"bbmx/results"
	"bbmx/worker"
)

const testSweep = `
name = "coordinator-test"
seed = 99
[grid]
dims = [1, 2]
horizons = [2.5, 3]
replicates = 40
[observe]
checkpoints = [1]
`

func mustSweep(t testing.TB, src string) *sweep.Sweep {
	t.Helper()
	sw, err := sweep.Parse([]byte(src), "test.toml")
	if err != nil {
		t.Fatal(err)
	}
	return sw
}

func newStore(t testing.TB, sw *sweep.Sweep) *results.Store {
	t.Helper()
	st, err := results.Create(filepath.Join(t.TempDir(), "s.db"), sw.Canonical())
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	return st
}

// runLocal runs a whole sweep in process and returns the store's content digest.
func runLocal(t testing.TB, sw *sweep.Sweep, st *results.Store, opt Options, threads int) [32]byte {
	t.Helper()
	co, err := Open(st, sw, opt)
	if err != nil {
		t.Fatal(err)
	}
	defer co.Close()
	if _, err := worker.Run(context.Background(), co, worker.Options{Threads: threads}); err != nil {
		t.Fatal(err)
	}
	if fin, parked := co.Finished(); !fin || parked != 0 {
		t.Fatalf("finished %v, parked %d", fin, parked)
	}
	d, err := st.ContentDigest()
	if err != nil {
		t.Fatal(err)
	}
	return d
}

// reference simulates every replicate directly with the engine and commits it in one
// batch: what any coordinated run must reproduce bit for bit.
func reference(t testing.TB, sw *sweep.Sweep) [32]byte {
	st := newStore(t, sw)
	var batch []results.TaskResult
	for _, cs := range sw.Cells() {
		recs, err := engine.Batch{Cell: cs.Cell, Seed: sw.Seed, From: 0, To: cs.Replicates, Threads: 2}.Run(context.Background())
		if err != nil {
			t.Fatal(err)
		}
		batch = append(batch, results.TaskResult{CellID: cs.ID, Cell: cs.Cell, Seed: sw.Seed, Records: recs, KeepRecords: true})
	}
	if err := st.Commit(batch, nil); err != nil {
		t.Fatal(err)
	}
	d, _ := st.ContentDigest()
	return d
}

// The coordinated result equals the direct simulation bit for bit, whatever the task
// size, the thread count, the splitting of replicates into subtree tasks or the sharding.
func TestCoordinatedEqualsDirect(t *testing.T) {
	sw := mustSweep(t, testSweep)
	want := reference(t, sw)
	cases := []struct {
		name    string
		opt     Options
		threads int
	}{
		{"default", Options{}, 2},
		{"small tasks, 3 threads", Options{PerTask: 7}, 3},
		{"split replicates", Options{Parts: 3}, 2},
	}
	for _, tc := range cases {
		if got := runLocal(t, sw, newStore(t, sw), tc.opt, tc.threads); got != want {
			t.Errorf("%s: content digest differs from the direct simulation", tc.name)
		}
	}
	// Shards merged afterwards.
	dir := t.TempDir()
	var paths []string
	for i := 0; i < 3; i++ {
		p := filepath.Join(dir, "shard"+string(rune('0'+i))+".db")
		st, err := results.Create(p, sw.Canonical())
		if err != nil {
			t.Fatal(err)
		}
		runLocal(t, sw, st, Options{Shard: i, Shards: 3, PerTask: 9}, 2)
		st.Close()
		paths = append(paths, p)
	}
	out := filepath.Join(dir, "merged.db")
	if err := results.MergeStores(out, paths); err != nil {
		t.Fatal(err)
	}
	st, err := results.Open(out, true)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	if got, _ := st.ContentDigest(); got != want {
		t.Error("merged shards differ from the direct simulation")
	}
}

// Stopping half way and resuming on the same store redoes nothing and counts nothing
// twice; the end result is the same.
func TestResumeAfterStop(t *testing.T) {
	sw := mustSweep(t, testSweep)
	want := reference(t, sw)
	st := newStore(t, sw)
	co, err := Open(st, sw, Options{PerTask: 5})
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	reg, _ := co.Register(ctx, &pb.RegisterRequest{EngineFormat: engine.Version})
	// Do three tasks by hand, lease a fourth and abandon it.
	lease, _ := co.Lease(ctx, &pb.LeaseRequest{WorkerId: reg.WorkerId, MaxTasks: 4})
	for _, task := range lease.Tasks[:3] {
		submit(t, co, reg.WorkerId, task)
	}
	co.Close()
	total := countTasks(co)

	co2, err := Open(st, sw, Options{PerTask: 5})
	if err != nil {
		t.Fatal(err)
	}
	if got := countTasks(co2); got != total-3 {
		t.Fatalf("after restart %d tasks planned, want %d (three were done)", got, total-3)
	}
	co2.Close()
	if got := runLocal(t, sw, st, Options{PerTask: 5}, 2); got != want {
		t.Fatal("resumed run differs from the direct simulation")
	}
	for _, cs := range sw.Cells() {
		_, sk, err := st.CellSketch(cs.ID)
		if err != nil {
			t.Fatal(err)
		}
		if sk.N != cs.Replicates {
			t.Fatalf("cell %s holds %d replicates, want %d", cs.ID, sk.N, cs.Replicates)
		}
	}
}

func countTasks(c *Coordinator) int {
	c.mu.Lock()
	defer c.mu.Unlock()
	return len(c.byID)
}

// submit computes a task as a worker would and submits it.
func submit(t testing.TB, co *Coordinator, worker string, task *pb.Task) *pb.SubmitReply {
	t.Helper()
	req := computeTask(t, task)
	req.WorkerId = worker
	rep, err := co.Submit(context.Background(), req)
	if err != nil {
		t.Fatal(err)
	}
	return rep
}

func computeTask(t testing.TB, task *pb.Task) *pb.SubmitRequest {
	t.Helper()
	var c engine.Cell
	if err := jsonUnmarshal(task.CellJson, &c); err != nil {
		t.Fatal(err)
	}
	req := &pb.SubmitRequest{TaskId: task.TaskId, Attempt: task.Attempt}
	if task.SplitAt > 0 {
		p, err := engine.SimulatePart(c, task.Seed, task.From, task.SplitAt, task.RootFrom, task.RootTo)
		if err != nil {
			t.Fatal(err)
		}
		req.Part = p.AppendBinary(nil)
		return req
	}
	for r := task.From; r < task.To; r++ {
		rec, err := engine.Simulate(c, task.Seed, r)
		if err != nil {
			t.Fatal(err)
		}
		req.Records = append(req.Records, rec.AppendBinary(nil))
	}
	return req
}

// Duplicates are dropped (and compared), corrupted results are rejected before they
// touch the store, and a task failing too often is parked without hanging the sweep.
func TestDuplicatesCorruptionAndParking(t *testing.T) {
	sw := mustSweep(t, testSweep)
	st := newStore(t, sw)
	co, err := Open(st, sw, Options{PerTask: 10, MaxFailures: 2})
	if err != nil {
		t.Fatal(err)
	}
	defer co.Close()
	ctx := context.Background()
	reg, _ := co.Register(ctx, &pb.RegisterRequest{EngineFormat: engine.Version})
	w := reg.WorkerId
	lease, _ := co.Lease(ctx, &pb.LeaseRequest{WorkerId: w, MaxTasks: 3})
	a, b, c := lease.Tasks[0], lease.Tasks[1], lease.Tasks[2]

	if rep := submit(t, co, w, a); !rep.Accepted {
		t.Fatalf("first result not accepted: %v", rep)
	}
	before, _ := st.ContentDigest()
	if rep := submit(t, co, w, a); !rep.Duplicate || rep.Accepted {
		t.Fatalf("identical duplicate: %v", rep)
	}
	// A late duplicate that differs is dropped too (and logged as a worker fault).
	bad := computeTask(t, a)
	bad.WorkerId = w
	bad.Records[0] = bad.Records[1]
	if rep, err := co.Submit(ctx, bad); err != nil || !rep.Duplicate {
		t.Fatalf("differing duplicate: %v %v", rep, err)
	}
	if after, _ := st.ContentDigest(); after != before {
		t.Fatal("a duplicate changed the store")
	}

	// Corruptions of b: each is rejected with InvalidArgument and the store is unchanged.
	good := computeTask(t, b)
	corrupt := []func(r *pb.SubmitRequest){
		func(r *pb.SubmitRequest) { r.Records = r.Records[1:] },                               // too few
		func(r *pb.SubmitRequest) { r.Records[2] = r.Records[2][:len(r.Records[2])/2] },       // truncated
		func(r *pb.SubmitRequest) { r.Records[0], r.Records[1] = r.Records[1], r.Records[0] }, // wrong order
		func(r *pb.SubmitRequest) { r.Part = []byte{1, 2, 3} },                                // a part on a range task
		func(r *pb.SubmitRequest) { r.Records[3] = nanRadius(t, r.Records[3]) },               // NaN radius
		func(r *pb.SubmitRequest) { r.Records[4] = overlongFirstByte(r.Records[4]) },          // same record, other bytes
	}
	for i, f := range corrupt {
		r := &pb.SubmitRequest{TaskId: good.TaskId, Attempt: good.Attempt, WorkerId: w, Part: good.Part}
		for _, x := range good.Records {
			r.Records = append(r.Records, bytes.Clone(x))
		}
		f(r)
		_, err := co.Submit(ctx, r)
		if status.Code(err) != codes.InvalidArgument {
			t.Fatalf("corruption %d: want InvalidArgument, got %v", i, err)
		}
	}
	if after, _ := st.ContentDigest(); after != before {
		t.Fatal("a rejected result changed the store")
	}
	stat := co.StatusNow()
	if len(stat.Parked) != 1 || stat.Parked[0].TaskId != b.TaskId {
		t.Fatalf("task %s should be parked after repeated bad results; parked: %v", b.TaskId, stat.Parked)
	}
	// A parked task still accepts a valid late result.
	good.WorkerId = w
	if rep, err := co.Submit(ctx, good); err != nil || !rep.Accepted {
		t.Fatalf("valid result for a parked task: %v %v", rep, err)
	}
	// Failing c through Release with an error twice parks it.
	co.Release(ctx, &pb.ReleaseRequest{WorkerId: w, TaskIds: []string{c.TaskId}, Error: "disk full"})
	again, _ := co.Lease(ctx, &pb.LeaseRequest{WorkerId: w, MaxTasks: 1})
	if len(again.Tasks) != 1 || again.Tasks[0].TaskId != c.TaskId || again.Tasks[0].Attempt != 2 {
		t.Fatalf("released task should come back first with attempt 2: %v", again.Tasks)
	}
	co.Release(ctx, &pb.ReleaseRequest{WorkerId: w, TaskIds: []string{c.TaskId}, Error: "disk full"})
	if st := co.StatusNow(); len(st.Parked) != 1 || st.Parked[0].TaskId != c.TaskId {
		t.Fatalf("want %s parked, got %v", c.TaskId, st.Parked)
	}
	// Unknown task ids are refused.
	if _, err := co.Submit(ctx, &pb.SubmitRequest{TaskId: "nope", WorkerId: w}); status.Code(err) != codes.NotFound {
		t.Fatalf("unknown task: %v", err)
	}
	// The parked state survives a restart.
	co.Close()
	co2, err := Open(st, sw, Options{PerTask: 10, MaxFailures: 2})
	if err != nil {
		t.Fatal(err)
	}
	defer co2.Close()
	if st := co2.StatusNow(); len(st.Parked) != 1 || st.Parked[0].Error != "worker error: disk full" {
		t.Fatalf("parked task after restart: %v", st.Parked)
	}
}

// overlongFirstByte respells an encoding's first varint (after the format byte), when it
// fits one byte, as two: the same value, other bytes.
func overlongFirstByte(enc []byte) []byte {
	return append([]byte{enc[0], enc[1] | 0x80, 0}, enc[2:]...)
}

// nanRadius replaces the first top radius of an encoded record by NaN, re-encoding so
// only validation (not decoding) can catch it.
func nanRadius(t testing.TB, enc []byte) []byte {
	rec, _, err := engine.DecodeRecord(enc)
	if err != nil {
		t.Fatal(err)
	}
	rec.Top[0].Radius = nan()
	return rec.AppendBinary(nil)
}

// Expired leases go back to the queue and are leased again; a task whose worker
// vanished is finished by another.
func TestLeaseExpiry(t *testing.T) {
	sw := mustSweep(t, testSweep)
	want := reference(t, sw)
	st := newStore(t, sw)
	co, err := Open(st, sw, Options{PerTask: 20, Lease: 300 * time.Millisecond, MaxFailures: 5})
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	reg, _ := co.Register(ctx, &pb.RegisterRequest{EngineFormat: engine.Version})
	lost, _ := co.Lease(ctx, &pb.LeaseRequest{WorkerId: reg.WorkerId, MaxTasks: 2})
	if len(lost.Tasks) != 2 {
		t.Fatal("no tasks leased")
	}
	// This worker goes silent. Another one does the whole sweep after the leases expire.
	if _, err := worker.Run(ctx, co, worker.Options{Threads: 2}); err != nil {
		t.Fatal(err)
	}
	if s := co.StatusNow(); s.LeaseExpiries < 2 || !s.Complete {
		t.Fatalf("want 2 expiries and a complete sweep: %v", s)
	}
	// The silent worker's late result is a duplicate.
	if rep := submit(t, co, reg.WorkerId, lost.Tasks[0]); !rep.Duplicate {
		t.Fatalf("late result: %v", rep)
	}
	co.Close()
	if got, _ := st.ContentDigest(); got != want {
		t.Fatal("result differs from the direct simulation")
	}
}

// A store made by another sweep, or by a sweep with another seed, is refused; a grown
// sweep continues it.
func TestSpecChecks(t *testing.T) {
	sw := mustSweep(t, testSweep)
	st := newStore(t, sw)
	runLocal(t, sw, st, Options{}, 2)
	seed := mustSweep(t, `seed = 100
[grid]
dims = [1, 2]
horizons = [2.5, 3]
replicates = 40
[observe]
checkpoints = [1]`)
	if _, err := Open(st, seed, Options{}); err == nil {
		t.Fatal("a sweep with another seed was accepted")
	}
	grown := mustSweep(t, `name = "coordinator-test"
seed = 99
[grid]
dims = [1, 2]
horizons = [2.5, 3, 3.5]
replicates = 60
[observe]
checkpoints = [1]`)
	co, err := Open(st, grown, Options{})
	if err != nil {
		t.Fatal(err)
	}
	st2 := co.StatusNow()
	co.Close()
	var done, wantN uint64
	for _, c := range st2.Cells {
		done, wantN = done+c.ReplicatesDone, wantN+c.ReplicatesWanted
	}
	if done != 4*40 || wantN != 6*60 {
		t.Fatalf("grown sweep: %d done of %d wanted; want 160 of 360", done, wantN)
	}
	runLocal(t, grown, st, Options{}, 2)
	if got, want := mustDigest(t, st), reference(t, grown); got != want {
		t.Fatal("grown sweep differs from a direct simulation of the grown grid")
	}
}

func mustDigest(t testing.TB, st *results.Store) [32]byte {
	d, err := st.ContentDigest()
	if err != nil {
		t.Fatal(err)
	}
	return d
}

// Each shard's share of a cell is what its store holds when it is done, and the shares
// add up to the cell, for range tasks and split replicates alike.
func TestShardShares(t *testing.T) {
	sw := mustSweep(t, testSweep)
	for _, opt := range []Options{{PerTask: 9}, {Parts: 3}} {
		sum := map[string]uint64{}
		for i := 0; i < 3; i++ {
			o := opt
			o.Shard, o.Shards = i, 3
			st := newStore(t, sw)
			co, err := Open(st, sw, o)
			if err != nil {
				t.Fatal(err)
			}
			share := co.Share()
			co.Close()
			runLocal(t, sw, st, o, 2)
			for id, n := range share {
				sum[id] += n
				if _, sk, err := st.CellSketch(id); err != nil || sk.N != n {
					t.Fatalf("%+v shard %d cell %s: share %d, store holds %v (%v)", opt, i, id, n, sk, err)
				}
			}
		}
		for _, c := range sw.Cells() {
			if sum[c.ID] != c.Replicates {
				t.Errorf("%+v: shares of cell %s add up to %d, want %d", opt, c.ID, sum[c.ID], c.Replicates)
			}
		}
	}
	co, err := Open(newStore(t, sw), sw, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer co.Close()
	for _, c := range sw.Cells() {
		if n := co.Share()[c.ID]; n != c.Replicates {
			t.Errorf("unsharded share of %s: %d, want %d", c.ID, n, c.Replicates)
		}
	}
}

// A heartbeat that names a task its worker has just handed back (sent before the
// hand-back arrived) does not take the task again; another worker's heartbeat for a
// pending task still adopts it (the coordinator-restart case), and the first worker can
// lease it again normally.
func TestHandedBackTaskNotReadopted(t *testing.T) {
	sw := mustSweep(t, testSweep)
	co, err := Open(newStore(t, sw), sw, Options{PerTask: 10})
	if err != nil {
		t.Fatal(err)
	}
	defer co.Close()
	ctx := context.Background()
	a, _ := co.Register(ctx, &pb.RegisterRequest{EngineFormat: engine.Version})
	b, _ := co.Register(ctx, &pb.RegisterRequest{EngineFormat: engine.Version})
	lease, _ := co.Lease(ctx, &pb.LeaseRequest{WorkerId: a.WorkerId, MaxTasks: 1})
	id := lease.Tasks[0].TaskId
	co.Release(ctx, &pb.ReleaseRequest{WorkerId: a.WorkerId, TaskIds: []string{id}})
	beat := func(w string) *pb.HeartbeatReply {
		rep, err := co.Heartbeat(ctx, &pb.HeartbeatRequest{WorkerId: w, Tasks: []*pb.TaskProgress{{TaskId: id, Attempt: 1}}})
		if err != nil {
			t.Fatal(err)
		}
		return rep
	}
	if rep := beat(a.WorkerId); len(rep.Lost) != 1 || rep.Lost[0] != id {
		t.Fatalf("a late heartbeat took back a handed-back task: lost %v", rep.Lost)
	}
	if n := leasedCount(co); n != 0 {
		t.Fatalf("%d tasks leased after the hand-back", n)
	}
	if rep := beat(b.WorkerId); len(rep.Lost) != 0 || leasedCount(co) != 1 {
		t.Fatalf("another worker's heartbeat should adopt the pending task: lost %v", rep.Lost)
	}
	co.Release(ctx, &pb.ReleaseRequest{WorkerId: b.WorkerId, TaskIds: []string{id}})
	again, _ := co.Lease(ctx, &pb.LeaseRequest{WorkerId: a.WorkerId, MaxTasks: 1})
	if len(again.Tasks) != 1 || again.Tasks[0].TaskId != id {
		t.Fatalf("the handed-back task should be leased first: %v", again.Tasks)
	}
	if rep := beat(a.WorkerId); len(rep.Lost) != 0 {
		t.Fatalf("heartbeat for a task leased again: lost %v", rep.Lost)
	}
}

func leasedCount(co *Coordinator) (n uint64) {
	for _, c := range co.StatusNow().Cells {
		n += c.TasksLeased
	}
	return n
}

// TestRetryParked: a task parked after repeated failures stays parked when the
// coordinator is opened again on the same store (a fault that recurs is not recomputed
// at every resume), and is queued again, its failures cleared, with RetryParked; the
// sweep then completes and its store equals a direct run's.
func TestRetryParked(t *testing.T) {
	sw := mustSweep(t, testSweep)
	st := newStore(t, sw)
	ctx := context.Background()
	co, err := Open(st, sw, Options{PerTask: 10, MaxFailures: 2})
	if err != nil {
		t.Fatal(err)
	}
	reg, _ := co.Register(ctx, &pb.RegisterRequest{EngineFormat: engine.Version})
	lease, _ := co.Lease(ctx, &pb.LeaseRequest{WorkerId: reg.WorkerId, MaxTasks: 1})
	id := lease.Tasks[0].TaskId
	for range 2 {
		co.Release(ctx, &pb.ReleaseRequest{WorkerId: reg.WorkerId, TaskIds: []string{id}, Error: "scratch disk full"})
		co.Lease(ctx, &pb.LeaseRequest{WorkerId: reg.WorkerId, MaxTasks: 1})
	}
	if s := co.StatusNow(); len(s.Parked) != 1 || s.Parked[0].TaskId != id {
		t.Fatalf("want %s parked, got %v", id, s.Parked)
	}
	co.Close()

	co, err = Open(st, sw, Options{PerTask: 10, MaxFailures: 2})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := worker.Run(ctx, co, worker.Options{Threads: 2}); err != nil {
		t.Fatal(err)
	}
	if fin, parked := co.Finished(); !fin || parked != 1 {
		t.Fatalf("reopened without RetryParked: finished %v, parked %d; want the task still parked", fin, parked)
	}
	co.Close()

	co, err = Open(st, sw, Options{PerTask: 10, MaxFailures: 2, RetryParked: true})
	if err != nil {
		t.Fatal(err)
	}
	if s := co.StatusNow(); len(s.Parked) != 0 {
		t.Fatalf("RetryParked left %v parked", s.Parked)
	}
	// One more failure does not park it again: its count was cleared.
	reg, _ = co.Register(ctx, &pb.RegisterRequest{EngineFormat: engine.Version})
	lease, _ = co.Lease(ctx, &pb.LeaseRequest{WorkerId: reg.WorkerId, MaxTasks: 1})
	if len(lease.Tasks) != 1 || lease.Tasks[0].TaskId != id {
		t.Fatalf("want %s leased, got %v", id, lease.Tasks)
	}
	co.Release(ctx, &pb.ReleaseRequest{WorkerId: reg.WorkerId, TaskIds: []string{id}, Error: "scratch disk full"})
	if s := co.StatusNow(); len(s.Parked) != 0 {
		t.Fatalf("one failure after the retry parked %v", s.Parked)
	}
	if _, err := worker.Run(ctx, co, worker.Options{Threads: 2}); err != nil {
		t.Fatal(err)
	}
	if fin, parked := co.Finished(); !fin || parked != 0 {
		t.Fatalf("after the retry: finished %v, parked %d", fin, parked)
	}
	co.Close()
	got, err := st.ContentDigest()
	if err != nil {
		t.Fatal(err)
	}
	if got != reference(t, sw) {
		t.Fatal("the store after the retry differs from a direct run's")
	}
}

// A commit that fails (here a store whose cell entry is a plain value where a bucket
// belongs, as a damaged page makes it) stops the sweep with an error naming the store:
// no more work is leased, Wait returns the error, and the workers stop. Before, the
// result was refused, its task queued again, recomputed and refused again, forever.
// What was committed before the failure stays.
func TestStoreFailureStopsTheSweep(t *testing.T) {
	sw := mustSweep(t, testSweep)
	st := newStore(t, sw)
	co, err := Open(st, sw, Options{PerTask: 20})
	if err != nil {
		t.Fatal(err)
	}
	defer co.Close()
	ctx := context.Background()
	reg, _ := co.Register(ctx, &pb.RegisterRequest{EngineFormat: engine.Version})
	lease, err := co.Lease(ctx, &pb.LeaseRequest{WorkerId: reg.WorkerId, MaxTasks: 100})
	if err != nil {
		t.Fatal(err)
	}
	first, second := lease.Tasks[0], lease.Tasks[len(lease.Tasks)-1]
	if first.CellId == second.CellId {
		t.Fatal("want tasks of two cells")
	}
	if rep := submit(t, co, reg.WorkerId, first); !rep.Accepted {
		t.Fatalf("first result: %v", rep)
	}
	bad := second.CellId
	if err := st.Update(func(tx *bolt.Tx) error {
		cells := tx.Bucket([]byte("cells"))
		if cells.Bucket([]byte(bad)) != nil {
			if err := cells.DeleteBucket([]byte(bad)); err != nil {
				return err
			}
		}
		return cells.Put([]byte(bad), []byte("not a bucket"))
	}); err != nil {
		t.Fatal(err)
	}
	_, err = co.Submit(ctx, computeTask(t, second))
	if status.Code(err) != codes.Internal {
		t.Fatalf("submit to a failing store: %v", err)
	}
	if _, err := co.Lease(ctx, &pb.LeaseRequest{WorkerId: reg.WorkerId, MaxTasks: 1}); status.Code(err) != codes.FailedPrecondition ||
		!strings.Contains(err.Error(), st.Path()) {
		t.Fatalf("lease after the store failed: %v", err)
	}
	wctx, cancel := context.WithTimeout(ctx, 10*time.Second)
	defer cancel()
	if err := co.Wait(wctx); err == nil || co.Err() == nil || !strings.Contains(err.Error(), "writing to the store") {
		t.Fatalf("Wait: %v, Err: %v", err, co.Err())
	}
	if _, err := worker.Run(wctx, co, worker.Options{Threads: 2}); status.Code(err) != codes.FailedPrecondition {
		t.Fatalf("a worker against the stopped coordinator: %v", err)
	}
	if got := co.StatusNow().Completions; got != 1 {
		t.Fatalf("%d tasks done, want the one committed before the failure", got)
	}
}
