package main

// Tests of distributed sweeps with real processes on loopback: a coordinator
// (bbmx serve), worker processes (bbmx work), kill -9 of either, restarts, tokens and
// TLS. Each compares the final store's content digest with a local run of the same
// sweep, which itself equals merged shards.

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"net"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"

	pb "bbmx/proto/bbmx/v1"
	"bbmx/worker"
)

// A sweep of six tasks of about a second each on one core (task_seconds = 1 and the
// cost model), so that processes can be killed in the middle of a task.
const processSweep = `name = "process-test"
seed = 5
task_seconds = 1
[grid]
dims = [1, 2]
horizons = [7, 8]
replicates = 5000
[observe]
checkpoints = [2]
`

var (
	binOnce sync.Once
	binPath string
	binErr  error
)

// bbmxBinary builds the command once per test run.
func bbmxBinary(t *testing.T) string {
	t.Helper()
	binOnce.Do(func() {
		dir, err := os.MkdirTemp("", "bbmx-bin-")
		if err != nil {
			binErr = err
			return
		}
		binPath = filepath.Join(dir, "bbmx")
		out, err := exec.Command("go", "build", "-o", binPath, ".").CombinedOutput()
		if err != nil {
			binErr = fmt.Errorf("go build: %v\n%s", err, out)
		}
	})
	if binErr != nil {
		t.Fatal(binErr)
	}
	return binPath
}

type proc struct {
	cmd      *exec.Cmd
	out, err lockedBuffer
	done     chan struct{}
}

// lockedBuffer collects a process's output; tests may read it while the process runs.
type lockedBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (l *lockedBuffer) Write(p []byte) (int, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.Write(p)
}

func (l *lockedBuffer) String() string {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.String()
}

func start(t *testing.T, args ...string) *proc {
	t.Helper()
	p := &proc{cmd: exec.Command(bbmxBinary(t), args...), done: make(chan struct{})}
	p.cmd.Stdout, p.cmd.Stderr = &p.out, &p.err
	if err := p.cmd.Start(); err != nil {
		t.Fatal(err)
	}
	go func() { p.cmd.Wait(); close(p.done) }()
	t.Cleanup(func() {
		p.cmd.Process.Kill()
		<-p.done
	})
	return p
}

// wait waits for the process to exit and returns its exit code.
func (p *proc) wait(t *testing.T, limit time.Duration) int {
	t.Helper()
	select {
	case <-p.done:
		return p.cmd.ProcessState.ExitCode()
	case <-time.After(limit):
		p.cmd.Process.Kill()
		<-p.done
		t.Fatalf("%v did not finish within %v\nstdout:\n%s\nstderr:\n%s", p.cmd.Args[1:], limit, p.out.String(), p.err.String())
		return -1
	}
}

func freePort(t *testing.T) string {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer ln.Close()
	return ln.Addr().String()
}

// tinySweep is for tests that need a complete run but no time to kill anything.
const tinySweep = `name = "tiny"
seed = 6
[grid]
dims = [2]
horizons = [3, 4]
replicates = 300
`

// setup writes the sweep and a token into a fresh folder.
func setup(t *testing.T) (dir, sweepFile, token string) { return setupWith(t, processSweep) }

func setupWith(t *testing.T, src string) (dir, sweepFile, token string) {
	dir = t.TempDir()
	sweepFile = filepath.Join(dir, "sweep.toml")
	token = filepath.Join(dir, "token")
	os.WriteFile(sweepFile, []byte(src), 0o644)
	os.WriteFile(token, []byte("process-test-token-0123456789\n"), 0o600)
	return
}

var digestRE = regexp.MustCompile(`content digest ([0-9a-f]{64})`)

func storeDigest(t *testing.T, store string) string {
	t.Helper()
	code, out, errs := runCLI(t, "show", store)
	m := digestRE.FindStringSubmatch(out)
	if code != 0 || m == nil {
		t.Fatalf("show %s: exit %d: %s %s", store, code, out, errs)
	}
	return m[1]
}

