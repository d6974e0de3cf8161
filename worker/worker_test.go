package worker

import (
	"context"
	"encoding/json"
	"sync"
	"testing"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"bbmx/engine"
	pb "bbmx/proto/bbmx/v1"
)

// fake is a scripted coordinator.
type fake struct {
	mu         sync.Mutex
	failUntil  time.Time // Register answers Unavailable until then
	regErr     error     // Register answers this (after failUntil)
	tasks      []*pb.Task
	submitted  []*pb.SubmitRequest
	released   []string
	lostOnBeat bool // every heartbeat reports every task lost
	beats      int
}

func (f *fake) Register(ctx context.Context, r *pb.RegisterRequest) (*pb.RegisterReply, error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	if time.Now().Before(f.failUntil) {
		return nil, status.Error(codes.Unavailable, "not yet")
	}
	if f.regErr != nil {
		return nil, f.regErr
	}
	return &pb.RegisterReply{WorkerId: "w", HeartbeatMs: 20, LeaseMs: 80}, nil
}

func (f *fake) Lease(ctx context.Context, r *pb.LeaseRequest) (*pb.LeaseReply, error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	if len(f.tasks) == 0 {
		if len(f.submitted)+len(f.released) > 0 {
			return &pb.LeaseReply{Complete: true}, nil
		}
		return &pb.LeaseReply{RetryAfterMs: 10}, nil
	}
	n := min(int(r.MaxTasks), len(f.tasks))
	out := f.tasks[:n]
	f.tasks = f.tasks[n:]
	return &pb.LeaseReply{Tasks: out}, nil
}

func (f *fake) Heartbeat(ctx context.Context, r *pb.HeartbeatRequest) (*pb.HeartbeatReply, error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	f.beats++
	rep := &pb.HeartbeatReply{}
	if f.lostOnBeat {
		for _, t := range r.Tasks {
			rep.Lost = append(rep.Lost, t.TaskId)
		}
	}
	return rep, nil
}

func (f *fake) Submit(ctx context.Context, r *pb.SubmitRequest) (*pb.SubmitReply, error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	f.submitted = append(f.submitted, r)
	return &pb.SubmitReply{Accepted: true}, nil
}

func (f *fake) Release(ctx context.Context, r *pb.ReleaseRequest) (*pb.ReleaseReply, error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	f.released = append(f.released, r.TaskIds...)
	return &pb.ReleaseReply{}, nil
}

func task(t *testing.T, id string, horizon float64, from, to uint64) *pb.Task {
	c := engine.Cell{Model: engine.DefaultModel(), Horizon: horizon}.WithDefaults()
	cj, err := json.Marshal(c)
	if err != nil {
		t.Fatal(err)
	}
	return &pb.Task{TaskId: id, Attempt: 1, CellId: "c", CellJson: cj, Seed: 3, From: from, To: to}
}

// A coordinator that is not up yet is retried with backoff; the worker then does the
// tasks, submits records equal to the engine's, and returns when the sweep is complete.
func TestRetriesThenWorks(t *testing.T) {
	f := &fake{failUntil: time.Now().Add(400 * time.Millisecond), tasks: []*pb.Task{task(t, "a", 3, 0, 5), task(t, "b", 3, 5, 9)}}
	st, err := Run(context.Background(), f, Options{Threads: 2, Wait: 10 * time.Second})
	if err != nil {
		t.Fatal(err)
	}
	if st.Tasks != 2 || len(f.submitted) != 2 {
		t.Fatalf("stats %+v, %d submitted", st, len(f.submitted))
	}
	c := engine.Cell{Model: engine.DefaultModel(), Horizon: 3}.WithDefaults()
	for _, s := range f.submitted {
		from := uint64(0)
		if s.TaskId == "b" {
			from = 5
		}
		for i, b := range s.Records {
			rec, err := engine.Simulate(c, 3, from+uint64(i))
			if err != nil {
				t.Fatal(err)
			}
			if string(rec.AppendBinary(nil)) != string(b) {
				t.Fatalf("task %s record %d differs from the engine's", s.TaskId, i)
			}
		}
	}
}

