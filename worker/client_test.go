package worker

import (
	"context"
	"net"
	"strings"
	"sync"
	"testing"
	"time"

	"google.golang.org/grpc"

	pb "bbmx/proto/bbmx/v1"
)

// served is a fake coordinator behind a real gRPC server on loopback; the fake's
// methods are shallower than the unimplemented ones, so they win.
type served struct {
	unimplemented
	*fake
}

type unimplemented struct {
	pb.UnimplementedCoordinatorServer
}

func serveFake(t *testing.T, f *fake) (addr string, stop func()) {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	s := grpc.NewServer()
	pb.RegisterCoordinatorServer(s, served{fake: f})
	go s.Serve(ln)
	t.Cleanup(s.Stop)
	return ln.Addr().String(), s.Stop
}

// where is an address file in memory: what a Resolver reads.
type where struct {
	mu   sync.Mutex
	addr string
	err  error
}

func (w *where) set(addr string, err error) { w.mu.Lock(); w.addr, w.err = addr, err; w.mu.Unlock() }
func (w *where) resolve() (string, error) {
	w.mu.Lock()
	defer w.mu.Unlock()
	return w.addr, w.err
}

// A coordinator that stops and comes back at another address (a batch scheduler put the
// restarted job on another node) is followed there. Before, the worker kept calling the
// old address until Wait ran out, exited 1 and lost the results it held.
func TestFollowsMovedCoordinator(t *testing.T) {
	addrA, stopA := serveFake(t, &fake{}) // no tasks yet: the worker keeps asking
	w := &where{addr: addrA}
	cl, closeFn, err := DialFollowing(w.resolve, "token-for-the-test", TLSFiles{})
	if err != nil {
		t.Fatal(err)
	}
	defer closeFn()
	done := make(chan error, 1)
	var st Stats
	go func() {
		var err error
		st, err = Run(context.Background(), cl, Options{Threads: 1, Wait: 30 * time.Second})
		done <- err
	}()
	time.Sleep(200 * time.Millisecond)
	stopA()
	w.set("", nil) // the stopped coordinator withdrew its address
	time.Sleep(200 * time.Millisecond)
	fb := &fake{tasks: []*pb.Task{task(t, "a", 3, 0, 4)}}
	addrB, _ := serveFake(t, fb)
	w.set(addrB, nil)
	select {
	case err := <-done:
		if err != nil {
			t.Fatal(err)
		}
	case <-time.After(20 * time.Second):
		t.Fatal("the worker did not follow the coordinator to its new address")
	}
	fb.mu.Lock()
	defer fb.mu.Unlock()
	if len(fb.submitted) != 1 || st.Tasks != 1 {
		t.Fatalf("%d results at the new address, stats %+v", len(fb.submitted), st)
	}

	// A coordinator that finished while this worker could not reach it: the worker
	// stops without an error.
	addrC, stopC := serveFake(t, &fake{})
	w = &where{addr: addrC}
	cl2, close2, err := DialFollowing(w.resolve, "token-for-the-test", TLSFiles{})
	if err != nil {
		t.Fatal(err)
	}
	defer close2()
	go func() {
		_, err := Run(context.Background(), cl2, Options{Threads: 1, Wait: 30 * time.Second})
		done <- err
	}()
	time.Sleep(200 * time.Millisecond)
	stopC()
	w.set("", ErrSweepComplete)
	select {
	case err := <-done:
		if err != nil {
			t.Fatalf("sweep completed elsewhere: %v", err)
		}
	case <-time.After(20 * time.Second):
		t.Fatal("the worker did not stop when told the sweep is complete")
	}
}

// An address without a port is refused before dialling: gRPC would take port 443 and
// retry it for as long as Wait allows.
func TestCheckAddress(t *testing.T) {
	for _, a := range []string{"head01:7421", "127.0.0.1:7421", "[::1]:7421", ":7421"} {
		if err := CheckAddress(a); err != nil {
			t.Errorf("%s: %v", a, err)
		}
	}
	for _, a := range []string{"head01", "head01:", "head01:http", "head01:0", "head01:70000", "a b:::", ""} {
		if err := CheckAddress(a); err == nil || !strings.Contains(err.Error(), "host:port") {
			t.Errorf("%q accepted (%v)", a, err)
		}
		if _, _, err := Dial(a, "token-for-the-test", TLSFiles{}); err == nil {
			t.Errorf("Dial(%q) accepted", a)
		}
	}
}