var (
	localOnce   sync.Once
	localDigest string
)

// localRun is the digest of `bbmx run` of the sweep in one process.
func localRun(t *testing.T) string {
	localOnce.Do(func() {
		dir, sw, _ := setup(t)
		store := filepath.Join(dir, "local.db")
		if code, _, errs := runCLI(t, "run", sw, "--store", store, "--no-report"); code != 0 {
			t.Fatalf("local run: exit %d: %s", code, errs)
		}
		localDigest = storeDigest(t, store)
	})
	if localDigest == "" {
		t.Fatal("local run failed earlier")
	}
	return localDigest
}

// status asks the coordinator at addr for its status.
func status(t *testing.T, addr, token string) *pb.StatusReply {
	tok, _ := os.ReadFile(token)
	cl, closeFn, err := worker.Dial(addr, strings.TrimSpace(string(tok)), worker.TLSFiles{})
	if err != nil {
		t.Fatal(err)
	}
	defer closeFn()
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	s, err := worker.Status(ctx, cl)
	if err != nil {
		return nil
	}
	return s
}

// until polls cond every 50ms for up to limit.
func until(t *testing.T, limit time.Duration, what string, cond func() bool) {
	t.Helper()
	end := time.Now().Add(limit)
	for !cond() {
		if time.Now().After(end) {
			t.Fatalf("timed out waiting for %s", what)
		}
		time.Sleep(50 * time.Millisecond)
	}
}

func leased(s *pb.StatusReply) (n uint64) {
	if s == nil {
		return 0
	}
	for _, c := range s.Cells {
		n += c.TasksLeased
	}
	return n
}

// A coordinator with three worker processes, a local run, and merged shards make the
// same store, bit for bit.
func TestProcessCoordinatedEqualsLocalAndShards(t *testing.T) {
	want := localRun(t)
	dir, sw, tok := setup(t)
	store := filepath.Join(dir, "served.db")
	addrFile := filepath.Join(dir, "addr")
	srv := start(t, "serve", sw, "--store", store, "--token-file", tok, "--listen", "127.0.0.1:0", "--address-file", addrFile, "--lease", "4s")
	var ws []*proc
	for i := 0; i < 3; i++ {
		ws = append(ws, start(t, "work", "--address-file", addrFile, "--token-file", tok, "--threads", "1", "--wait", "30s"))
	}
	for i, w := range ws {
		if code := w.wait(t, 3*time.Minute); code != 0 {
			t.Fatalf("worker %d exit %d: %s", i, code, w.err.String())
		}
	}
	if code := srv.wait(t, time.Minute); code != 0 {
		t.Fatalf("serve exit %d: %s", code, srv.err.String())
	}
	if !strings.Contains(srv.out.String(), "complete") {
		t.Fatalf("serve did not report completion:\n%s", srv.out.String())
	}
	if got := storeDigest(t, store); got != want {
		t.Fatalf("coordinated run %s differs from local run %s", got, want)
	}
	// A worker that starts after the sweep finds it complete and exits at once.
	late := start(t, "work", "--address-file", addrFile, "--token-file", tok, "--wait", "60s")
	if code := late.wait(t, 10*time.Second); code != 0 || !strings.Contains(late.out.String(), "complete") {
		t.Fatalf("late worker: exit %d: %s %s", code, late.out.String(), late.err.String())
	}

	var shards []string
	for i := 0; i < 3; i++ {
		p := filepath.Join(dir, fmt.Sprintf("shard%d.db", i))
		if code, _, errs := runCLI(t, "run", sw, "--shard", fmt.Sprintf("%d/3", i), "--store", p); code != 0 {
			t.Fatalf("shard %d: exit %d: %s", i, code, errs)
		}
		shards = append(shards, p)
	}
	merged := filepath.Join(dir, "merged.db")
	if code, _, errs := runCLI(t, append([]string{"merge", "--out", merged}, shards...)...); code != 0 {
		t.Fatalf("merge: %s", errs)
	}
	if got := storeDigest(t, merged); got != want {
		t.Fatalf("merged shards %s differ from local run %s", got, want)
	}
}

