package coordinator

import (
	"context"
	"strings"
	"testing"
	"time"

	"bbmx/engine"
	pb "bbmx/proto/bbmx/v1"
	"bbmx/worker"
)

// splitSweep is a one-cell sweep of 20 replicates whose split time is s.
func splitSweep(s string) string {
	return "name = \"resplit\"\nseed = 7\nsplit_at = " + s + "\n[grid]\ndims = [1]\nhorizons = [3]\nreplicates = 20\n[observe]\ncheckpoints = [1]\n"
}

// openOn opens a coordinator of the sweep in src on a new store, closed when the test ends.
func openOn(t *testing.T, src string, opt Options) *Coordinator {
	t.Helper()
	sw := mustSweep(t, src)
	co, err := Open(newStore(t, sw), sw, opt)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(co.Close)
	return co
}

// leasedResult leases one task to a new worker and computes its result.
func leasedResult(t *testing.T, co *Coordinator) (*pb.Task, *pb.SubmitRequest) {
	t.Helper()
	w, tasks := register(t, co, 1)
	req := computeTask(t, tasks[0])
	req.WorkerId = w
	return tasks[0], req
}

// register registers a worker and leases it up to n tasks.
func register(t *testing.T, co *Coordinator, n uint32) (string, []*pb.Task) {
	t.Helper()
	ctx := context.Background()
	reg, err := co.Register(ctx, &pb.RegisterRequest{EngineFormat: engine.Version})
	if err != nil {
		t.Fatal(err)
	}
	l, err := co.Lease(ctx, &pb.LeaseRequest{WorkerId: reg.WorkerId, MaxTasks: n})
	if err != nil || len(l.Tasks) == 0 {
		t.Fatalf("lease: %v (%d tasks)", err, len(l.Tasks))
	}
	return reg.WorkerId, l.Tasks
}

// A sweep resumed with another cut of its split replicates (more or fewer parts, or
// another split time, which a growing sweep may change) must neither take a stored part
// of the old cut for a new task nor merge it with the new parts: the resumed sweep
// completes every replicate, and its store equals a direct run's. Deterministic.
func TestResumeWithAnotherSplit(t *testing.T) {
	for _, tc := range []struct {
		name, split string
		parts       int
	}{{"3 parts then 2", "1", 2}, {"split at 1 then 1.2", "1.2", 3}} {
		t.Run(tc.name, func(t *testing.T) {
			sw := mustSweep(t, splitSweep("1"))
			st := newStore(t, sw)
			co, err := Open(st, sw, Options{Parts: 3})
			if err != nil {
				t.Fatal(err)
			}
			w, tasks := register(t, co, 1)
			if rep := submit(t, co, w, tasks[0]); !rep.Accepted {
				t.Fatal("first part refused")
			}
			co.Close()
			sw2 := mustSweep(t, splitSweep(tc.split))
			co2, err := Open(st, sw2, Options{Parts: tc.parts})
			if err != nil {
				t.Fatal(err)
			}
			defer co2.Close()
			ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
			defer cancel()
			if _, err := worker.Run(ctx, co2, worker.Options{Threads: 2}); err != nil {
				t.Fatal(err)
			}
			if fin, parked := co2.Finished(); !fin || parked != 0 {
				t.Fatalf("finished %v, %d parked", fin, parked)
			}
			if _, sk, _ := st.CellSketch(sw.Cells()[0].ID); sk.N != 20 {
				t.Fatalf("the cell holds %d of 20 replicates", sk.N)
			}
			if got, want := mustDigest(t, st), reference(t, sw2); got != want {
				t.Fatal("the resumed store differs from a direct run")
			}
		})
	}
}