// An unreachable coordinator is given up after Wait; a refusal that retrying cannot fix
// (a wrong token) is returned at once.
func TestGivesUp(t *testing.T) {
	f := &fake{failUntil: time.Now().Add(time.Hour)}
	start := time.Now()
	if _, err := Run(context.Background(), f, Options{Wait: 300 * time.Millisecond}); err == nil {
		t.Fatal("no error for an unreachable coordinator")
	}
	if time.Since(start) > 10*time.Second {
		t.Fatal("gave up far too late")
	}
	f = &fake{regErr: status.Error(codes.Unauthenticated, "missing or wrong token")}
	start = time.Now()
	_, err := Run(context.Background(), f, Options{Wait: time.Hour})
	if status.Code(err) != codes.Unauthenticated || time.Since(start) > 5*time.Second {
		t.Fatalf("wrong token: %v after %v", err, time.Since(start))
	}
}

// Cancelling the worker (SIGTERM) with no grace hands every running task back and
// returns without error; a task reported lost by a heartbeat is stopped, not submitted.
func TestStopAndLost(t *testing.T) {
	f := &fake{tasks: []*pb.Task{task(t, "big", 14, 0, 1000)}}
	ctx, cancel := context.WithCancel(context.Background())
	go func() {
		for {
			f.mu.Lock()
			b := f.beats
			f.mu.Unlock()
			if b > 0 {
				cancel()
				return
			}
			time.Sleep(5 * time.Millisecond)
		}
	}()
	st, err := Run(ctx, f, Options{Threads: 1})
	if err != nil {
		t.Fatal(err)
	}
	if st.Released != 1 || len(f.released) != 1 || f.released[0] != "big" || len(f.submitted) != 0 {
		t.Fatalf("stats %+v, released %v, submitted %d", st, f.released, len(f.submitted))
	}

	f = &fake{tasks: []*pb.Task{task(t, "lost", 14, 0, 1000)}, lostOnBeat: true}
	done := make(chan struct{})
	var runErr error
	go func() {
		_, runErr = Run(context.Background(), f, Options{Threads: 1})
		close(done)
	}()
	// The lost task is stopped; with nothing left to lease and nothing submitted, the
	// fake never says complete, so stop the worker once the task has gone.
	deadline := time.Now().Add(20 * time.Second)
	for {
		f.mu.Lock()
		b := f.beats
		f.mu.Unlock()
		if b >= 1 || time.Now().After(deadline) { // the first beat reports the task lost
			break
		}
		time.Sleep(10 * time.Millisecond)
	}
	f.mu.Lock()
	f.released = append(f.released, "x") // lets Lease answer complete
	f.mu.Unlock()
	select {
	case <-done:
	case <-time.After(20 * time.Second):
		t.Fatal("worker did not stop a lost task")
	}
	if runErr != nil || len(f.submitted) != 0 {
		t.Fatalf("lost task: err %v, %d submitted", runErr, len(f.submitted))
	}
}

// slowSubmit is fake with a Submit that blocks until gate is closed, as a coordinator
// does while it commits a large result durably.
type slowSubmit struct {
	*fake
	gate    chan struct{}
	blocked chan struct{} // closed when the first Submit starts waiting
	once    sync.Once
}

func (s *slowSubmit) Submit(ctx context.Context, r *pb.SubmitRequest) (*pb.SubmitReply, error) {
	s.once.Do(func() { close(s.blocked) })
	select {
	case <-s.gate:
	case <-ctx.Done():
		return nil, ctx.Err()
	}
	return s.fake.Submit(ctx, r)
}

// A thread starts its next task as soon as its simulation ends, while the result is
// still being submitted: with one thread and two tasks, the second is leased while the
// first one's Submit is held back. Before this, the core idled for the whole upload and
// commit of every task (about 3 % of a run of one-minute tasks).
func TestNextTaskOverlapsSubmit(t *testing.T) {
	s := &slowSubmit{
		fake:    &fake{tasks: []*pb.Task{task(t, "a", 2, 0, 3), task(t, "b", 2, 3, 6)}},
		gate:    make(chan struct{}),
		blocked: make(chan struct{}),
	}
	done := make(chan error, 1)
	go func() {
		_, err := Run(context.Background(), s, Options{Threads: 1, Wait: 10 * time.Second})
		done <- err
	}()
	<-s.blocked
	deadline := time.Now().Add(5 * time.Second)
	for {
		s.mu.Lock()
		left := len(s.tasks)
		s.mu.Unlock()
		if left == 0 {
			break // the second task was leased while the first result waits
		}
		if time.Now().After(deadline) {
			close(s.gate)
			<-done
			t.Fatal("the second task was not leased while the first result was being submitted")
		}
		time.Sleep(5 * time.Millisecond)
	}
	close(s.gate)
	if err := <-done; err != nil {
		t.Fatal(err)
	}
	if len(s.submitted) != 2 {
		t.Fatalf("%d results submitted, want 2", len(s.submitted))
	}
}