// kill -9 of a worker in the middle of a task: its lease expires, another worker
// finishes the sweep, and the result is the same.
func TestProcessKillWorker(t *testing.T) {
	want := localRun(t)
	dir, sw, tok := setup(t)
	store := filepath.Join(dir, "s.db")
	addr := freePort(t)
	srv := start(t, "serve", sw, "--store", store, "--token-file", tok, "--listen", addr, "--lease", "2s")
	victim := start(t, "work", "--coordinator", addr, "--token-file", tok, "--threads", "2", "--wait", "30s")
	until(t, time.Minute, "a leased task", func() bool { return leased(status(t, addr, tok)) > 0 })
	victim.cmd.Process.Signal(syscall.SIGKILL)
	<-victim.done
	rescuer := start(t, "work", "--coordinator", addr, "--token-file", tok, "--threads", "2", "--wait", "30s")
	if code := rescuer.wait(t, 3*time.Minute); code != 0 {
		t.Fatalf("worker exit %d: %s", code, rescuer.err.String())
	}
	if code := srv.wait(t, time.Minute); code != 0 {
		t.Fatalf("serve exit %d: %s", code, srv.err.String())
	}
	if got := storeDigest(t, store); got != want {
		t.Fatal("result after a killed worker differs from the local run")
	}
}

// kill -9 of the coordinator in the middle of the sweep, then a restart on the same
// store and address: the worker reconnects, the sweep completes, nothing is counted
// twice and the result is the same.
func TestProcessKillCoordinator(t *testing.T) {
	want := localRun(t)
	dir, sw, tok := setup(t)
	store := filepath.Join(dir, "s.db")
	addr := freePort(t)
	srv := start(t, "serve", sw, "--store", store, "--token-file", tok, "--listen", addr, "--lease", "3s")
	w := start(t, "work", "--coordinator", addr, "--token-file", tok, "--threads", "1", "--wait", "60s")
	until(t, 2*time.Minute, "a committed task", func() bool {
		s := status(t, addr, tok)
		return s != nil && s.Completions >= 1
	})
	srv.cmd.Process.Signal(syscall.SIGKILL)
	<-srv.done
	if s := status(t, addr, tok); s != nil {
		t.Fatal("coordinator still answers after kill -9")
	}
	srv2 := start(t, "serve", sw, "--store", store, "--token-file", tok, "--listen", addr, "--lease", "3s")
	if code := w.wait(t, 3*time.Minute); code != 0 {
		t.Fatalf("worker exit %d: %s", code, w.err.String())
	}
	if code := srv2.wait(t, time.Minute); code != 0 {
		t.Fatalf("restarted serve exit %d: %s", code, srv2.err.String())
	}
	if !strings.Contains(srv2.out.String(), "10000/10000") && !strings.Contains(srv2.out.String(), "20000/20000") {
		t.Fatalf("restarted coordinator does not report every replicate once:\n%s", srv2.out.String())
	}
	if got := storeDigest(t, store); got != want {
		t.Fatal("result after a coordinator restart differs from the local run")
	}
}

// SIGTERM makes a worker hand back its leases and exit 0 within the grace period.
func TestProcessWorkerSIGTERM(t *testing.T) {
	dir, sw, tok := setup(t)
	addr := freePort(t)
	start(t, "serve", sw, "--store", filepath.Join(dir, "s.db"), "--token-file", tok, "--listen", addr, "--lease", "30s")
	w := start(t, "work", "--coordinator", addr, "--token-file", tok, "--threads", "2", "--grace", "0s")
	until(t, time.Minute, "a leased task", func() bool { return leased(status(t, addr, tok)) > 0 })
	w.cmd.Process.Signal(syscall.SIGTERM)
	if code := w.wait(t, 20*time.Second); code != 0 {
		t.Fatalf("worker exit %d after SIGTERM: %s", code, w.err.String())
	}
	if !strings.Contains(w.out.String(), "handed back") {
		t.Fatalf("worker did not report handing back: %s", w.out.String())
	}
	// The leases were handed back, not left to expire (the lease is 30 s).
	until(t, 5*time.Second, "leases handed back", func() bool { return leased(status(t, addr, tok)) == 0 })
}

