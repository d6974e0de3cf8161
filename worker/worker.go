// Package worker pulls tasks from a coordinator, simulates them with the engine and
// submits the results. It talks to the coordinator through the Client interface, which
// the gRPC client (client.go) implements for remote coordinators and the coordinator
// itself implements for `bbmx run` in one process.
//
// A worker runs one task per thread (each task simulates on one core), sends
// heartbeats that extend its leases and stops tasks the coordinator says it lost, and
// retries calls that fail for transport reasons with exponential backoff. When its
// context is cancelled (SIGTERM, SIGINT) it stops leasing, lets running tasks finish
// within the grace period, hands back the leases of those that did not, and returns.
package worker

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"log/slog"
	"math/rand/v2"
	"os"
	"runtime"
	"sync"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"bbmx/engine"
	pb "bbmx/proto/bbmx/v1"
)

// Client is the coordinator as a worker sees it.
type Client interface {
	Register(context.Context, *pb.RegisterRequest) (*pb.RegisterReply, error)
	Lease(context.Context, *pb.LeaseRequest) (*pb.LeaseReply, error)
	Heartbeat(context.Context, *pb.HeartbeatRequest) (*pb.HeartbeatReply, error)
	Submit(context.Context, *pb.SubmitRequest) (*pb.SubmitReply, error)
	Release(context.Context, *pb.ReleaseRequest) (*pb.ReleaseReply, error)
}

// Options tune a worker; zero values take the defaults.
type Options struct {
	Threads int           // tasks run at once (default: all cores)
	Grace   time.Duration // after cancellation, how long running tasks may finish (default 0: hand back at once)
	// Wait is how long calls keep retrying while the coordinator is unreachable
	// (default 10 minutes); after that the worker gives up with an error.
	Wait time.Duration
	Log  *slog.Logger
}

// Stats summarise what a worker did.
type Stats struct {
	Tasks      int           // results accepted
	Duplicates int           // results the coordinator already had
	Released   int           // leases handed back
	Compute    time.Duration // time spent simulating
}

// transient reports whether an error is worth retrying: the coordinator is down,
// restarting or overloaded.
func transient(err error) bool {
	switch status.Code(err) {
	case codes.Unavailable, codes.DeadlineExceeded, codes.ResourceExhausted, codes.Aborted:
		return true
	}
	return false
}

// retry calls f until it succeeds, fails permanently, or Wait has passed since the
// last success; backoff doubles from 100ms to 5s with jitter. It gives up early if
// ctx ends.
func retry[T any](ctx context.Context, wait time.Duration, log *slog.Logger, what string, f func(context.Context) (T, error)) (T, error) {
	delay := 100 * time.Millisecond
	start := time.Now()
	for {
		cctx, cancel := context.WithTimeout(ctx, 60*time.Second)
		v, err := f(cctx)
		cancel()
		if err == nil || !transient(err) || ctx.Err() != nil {
			return v, err
		}
		if time.Since(start) > wait {
			return v, fmt.Errorf("%s: coordinator unreachable for %v: %w", what, wait.Round(time.Second), err)
		}
		log.Warn("coordinator unreachable; retrying", "call", what, "in", delay, "error", status.Convert(err).Message())
		select {
		case <-time.After(delay + time.Duration(rand.Int64N(int64(delay/2)))):
		case <-ctx.Done():
			return v, ctx.Err()
		}
		delay = min(2*delay, 5*time.Second)
	}
}

// running is a task in progress.
type running struct {
	task   *pb.Task
	cancel context.CancelFunc
	done   uint64 // replicates finished (atomic through mu)
}