// A lease that expires while its result is being committed is not failed: the task is
// done once, not also parked, and the sweep is not finished before its other task has
// run. The clock's step (fail with the expiry condition) is taken by hand while the
// Submit waits in a long commit window. Deterministic but for scheduling: the Submit is
// given 50 ms to reach the committer, against a 300 ms window.
func TestExpiryDuringCommit(t *testing.T) {
	co := openOn(t, splitSweep("0"), Options{PerTask: 10, MaxFailures: 1, CommitWindow: 300 * time.Millisecond})
	task, req := leasedResult(t, co)
	co.mu.Lock()
	tk := co.byID[task.TaskId]
	co.mu.Unlock()
	res := make(chan *pb.SubmitReply)
	go func() { r, _ := co.Submit(context.Background(), req); res <- r }()
	time.Sleep(50 * time.Millisecond)
	co.fail(tk, "lease expired", expiredBy(time.Now().Add(time.Hour).UnixMilli()))
	if r := <-res; !r.GetAccepted() {
		t.Fatal("the result was not accepted")
	}
	co.mu.Lock()
	done, parked := co.nDone, co.nParked
	co.mu.Unlock()
	if fin, _ := co.Finished(); fin || done != 1 || parked != 0 {
		t.Fatalf("finished %v with %d done and %d parked, want not finished, 1 done, 0 parked", fin, done, parked)
	}
}

// A worker that gives a task up with an error does not take it back by a heartbeat it
// sent before the release arrived (it has dropped the task). Deterministic.
func TestErrorReleaseNotReadopted(t *testing.T) {
	co := openOn(t, testSweep, Options{PerTask: 10})
	ctx := context.Background()
	w, tasks := register(t, co, 1)
	id := tasks[0].TaskId
	co.Release(ctx, &pb.ReleaseRequest{WorkerId: w, TaskIds: []string{id}, Error: "out of memory"})
	rep, _ := co.Heartbeat(ctx, &pb.HeartbeatRequest{WorkerId: w, Tasks: []*pb.TaskProgress{{TaskId: id, Attempt: 1}}})
	if len(rep.Lost) != 1 || leasedCount(co) != 0 {
		t.Fatalf("a late heartbeat re-adopted a task released with an error: lost %v, leased %d", rep.Lost, leasedCount(co))
	}
}

// A Submit after Close (or racing with it) returns Unavailable at once instead of
// waiting for a committer that has stopped. Ten tries: before the fix about half hung.
func TestSubmitAfterClose(t *testing.T) {
	for i := 0; i < 10; i++ {
		co := openOn(t, testSweep, Options{PerTask: 10})
		_, req := leasedResult(t, co)
		co.Close()
		errc := make(chan error, 1)
		go func() { _, err := co.Submit(context.Background(), req); errc <- err }()
		select {
		case err := <-errc:
			if err == nil || !strings.Contains(err.Error(), "shutting down") {
				t.Fatalf("Submit after Close: %v", err)
			}
		case <-time.After(5 * time.Second):
			t.Fatal("Submit after Close did not return")
		}
	}
}

// A record whose histogram counts wrap around 2^64 is refused: the sum of the bins is
// checked with its carry. Deterministic.
func TestHistogramWrapRefused(t *testing.T) {
	co := openOn(t, testSweep, Options{PerTask: 1})
	_, req := leasedResult(t, co)
	rec, _, err := engine.DecodeRecord(req.Records[0])
	if err != nil {
		t.Fatal(err)
	}
	var sum uint64
	for _, h := range rec.Hist {
		sum += h
	}
	rec.Hist[0] += -sum // the bins now add up to 0 modulo 2^64
	rec.Hist[1]++       // and to 1: below the population unless the carry is seen
	req.Records[0] = rec.AppendBinary(nil)
	if rep, err := co.Submit(context.Background(), req); err == nil || rep.GetAccepted() {
		t.Fatalf("a record whose histogram wraps around was accepted (%v)", err)
	}
}

// Parts are dropped from memory once their replicate is committed whole, so a long
// split sweep does not hold every part it ever received. Deterministic.
func TestPartsFreedAfterCommit(t *testing.T) {
	co := openOn(t, testSweep, Options{Parts: 3})
	if _, err := worker.Run(context.Background(), co, worker.Options{Threads: 2}); err != nil {
		t.Fatal(err)
	}
	held := 0
	for _, c := range co.cells {
		for _, m := range c.parts {
			held += len(m)
		}
	}
	if held != 0 {
		t.Fatalf("%d parts still held after the sweep finished", held)
	}
}