// Ctrl-C stops a local run promptly even in the middle of a replicate that takes many
// seconds (the walk polls for cancellation), and what it was doing is handed back, not
// left to expire and count as failures.
func TestProcessRunInterruptMidReplicate(t *testing.T) {
	// d = 1, T = 19: about 3.6e8 tree nodes, some 20 s, per replicate.
	dir, sw, _ := setupWith(t, "name = \"long-replicates\"\nseed = 3\n[grid]\ndims = [1]\nhorizons = [19]\nreplicates = 8\n")
	store := filepath.Join(dir, "s.db")
	r := start(t, "run", sw, "--store", store, "--threads", "2", "--no-report", "--verbose")
	until(t, 30*time.Second, "the run's worker to register", func() bool { return strings.Contains(r.err.String(), "registered") })
	time.Sleep(time.Second) // both threads inside their first replicate
	sent := time.Now()
	r.cmd.Process.Signal(os.Interrupt)
	r.wait(t, 10*time.Second)
	if d := time.Since(sent); d > 5*time.Second {
		t.Errorf("run took %v to stop after Ctrl-C", d)
	}
	// A failed attempt is logged as "task attempt failed; re-queued".
	if errs := r.err.String(); !strings.Contains(errs, "interrupted") || strings.Contains(errs, "re-queued") {
		t.Fatalf("interrupted run:\n%s", errs)
	}
	code, out, errs := runCLI(t, "status", "--store", store)
	if row := regexp.MustCompile(`(?m)^d1-T19 .* (\d+)$`).FindStringSubmatch(out); code != 0 || row == nil || row[1] != "0" {
		t.Fatalf("status after the interrupt (want nothing parked): exit %d\n%s%s", code, out, errs)
	}
}

// Wrong or missing tokens are refused; TLS works with and without client certificates,
// and a worker without the required client certificate cannot take part.
func TestProcessTokenAndTLS(t *testing.T) {
	dir, sw, tok := setupWith(t, tinySweep)
	sec := filepath.Join(dir, "sec")
	if code, _, errs := runCLI(t, "secrets", "init", sec); code != 0 {
		t.Fatalf("secrets init: %s", errs)
	}
	p := func(n string) string { return filepath.Join(sec, n) }

	// Plain transport, wrong token: the worker fails at once (exit 1, Unauthenticated).
	addr := freePort(t)
	srv := start(t, "serve", sw, "--store", filepath.Join(dir, "a.db"), "--token-file", tok, "--listen", addr)
	wrong := filepath.Join(dir, "wrong")
	os.WriteFile(wrong, []byte("not-the-right-token-at-all\n"), 0o600)
	w := start(t, "work", "--coordinator", addr, "--token-file", wrong, "--wait", "20s")
	if code := w.wait(t, 20*time.Second); code != 1 || !strings.Contains(w.err.String(), "token") {
		t.Fatalf("wrong token: exit %d: %s", code, w.err.String())
	}
	until(t, 10*time.Second, "coordinator up", func() bool { return status(t, addr, tok) != nil })
	srv.cmd.Process.Kill()
	<-srv.done

	// TLS with required client certificates.
	addr = freePort(t)
	store := filepath.Join(dir, "tls.db")
	srv = start(t, "serve", sw, "--store", store, "--token-file", p("token"), "--listen", addr,
		"--tls-cert", p("server.crt"), "--tls-key", p("server.key"), "--client-ca", p("ca.crt"))
	noCert := start(t, "work", "--coordinator", addr, "--token-file", p("token"), "--tls-ca", p("ca.crt"), "--wait", "2s")
	if code := noCert.wait(t, 30*time.Second); code == 0 {
		t.Fatal("a worker without a client certificate took part in an mTLS sweep")
	}
	plain := start(t, "work", "--coordinator", addr, "--token-file", p("token"), "--wait", "2s")
	if code := plain.wait(t, 30*time.Second); code == 0 {
		t.Fatal("a plaintext worker took part in a TLS sweep")
	}
	good := start(t, "work", "--coordinator", addr, "--token-file", p("token"), "--tls-ca", p("ca.crt"),
		"--tls-cert", p("client.crt"), "--tls-key", p("client.key"), "--threads", "2")
	if code := good.wait(t, 3*time.Minute); code != 0 {
		t.Fatalf("mTLS worker exit %d: %s", code, good.err.String())
	}
	if code := srv.wait(t, time.Minute); code != 0 {
		t.Fatalf("serve: %s", srv.err.String())
	}

	// TLS without client certificates: server-authenticated only.
	addr = freePort(t)
	srv = start(t, "serve", sw, "--store", filepath.Join(dir, "tls2.db"), "--token-file", p("token"), "--listen", addr,
		"--tls-cert", p("server.crt"), "--tls-key", p("server.key"))
	good = start(t, "work", "--coordinator", addr, "--token-file", p("token"), "--tls-ca", p("ca.crt"), "--threads", "2")
	if code := good.wait(t, 3*time.Minute); code != 0 {
		t.Fatalf("TLS worker exit %d: %s", code, good.err.String())
	}
	if code := srv.wait(t, time.Minute); code != 0 {
		t.Fatalf("serve: %s", srv.err.String())
	}
	if storeDigest(t, filepath.Join(dir, "tls2.db")) != storeDigest(t, store) {
		t.Fatal("TLS runs differ")
	}
}