// Run works for the coordinator until the sweep is complete (returns nil), ctx is
// cancelled (hands back what cannot finish within Grace, returns nil), or the
// coordinator stays unreachable (returns an error).
func Run(ctx context.Context, cl Client, opt Options) (Stats, error) {
	if opt.Threads <= 0 {
		opt.Threads = runtime.NumCPU()
	}
	if opt.Wait <= 0 {
		opt.Wait = 10 * time.Minute
	}
	if opt.Log == nil {
		opt.Log = slog.New(slog.DiscardHandler)
	}
	log := opt.Log
	// bg outlives ctx: it carries the calls that hand work back after cancellation.
	bg, stopAll := context.WithCancel(context.Background())
	defer stopAll()
	host, _ := os.Hostname()
	reg, err := retry(ctx, opt.Wait, log, "register", func(c context.Context) (*pb.RegisterReply, error) {
		return cl.Register(c, &pb.RegisterRequest{Hostname: host, Threads: uint32(opt.Threads), EngineFormat: engine.Version})
	})
	if err != nil {
		if ctx.Err() != nil || errors.Is(err, ErrSweepComplete) {
			return Stats{}, nil
		}
		return Stats{}, err
	}
	id := reg.WorkerId
	log.Info("registered", "worker", id, "sweep", reg.SweepName, "threads", opt.Threads)
	beat := time.Duration(reg.HeartbeatMs) * time.Millisecond
	if beat <= 0 {
		beat = 30 * time.Second
	}

	var (
		mu    sync.Mutex
		stats Stats
		live  = map[string]*running{}
		wg    sync.WaitGroup
		slots = make(chan struct{}, opt.Threads)
		fatal error
	)
	finished := make(chan struct{}, opt.Threads)

	// Heartbeats.
	hbDone := make(chan struct{})
	go func() {
		defer close(hbDone)
		t := time.NewTicker(beat)
		defer t.Stop()
		for {
			select {
			case <-bg.Done():
				return
			case <-t.C:
			}
			mu.Lock()
			req := &pb.HeartbeatRequest{WorkerId: id}
			for _, r := range live {
				req.Tasks = append(req.Tasks, &pb.TaskProgress{TaskId: r.task.TaskId, Attempt: r.task.Attempt, Done: r.done})
			}
			mu.Unlock()
			if len(req.Tasks) == 0 {
				continue
			}
			hctx, cancel := context.WithTimeout(bg, beat)
			rep, err := cl.Heartbeat(hctx, req)
			cancel()
			if err != nil {
				log.Warn("heartbeat failed", "error", status.Convert(err).Message())
				continue
			}
			mu.Lock()
			for _, lost := range rep.Lost {
				if r := live[lost]; r != nil {
					log.Info("task lost its lease; stopping it", "task", lost)
					r.cancel()
					delete(live, lost) // no longer claimed in heartbeats
				}
			}
			mu.Unlock()
		}
	}()

	runTask := func(t *pb.Task) {
		defer wg.Done()
		// The thread is free as soon as the simulation ends: the result's upload and the
		// coordinator's durable commit then overlap the next task's simulation instead of
		// leaving the core idle.
		wake := func() {
			select { // a wake-up for the lease loop; one pending is enough
			case finished <- struct{}{}:
			default:
			}
		}
		freeSlot := sync.OnceFunc(func() { <-slots; wake() })
		defer wake() // again once submitted: the sweep may be complete, or tasks freed
		defer freeSlot()
		tctx, cancel := context.WithCancel(bg)
		r := &running{task: t, cancel: cancel}
		mu.Lock()
		live[t.TaskId] = r
		mu.Unlock()
		defer func() {
			cancel()
			mu.Lock()
			if live[t.TaskId] == r { // not already dropped, nor leased again since
				delete(live, t.TaskId)
			}
			mu.Unlock()
		}()
		start := time.Now()
		req, err := compute(tctx, t, func(n int64) {
			mu.Lock()
			r.done = uint64(n)
			mu.Unlock()
		})
		elapsed := time.Since(start)
		freeSlot()
		if tctx.Err() != nil {
			return // lost, or handed back by the shutdown path
		}
		if err != nil {
			log.Error("task failed", "task", t.TaskId, "error", err)
			retry(bg, opt.Wait, log, "release", func(c context.Context) (*pb.ReleaseReply, error) {
				return cl.Release(c, &pb.ReleaseRequest{WorkerId: id, TaskIds: []string{t.TaskId}, Error: err.Error()})
			})
			return
		}
		req.WorkerId, req.ComputeNs = id, elapsed.Nanoseconds()
		rep, err := retry(bg, opt.Wait, log, "submit", func(c context.Context) (*pb.SubmitReply, error) { return cl.Submit(c, req) })
		mu.Lock()
		defer mu.Unlock()
		stats.Compute += elapsed
		switch {
		case err != nil && (transient(err) || errors.Is(err, context.Canceled)):
			// The coordinator stayed unreachable; the lease will expire and the task
			// will be run again elsewhere.
			if fatal == nil {
				fatal = err
			}
		case errors.Is(err, ErrSweepComplete):
			// The coordinator finished without this result: a copy from another
			// worker, whose lease it took over, was accepted.
		case err != nil:
			log.Error("result refused", "task", t.TaskId, "error", status.Convert(err).Message())
		case rep.Duplicate:
			stats.Duplicates++
		default:
			stats.Tasks++
		}
	}

	complete := false
	// endedElsewhere: the resolver says the sweep is complete, so the coordinator is
	// gone and what runs here is no longer wanted.
	endedElsewhere := false
	retryAfter := time.Duration(0)
loop:
	for {
		// Fill free slots.
		free := opt.Threads - len(slots)
		if free > 0 && retryAfter == 0 {
			rep, err := retry(ctx, opt.Wait, log, "lease", func(c context.Context) (*pb.LeaseReply, error) {
				return cl.Lease(c, &pb.LeaseRequest{WorkerId: id, MaxTasks: uint32(free)})
			})
			if errors.Is(err, ErrSweepComplete) {
				complete, endedElsewhere = true, true
				stopAll() // stops running tasks and their submissions
				break loop
			}
			if err != nil {
				if ctx.Err() == nil {
					mu.Lock()
					fatal = err
					mu.Unlock()
				}
				break loop
			}
			for _, t := range rep.Tasks {
				slots <- struct{}{}
				wg.Add(1)
				go runTask(t)
			}
			if rep.Complete && len(slots) == 0 {
				complete = true
				break loop
			}
			if len(rep.Tasks) == 0 {
				retryAfter = max(time.Duration(rep.RetryAfterMs)*time.Millisecond, 50*time.Millisecond)
			}
		}
		var wake <-chan time.Time
		if retryAfter > 0 {
			wake = time.After(retryAfter)
		}
		select {
		case <-ctx.Done():
			break loop
		case <-finished:
			retryAfter = 0
		case <-wake:
			retryAfter = 0
		}
		mu.Lock()
		f := fatal
		mu.Unlock()
		if f != nil {
			break
		}
	}

	// Shutdown: give running tasks the grace period, then hand back what is left.
	if !complete {
		waitDone := make(chan struct{})
		go func() { wg.Wait(); close(waitDone) }()
		select {
		case <-waitDone:
		case <-time.After(opt.Grace):
			mu.Lock()
			var ids []string
			for tid, r := range live {
				ids = append(ids, tid)
				r.cancel()
				// Dropped at once: a heartbeat that still named a handed-back task while
				// its walk winds down would make the coordinator adopt it again.
				delete(live, tid)
			}
			mu.Unlock()
			if len(ids) > 0 {
				rctx, cancel := context.WithTimeout(bg, 10*time.Second)
				_, err := cl.Release(rctx, &pb.ReleaseRequest{WorkerId: id, TaskIds: ids})
				cancel()
				if err != nil {
					log.Warn("could not hand back leases; they will expire", "error", status.Convert(err).Message())
				} else {
					log.Info("handed back unfinished tasks", "tasks", len(ids))
				}
				mu.Lock()
				stats.Released += len(ids)
				mu.Unlock()
			}
		}
	}
	wg.Wait()
	stopAll()
	<-hbDone
	mu.Lock()
	defer mu.Unlock()
	if endedElsewhere {
		return stats, nil
	}
	return stats, fatal
}

