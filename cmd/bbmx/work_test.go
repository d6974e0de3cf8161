package main

import (
	"net"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"google.golang.org/grpc/codes"
	grpcstatus "google.golang.org/grpc/status"
)

// A coordinator address without a port is a usage error at once. gRPC took it as port
// 443, so a worker told --coordinator head01 retried that for the whole --wait (ten
// minutes by default) before failing with exit status 1.
func TestCoordinatorAddressIsChecked(t *testing.T) {
	tok := filepath.Join(t.TempDir(), "token")
	if err := os.WriteFile(tok, []byte("0123456789abcdef0123456789abcdef\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	for _, args := range [][]string{
		{"work", "--coordinator", "localhost", "--token-file", tok, "--wait", "2s"},
		{"work", "--coordinator", "head01:http", "--token-file", tok, "--wait", "2s"},
		{"status", "--coordinator", "localhost", "--token-file", tok},
	} {
		start := time.Now()
		code, _, errs := runCLI(t, args...)
		if code != 2 || !strings.Contains(errs, "not host:port") || strings.Count(strings.TrimSpace(errs), "\n") > 0 {
			t.Errorf("%v: exit %d: %s", args, code, errs)
		}
		if time.Since(start) > 5*time.Second {
			t.Errorf("%v: took %v", args, time.Since(start))
		}
	}
}

// A coordinator stopped mid-sweep and started again at another address (a batch
// scheduler put the resubmitted job on another node): a worker started with
// --address-file follows it there and the sweep completes with the same store. Before,
// the worker kept calling the old address until --wait ran out and exited 1.
func TestProcessWorkerFollowsRestartedCoordinator(t *testing.T) {
	want := localRun(t)
	dir, sw, tok := setup(t)
	store, addrFile := filepath.Join(dir, "s.db"), filepath.Join(dir, "addr")
	serve := func() *proc {
		return start(t, "serve", sw, "--store", store, "--token-file", tok, "--listen", "127.0.0.1:0", "--address-file", addrFile, "--lease", "3s")
	}
	srv := serve()
	until(t, time.Minute, "the address file", func() bool { _, err := os.Stat(addrFile); return err == nil })
	first, _ := os.ReadFile(addrFile)
	w := start(t, "work", "--address-file", addrFile, "--token-file", tok, "--threads", "1", "--wait", "60s")
	until(t, 2*time.Minute, "a committed task", func() bool {
		s := status(t, strings.TrimSpace(string(first)), tok)
		return s != nil && s.Completions >= 1
	})
	srv.cmd.Process.Signal(syscall.SIGTERM)
	if code := srv.wait(t, time.Minute); code != 0 {
		t.Fatalf("serve stopped by SIGTERM: exit %d: %s", code, srv.err.String())
	}
	var l net.Listener // holds the old port, so the new coordinator cannot get it again
	l, _ = net.Listen("tcp", strings.TrimSpace(string(first)))
	if l != nil {
		defer l.Close()
	}
	srv2 := serve()
	if code := w.wait(t, 3*time.Minute); code != 0 {
		t.Fatalf("worker exit %d: %s", code, w.err.String())
	}
	if code := srv2.wait(t, time.Minute); code != 0 {
		t.Fatalf("restarted serve exit %d: %s", code, srv2.err.String())
	}
	if got := storeDigest(t, store); got != want {
		t.Fatal("the store after the coordinator moved differs from the local run")
	}
}

// A coordinator's refusal of work reaches the user as its reason, without the gRPC
// status around it; other errors are left as they are.
func TestRefusalIsWorded(t *testing.T) {
	err := refusal(grpcstatus.Error(codes.FailedPrecondition, "writing to the store s.db failed (disk full)"))
	if err.Error() != "the coordinator refused work: writing to the store s.db failed (disk full)" {
		t.Errorf("refusal: %v", err)
	}
	other := grpcstatus.Error(codes.Unavailable, "connection refused")
	if refusal(other) != other {
		t.Errorf("an unavailable coordinator: %v", refusal(other))
	}
}