// Bad flags of the sweep commands are usage errors (exit 2) with one line.
func TestSweepCommandsBadInput(t *testing.T) {
	_, sw, tok := setup(t)
	cases := [][]string{
		{"run"},
		{"run", sw, "--shard", "3/3"},
		{"run", sw, "--shard", "x"},
		{"run", sw, "--threads", "0"},
		{"run", filepath.Join(t.TempDir(), "missing.toml")},
		{"serve", sw, "--token-file", tok},
		{"serve", sw, "--store", "x.db"},
		{"serve", sw, "--store", "x.db", "--token-file", tok, "--lease", "1ms"},
		{"serve", sw, "--store", "x.db", "--token-file", tok, "--client-ca", tok},
		{"work", "--token-file", tok},
		{"work", "--coordinator", "a:1", "--address-file", "f", "--token-file", tok},
		{"work", "--coordinator", "a:1", "--token-file", tok, "--threads", "-1"},
		{"status"},
	}
	for _, c := range cases {
		code, _, errs := runCLI(t, c...)
		if code != 2 || strings.Count(strings.TrimSpace(errs), "\n") != 0 {
			t.Errorf("%v: exit %d, stderr %q; want exit 2 and one line", c, code, errs)
		}
	}
	short := filepath.Join(t.TempDir(), "short")
	os.WriteFile(short, []byte("abc\n"), 0o600)
	if code, _, errs := runCLI(t, "serve", sw, "--store", "x.db", "--token-file", short); code != 2 || !strings.Contains(errs, "16") {
		t.Errorf("short token: exit %d %s", code, errs)
	}
}

