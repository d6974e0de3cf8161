package main

import (
	"context"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"runtime"
	"strings"
	"syscall"
	"time"

	"bbmx/coordinator"
	"bbmx/worker"
)

func init() {
	register(command{name: "work", summary: "work for a coordinator: lease tasks, simulate them on all cores, send back results", run: runWork})
}

// clientFlags are the flags of commands that call a coordinator.
type clientFlags struct {
	coordinator, addrFile, tokenFile, ca, cert, key, serverName *string
}

func addClientFlags(fs *flag.FlagSet) *clientFlags {
	return &clientFlags{
		coordinator: fs.String("coordinator", "", "coordinator address host:port"),
		addrFile:    fs.String("address-file", "", "read the coordinator's host:port from this file (written by 'bbmx serve --address-file'; waits for it; exits 0 if it says the sweep is complete)"),
		tokenFile:   fs.String("token-file", "", "file holding the shared token"),
		ca:          fs.String("tls-ca", "", "CA certificate (PEM) that signed the coordinator's certificate: turns TLS on"),
		cert:        fs.String("tls-cert", "", "client certificate (PEM), when the coordinator requires one"),
		key:         fs.String("tls-key", "", "client private key (PEM)"),
		serverName:  fs.String("tls-server-name", "", "name to check in the coordinator's certificate (default: the host dialled)"),
	}
}

func (f *clientFlags) dial(addr string) (worker.Client, func() error, error) {
	if *f.tokenFile == "" {
		return nil, nil, usagef("--token-file is required")
	}
	tok, err := coordinator.ReadToken(*f.tokenFile)
	if err != nil {
		return nil, nil, usagef("%v", err)
	}
	return worker.Dial(addr, tok, worker.TLSFiles{CAFile: *f.ca, CertFile: *f.cert, KeyFile: *f.key, ServerName: *f.serverName})
}

// waitAddressFile waits until the coordinator has written its address.
func waitAddressFile(ctx context.Context, path string, wait time.Duration) (string, error) {
	deadline := time.Now().Add(wait)
	for {
		b, err := os.ReadFile(path)
		if err == nil && strings.TrimSpace(string(b)) != "" {
			return strings.TrimSpace(string(b)), nil
		}
		if time.Now().After(deadline) {
			return "", fmt.Errorf("no coordinator address in %s after %v", path, wait)
		}
		select {
		case <-ctx.Done():
			return "", ctx.Err()
		case <-time.After(time.Second):
		}
	}
}

func runWork(args []string, stdout, stderr io.Writer) error {
	fs := newFlagSet("work", "(--coordinator HOST:PORT | --address-file FILE) --token-file F [--threads N]",
		"Works for a coordinator ('bbmx serve'): leases tasks, simulates them, one per core, and sends\n"+
			"back the results, with heartbeats that keep the leases alive. If the coordinator is not\n"+
			"reachable yet, or restarts, it retries with backoff for up to --wait. On SIGTERM or SIGINT\n"+
			"(a batch scheduler's warning before the wall-time kill) it stops leasing, lets running tasks\n"+
			"finish within --grace, hands back the rest and exits 0. It exits 0 when the sweep is complete.")
	cf := addClientFlags(fs)
	threads := fs.Int("threads", runtime.NumCPU(), "tasks run at once, one core each (the default is every core)")
	grace := fs.Duration("grace", 60*time.Second, "after SIGTERM, how long running tasks may take to finish before they are handed back")
	wait := fs.Duration("wait", 10*time.Minute, "how long to keep retrying while the coordinator is unreachable")
	if err := parseFlags(fs, args, stderr); err != nil {
		return err
	}
	switch {
	case fs.NArg() > 0:
		return usagef("unexpected argument %q", fs.Arg(0))
	case (*cf.coordinator == "") == (*cf.addrFile == ""):
		return usagef("give either --coordinator or --address-file")
	case *threads < 1 || *threads > 4096:
		return usagef("--threads must be between 1 and 4096, got %d", *threads)
	case *grace < 0 || *wait <= 0:
		return usagef("--grace must be >= 0 and --wait > 0")
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	addr := *cf.coordinator
	if addr == "" {
		var err error
		if addr, err = waitAddressFile(ctx, *cf.addrFile, *wait); err != nil {
			if ctx.Err() != nil {
				return nil
			}
			return err
		}
		if addr == sweepCompleteMark {
			fmt.Fprintf(stdout, "worker done: %s says the sweep is already complete\n", *cf.addrFile)
			return nil
		}
	}
	if *cf.coordinator != "" {
		if err := worker.CheckAddress(addr); err != nil {
			return usagef("--coordinator: %v", err)
		}
	}
	cl, closeFn, err := cf.dial(addr)
	if err != nil {
		return err
	}
	defer closeFn()
	log := newLogger(stderr, true)
	start := time.Now()
	st, err := worker.Run(ctx, cl, worker.Options{Threads: *threads, Grace: *grace, Wait: *wait, Log: log})
	if err != nil {
		return err
	}
	how := "the sweep is complete"
	if ctx.Err() != nil {
		how = "stopped by signal"
	}
	fmt.Fprintf(stdout, "worker done (%s): %d results accepted, %d duplicates, %d handed back; %s simulating in %s\n",
		how, st.Tasks, st.Duplicates, st.Released, st.Compute.Round(time.Millisecond), time.Since(start).Round(time.Millisecond))
	return nil
}