// compute simulates one task and returns the submission (without worker id).
func compute(ctx context.Context, t *pb.Task, progress func(int64)) (*pb.SubmitRequest, error) {
	var cell engine.Cell
	if err := json.Unmarshal(t.CellJson, &cell); err != nil {
		return nil, fmt.Errorf("task %s: bad cell settings: %w", t.TaskId, err)
	}
	// The engine applies the cell's defaults and validates it.
	req := &pb.SubmitRequest{TaskId: t.TaskId, Attempt: t.Attempt}
	if t.SplitAt > 0 {
		p, err := engine.SimulatePartContext(ctx, cell, t.Seed, t.From, t.SplitAt, t.RootFrom, t.RootTo)
		if err != nil {
			return nil, fmt.Errorf("task %s: %w", t.TaskId, err)
		}
		if p.Roots != t.Roots {
			return nil, fmt.Errorf("task %s: replicate %d has %d particles at %v here, the coordinator counted %d (different bbmx builds?)",
				t.TaskId, t.From, p.Roots, t.SplitAt, t.Roots)
		}
		req.Part = p.AppendBinary(nil)
		return req, nil
	}
	recs, err := engine.Batch{Cell: cell, Seed: t.Seed, From: t.From, To: t.To, Threads: 1, Progress: progress}.Run(ctx)
	if err != nil {
		return nil, fmt.Errorf("task %s: %w", t.TaskId, err)
	}
	req.Records = make([][]byte, len(recs))
	for i := range recs {
		req.Records[i] = recs[i].AppendBinary(nil)
	}
	return req, nil
}