// The coordinator serves Prometheus metrics and the standard gRPC health service (which
// needs no token, for load balancers and probes), and with --keep-serving it answers
// status after the sweep until SIGTERM.
func TestProcessMetricsHealthKeepServing(t *testing.T) {
	dir, sw, tok := setupWith(t, tinySweep)
	addr, maddr := freePort(t), freePort(t)
	srv := start(t, "serve", sw, "--store", filepath.Join(dir, "s.db"), "--token-file", tok, "--listen", addr,
		"--metrics-listen", maddr, "--keep-serving")
	w := start(t, "work", "--coordinator", addr, "--token-file", tok, "--threads", "2")
	if code := w.wait(t, 2*time.Minute); code != 0 {
		t.Fatalf("worker: %s", w.err.String())
	}
	until(t, 10*time.Second, "complete status", func() bool {
		s := status(t, addr, tok)
		return s != nil && s.Complete
	})
	resp, err := http.Get("http://" + maddr + "/metrics")
	if err != nil {
		t.Fatal(err)
	}
	body, _ := io.ReadAll(resp.Body)
	resp.Body.Close()
	for _, want := range []string{`bbmx_tasks{state="done"}`, "bbmx_task_completions_total", "bbmx_lease_expiries_total 0"} {
		if !strings.Contains(string(body), want) {
			t.Fatalf("metrics lack %q:\n%s", want, body)
		}
	}
	conn, err := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	h, err := healthpb.NewHealthClient(conn).Check(ctx, &healthpb.HealthCheckRequest{})
	if err != nil || h.Status != healthpb.HealthCheckResponse_SERVING {
		t.Fatalf("health: %v %v", h, err)
	}
	select {
	case <-srv.done:
		t.Fatal("--keep-serving coordinator exited after the sweep")
	default:
	}
	srv.cmd.Process.Signal(syscall.SIGTERM)
	if code := srv.wait(t, 20*time.Second); code != 0 {
		t.Fatalf("serve after SIGTERM: exit %d: %s", code, srv.err.String())
	}
}

// bbmx run resumes from its store, bbmx status reads a store, and a changed seed is
// refused with exit status 1 and the reason.
func TestRunResumeStatusAndRefusal(t *testing.T) {
	dir, sw, _ := setupWith(t, tinySweep)
	store := filepath.Join(dir, "r.db")
	if code, _, errs := runCLI(t, "run", sw, "--store", store, "--no-report"); code != 0 {
		t.Fatalf("run: %s", errs)
	}
	first := storeDigest(t, store)
	code, out, errs := runCLI(t, "run", sw, "--store", store, "--no-report")
	if code != 0 || !strings.Contains(errs, "resuming") || !strings.Contains(out, ": 0 tasks") {
		t.Fatalf("second run should resume and do nothing: exit %d\n%s\n%s", code, out, errs)
	}
	if storeDigest(t, store) != first {
		t.Fatal("a resumed run changed a complete store")
	}
	// Flags may come before the sweep file too.
	if code, out, errs := runCLI(t, "run", "--store", store, "--no-report", sw); code != 0 || !strings.Contains(errs, "resuming") {
		t.Fatalf("flags before the sweep file: exit %d\n%s\n%s", code, out, errs)
	}
	if strings.Contains(errs, "checking") {
		t.Fatalf("a small store is checked without a word: %s", errs)
	}
	// A store of a gigabyte or more is checked for damage with a word first (here the
	// file is extended with a hole: bbolt reads only the pages it wrote).
	if err := os.Truncate(store, 1<<30); err != nil {
		t.Fatal(err)
	}
	if code, out, errs := runCLI(t, "run", sw, "--store", store, "--no-report"); code != 0 || !strings.Contains(errs, "checking "+store+" (1.0 GiB) for damage") {
		t.Fatalf("a large store: exit %d\n%s\n%s", code, out, errs)
	}
	code, out, _ = runCLI(t, "status", "--store", store)
	if code != 0 || !strings.Contains(out, "complete, 600/600 replicates") {
		t.Fatalf("status --store: exit %d\n%s", code, out)
	}
	// A sweep sized for a cluster is refused on one thread of this machine (about 3,400
	// CPU-hours: months), before any store is made; --shard shares it out.
	big := filepath.Join(dir, "big.db")
	code, _, errs = runCLI(t, "run", "../../examples/cluster.toml", "--store", big, "--threads", "1")
	if _, err := os.Stat(big); code != 2 || !strings.Contains(errs, "refusing") || !strings.Contains(errs, "days") || err == nil {
		t.Fatalf("cluster-sized local run: exit %d, store made: %v\n%s", code, err == nil, errs)
	}
	other := filepath.Join(dir, "other.toml")
	os.WriteFile(other, []byte(strings.Replace(tinySweep, "seed = 6", "seed = 7", 1)), 0o644)
	code, _, errs = runCLI(t, "run", other, "--store", store, "--no-report")
	if code != 1 || !strings.Contains(errs, "seed") {
		t.Fatalf("another seed on the same store: exit %d: %s", code, errs)
	}
}

