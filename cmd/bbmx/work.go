package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"runtime"
	"strings"
	"syscall"
	"time"

	"google.golang.org/grpc/codes"
	grpcstatus "google.golang.org/grpc/status"

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
		addrFile:    fs.String("address-file", "", "read the coordinator's host:port from this file (written by 'bbmx serve --address-file'; waits for it, reads it again whenever the coordinator is unreachable, so a coordinator restarted elsewhere is followed; exits 0 once it says the sweep is complete)"),
		tokenFile:   fs.String("token-file", "", "file holding the shared token"),
		ca:          fs.String("tls-ca", "", "CA certificate (PEM) that signed the coordinator's certificate: turns TLS on"),
		cert:        fs.String("tls-cert", "", "client certificate (PEM), when the coordinator requires one"),
		key:         fs.String("tls-key", "", "client private key (PEM)"),
		serverName:  fs.String("tls-server-name", "", "name to check in the coordinator's certificate (default: the host dialled)"),
	}
}

// credentials reads the token and names the TLS files.
func (f *clientFlags) credentials() (string, worker.TLSFiles, error) {
	if *f.tokenFile == "" {
		return "", worker.TLSFiles{}, usagef("--token-file is required")
	}
	tok, err := coordinator.ReadToken(*f.tokenFile)
	if err != nil {
		return "", worker.TLSFiles{}, usagef("%v", err)
	}
	return tok, worker.TLSFiles{CAFile: *f.ca, CertFile: *f.cert, KeyFile: *f.key, ServerName: *f.serverName}, nil
}

// dial connects to the coordinator named by --coordinator.
func (f *clientFlags) dial(addr string) (worker.Client, func() error, error) {
	if err := worker.CheckAddress(addr); err != nil {
		return nil, nil, usagef("--coordinator: %v", err)
	}
	tok, tf, err := f.credentials()
	if err != nil {
		return nil, nil, err
	}
	return worker.Dial(addr, tok, tf)
}

// dialFollowing connects to the coordinator whose address is in the file at path, and
// reads the file again whenever the coordinator is unreachable: a coordinator restarted
// by a batch scheduler may listen on another node, and rewrites the file when it does.
func dialFollowing(path, tok string, tf worker.TLSFiles) (worker.Client, func() error, error) {
	return worker.DialFollowing(func() (string, error) {
		b, _ := os.ReadFile(path) // missing while the coordinator is down
		switch a := strings.TrimSpace(string(b)); a {
		case sweepCompleteMark:
			return "", worker.ErrSweepComplete
		default:
			return a, nil
		}
	}, tok, tf)
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
			"reachable yet, or restarts, it retries with backoff for up to --wait (with --address-file\n"+
			"it also follows a coordinator restarted at another address). On SIGTERM or SIGINT\n"+
			"(a batch scheduler's warning before the wall-time kill) it stops leasing, lets running tasks\n"+
			"finish within --grace, hands back the rest and exits 0. It exits 0 when the sweep is complete.")
	cf := addClientFlags(fs)
	threads := fs.Int("threads", runtime.NumCPU(), "tasks run at once, one core each; the default is this machine's number of cores")
	grace := fs.Duration("grace", 60*time.Second, "after SIGTERM, how long running tasks may take to finish before they are handed back")
	wait := fs.Duration("wait", 10*time.Minute, "how long to keep retrying while the coordinator is unreachable")
	if err := parseFlags(fs, args); err != nil {
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
	var (
		cl      worker.Client
		closeFn func() error
		err     error
	)
	if *cf.addrFile == "" {
		cl, closeFn, err = cf.dial(*cf.coordinator)
	} else {
		var tok string
		var tf worker.TLSFiles
		if tok, tf, err = cf.credentials(); err != nil {
			return err // a bad token file is reported before waiting for the address
		}
		if _, err := waitAddressFile(ctx, *cf.addrFile, *wait); err != nil {
			if ctx.Err() != nil {
				return nil
			}
			return err
		}
		cl, closeFn, err = dialFollowing(*cf.addrFile, tok, tf)
		if errors.Is(err, worker.ErrSweepComplete) {
			fmt.Fprintf(stdout, "worker done: %s says the sweep is already complete\n", *cf.addrFile)
			return nil
		}
	}
	if err != nil {
		return err
	}
	defer closeFn()
	log := newLogger(stderr, true)
	start := time.Now()
	st, err := worker.Run(ctx, cl, worker.Options{Threads: *threads, Grace: *grace, Wait: *wait, Log: log})
	if err != nil {
		return refusal(err)
	}
	how := "the sweep is complete"
	if ctx.Err() != nil {
		how = "stopped by signal"
	}
	fmt.Fprintf(stdout, "worker done (%s): %d results accepted, %d duplicates, %d handed back; %s simulating in %s\n",
		how, st.Tasks, st.Duplicates, st.Released, st.Compute.Round(time.Millisecond), time.Since(start).Round(time.Millisecond))
	return nil
}

// refusal words a coordinator's refusal of work (a store that can no longer be written,
// say) as the coordinator's own reason, not as a gRPC status. Other errors pass as they
// are.
func refusal(err error) error {
	if s, ok := grpcstatus.FromError(err); ok && s.Code() == codes.FailedPrecondition {
		return fmt.Errorf("the coordinator refused work: %s", s.Message())
	}
	return err
}
