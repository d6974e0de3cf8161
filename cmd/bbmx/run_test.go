package main

import (
	"os"
	"os/signal"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
)

// Ctrl-C while run writes the final report ends the process. Before, the signal was
// still caught for the finished sweep and ignored: the fits went on and the command
// exited 0 as if nothing had been asked.
func TestProcessInterruptDuringReport(t *testing.T) {
	if signal.Ignored(os.Interrupt) {
		// Started from a shell's background job: the child inherits SIGINT ignored, and
		// once run stops catching signals for the report it ignores Ctrl-C too, rightly.
		t.Skip("SIGINT is ignored in this process, so the child would ignore it as well")
	}
	src, err := os.ReadFile(filepath.Join("..", "..", "examples", "quick.toml"))
	if err != nil {
		t.Fatal(err)
	}
	dir, sw, _ := setupWith(t, string(src))
	store := filepath.Join(dir, "q.db")
	p := start(t, "run", sw, "--store", store, "--threads", "2")
	until(t, time.Minute, "the report to start", func() bool { return strings.Contains(p.err.String(), "fitting and writing") })
	p.cmd.Process.Signal(syscall.SIGINT)
	select {
	case <-p.done:
	case <-time.After(10 * time.Second):
		t.Fatal("run did not stop on SIGINT during the report")
	}
	if p.cmd.ProcessState.Success() {
		t.Fatalf("run interrupted during the report exited 0:\n%s", p.err.String())
	}
	if !strings.Contains(p.err.String(), "bbmx report "+store) {
		t.Fatalf("no hint how to write the report later:\n%s", p.err.String())
	}
	// The sweep itself is stored and complete.
	if code, out, errs := runCLI(t, "status", "--store", store); code != 0 || !strings.Contains(out, "complete") {
		t.Fatalf("status after the interrupted report: exit %d: %s %s", code, out, errs)
	}
}