// A cell whose replicates exceed the task size is run as subtree tasks (split at s0)
// by separate worker processes; the coordinator assembles the parts, and the store holds
// exactly what an unsplit `bbmx sim --store` of the same replicates holds.
func TestProcessSplitReplicates(t *testing.T) {
	dir, sw, tok := setupWith(t, `name = "split"
seed = 8
task_seconds = 1
[grid]
dims = [1]
horizons = [16]
replicates = 2
`)
	code, out, _ := runCLI(t, "plan", sw)
	if code != 0 || !strings.Contains(out, "1/2 rep") {
		t.Fatalf("the cost model should cut each replicate in two:\n%s", out)
	}
	store := filepath.Join(dir, "split.db")
	addr := freePort(t)
	srv := start(t, "serve", sw, "--store", store, "--token-file", tok, "--listen", addr)
	w1 := start(t, "work", "--coordinator", addr, "--token-file", tok, "--threads", "1")
	w2 := start(t, "work", "--coordinator", addr, "--token-file", tok, "--threads", "1")
	for _, p := range []*proc{w1, w2, srv} {
		if code := p.wait(t, 3*time.Minute); code != 0 {
			t.Fatalf("%v: exit %d: %s", p.cmd.Args[1], code, p.err.String())
		}
	}
	direct := filepath.Join(dir, "direct.db")
	if code, _, errs := runCLI(t, "sim", "--dim", "1", "--horizon", "16", "--replicates", "2", "--seed", "8", "--store", direct); code != 0 {
		t.Fatalf("sim: %s", errs)
	}
	if storeDigest(t, store) != storeDigest(t, direct) {
		t.Fatal("split replicates assembled by the coordinator differ from unsplit ones")
	}
}

// bbmx run on a store damaged anywhere (8 bytes flipped at the start of each page: its
// id, its type and count, its overflow count) resumes or stops with exit status 1 and a
// reason; it never crashes the process, retries forever or hangs. Before, a few pages'
// damage crashed run inside the coordinator's own reads, and one made a commit fail and
// its task run again without end. Deterministic: the same bytes on every run.
func TestRunOnDamagedStores(t *testing.T) {
	dir, sw, _ := setupWith(t, tinySweep)
	good := filepath.Join(dir, "good.db")
	if code, _, errs := runCLI(t, "run", sw, "--store", good, "--no-report"); code != 0 {
		t.Fatalf("run: %s", errs)
	}
	data, err := os.ReadFile(good)
	if err != nil {
		t.Fatal(err)
	}
	const page = 4096
	stopped := 0
	for pg := 2; pg < len(data)/page; pg++ {
		for _, off := range []int{0, 8, 12} {
			bad := append([]byte(nil), data...)
			for i := range 8 {
				bad[pg*page+off+i] ^= 0xA5
			}
			path := filepath.Join(dir, fmt.Sprintf("bad-%d-%d.db", pg, off))
			if err := os.WriteFile(path, bad, 0o644); err != nil {
				t.Fatal(err)
			}
			type result struct {
				code int
				errs string
			}
			done := make(chan result, 1)
			go func() {
				code, _, errs := runCLI(t, "run", sw, "--store", path, "--no-report")
				done <- result{code, errs}
			}()
			select {
			case r := <-done:
				switch {
				case r.code == 1 && strings.TrimSpace(r.errs) != "":
					stopped++
				case r.code != 0:
					t.Errorf("page %d byte %d: exit %d: %s", pg, off, r.code, r.errs)
				}
			case <-time.After(2 * time.Minute):
				t.Fatalf("page %d byte %d: bbmx run still running after 2 minutes", pg, off)
			}
			os.Remove(path)
		}
	}
	if stopped == 0 {
		t.Fatal("no damage was found at all: the test flips nothing that matters")
	}
}
