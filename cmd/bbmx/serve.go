package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"net"
	"net/http"
	"os"
	"os/signal"
	"syscall"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/promhttp"

	"bbmx/coordinator"
	"bbmx/results"
)

func init() {
	register(command{name: "serve", summary: "coordinate a sweep: lease its tasks to workers over gRPC and collect the results", run: runServe})
}

func runServe(args []string, stdout, stderr io.Writer) error {
	fs := newFlagSet("serve", "SWEEP.toml --store PATH --token-file F [--listen 127.0.0.1:7421] [TLS flags]",
		"Runs the coordinator of a sweep: plans what the store still lacks into tasks, leases them to\n"+
			"workers ('bbmx work'), and commits every accepted result to the store. Restarting it on the\n"+
			"same store resumes: nothing finished is redone, nothing is counted twice. It exits 0 when the\n"+
			"sweep is complete (1 if some task failed too often and was parked: a parked task stays parked\n"+
			"when serve is started again, until --retry-parked queues it again). SIGTERM or Ctrl-C before\n"+
			"then stops it cleanly with status 0: every accepted result is stored, and starting it again\n"+
			"resumes (batch jobs that hit their wall time are meant to be resubmitted so). An existing\n"+
			"store is read whole for damage first; a write to it that fails (a full disk, a damaged file)\n"+
			"stops serve with status 1 and the reason, workers are refused work, and what was stored\n"+
			"before stays.\n\n"+
			"Security: it listens on loopback unless --listen names another address; every call must carry\n"+
			"the shared token (--token-file; 'bbmx secrets init' makes one). Off loopback use TLS\n"+
			"(--tls-cert/--tls-key) and preferably client certificates (--client-ca), and open the port\n"+
			"only to the worker nodes.")
	storePath := fs.String("store", "", "results store (created if absent)")
	listen := fs.String("listen", "127.0.0.1:7421", "address to listen on (host:port; port 0 picks a free one)")
	tokenFile := fs.String("token-file", "", "file holding the shared token (required)")
	certFile := fs.String("tls-cert", "", "server certificate (PEM) for TLS")
	keyFile := fs.String("tls-key", "", "server private key (PEM) for TLS")
	clientCA := fs.String("client-ca", "", "require client certificates signed by this CA (PEM)")
	addrFile := fs.String("address-file", "", "after listening, write host:port here for workers (--address-file); it says \"complete\" once the sweep is done and is removed if serve stops early")
	advertise := fs.String("advertise", "", "host name written to --address-file (default: this machine's name when listening on all interfaces)")
	metrics := fs.String("metrics-listen", "", "serve Prometheus metrics on this address (/metrics)")
	keep := fs.Bool("keep-serving", false, "keep answering status calls after the sweep completes (until SIGTERM)")
	force := fs.Bool("force", false, "run even if the cost estimate is absurd")
	lease := fs.Duration("lease", 2*time.Minute, "lease length; workers send heartbeats every quarter of it")
	verbose := fs.Bool("verbose", false, "log worker registrations and other routine events")
	retry := retryParkedFlag(fs)
	path, err := positionalArg(fs, args, "name one sweep file")
	if err != nil {
		return err
	}
	switch {
	case *storePath == "":
		return usagef("--store is required")
	case *tokenFile == "":
		return usagef("--token-file is required (make one with 'bbmx secrets init DIR')")
	case *lease < time.Second || *lease > 24*time.Hour:
		return usagef("--lease must be between 1s and 24h, got %v", *lease)
	}
	token, err := coordinator.ReadToken(*tokenFile)
	if err != nil {
		return usagef("%v", err)
	}
	tlsCfg, err := coordinator.ServerTLS(coordinator.TLSFiles{CertFile: *certFile, KeyFile: *keyFile, ClientCAFile: *clientCA})
	if err != nil {
		return usagef("%v", err)
	}
	sw, err := loadSweep(path)
	if err != nil {
		return err
	}
	if _, err := checkCost(sw, *force, stderr); err != nil {
		return err
	}
	log := newLogger(stderr, *verbose)
	// Listen before the store is made: a port in use or a mistyped address must not
	// leave an empty store behind.
	ln, err := coordinator.Listen(*listen)
	if err != nil {
		return fmt.Errorf("--listen: %w", err)
	}
	defer ln.Close()
	var mln net.Listener
	if *metrics != "" {
		if mln, err = coordinator.Listen(*metrics); err != nil {
			return fmt.Errorf("--metrics-listen: %w", err)
		}
		defer mln.Close()
	}
	st, _, err := results.OpenOrCreate(*storePath, sw.Canonical())
	if err != nil {
		return err
	}
	defer st.Close()
	noteStoreCheck(stderr, *storePath)
	co, err := coordinator.Open(st, sw, coordinator.Options{Lease: *lease, Log: log, RetryParked: *retry})
	if err != nil {
		return err
	}
	defer co.Close()
	host, port, _ := net.SplitHostPort(ln.Addr().String())
	if ip := net.ParseIP(host); ip != nil && !ip.IsLoopback() && tlsCfg == nil {
		log.Warn("listening off loopback without TLS: the token travels in clear text; use --tls-cert/--tls-key")
	}
	if *addrFile != "" {
		h := *advertise
		if h == "" {
			h = host
			if ip := net.ParseIP(host); ip != nil && ip.IsUnspecified() {
				h, _ = os.Hostname()
			}
		}
		if err := writeFileAtomic(*addrFile, []byte(net.JoinHostPort(h, port)+"\n")); err != nil {
			return err
		}
	}
	srv := coordinator.NewServer(co, token, tlsCfg)
	go srv.Serve(ln)
	defer srv.Stop()
	fmt.Fprintf(stderr, "coordinating sweep %q on %s\n", sw.Name, ln.Addr())
	if mln != nil {
		reg := prometheus.NewRegistry()
		reg.MustRegister(co.Collector())
		mux := http.NewServeMux()
		mux.Handle("/metrics", promhttp.HandlerFor(reg, promhttp.HandlerOpts{}))
		hs := &http.Server{Handler: mux, ReadHeaderTimeout: 10 * time.Second}
		go hs.Serve(mln)
		defer hs.Close()
	}

	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	// Report progress now and then, with the time left at the rate since the start.
	go func() {
		t := time.NewTicker(time.Minute)
		defer t.Stop()
		start, done0 := time.Now(), replicatesDone(co.StatusNow())
		for {
			select {
			case <-ctx.Done():
				return
			case <-t.C:
			}
			st := co.StatusNow()
			printStatus(stderr, st, true)
			done, want := replicatesDone(st), replicatesWanted(st)
			if done > done0 && want > done {
				left := time.Duration(float64(time.Since(start)) * float64(want-done) / float64(done-done0))
				fmt.Fprintf(stderr, "  about %s left at the rate since this coordinator started (estimate; replicates differ in cost)\n",
					left.Round(time.Minute))
			}
		}
	}()
	if err := co.Wait(ctx); err != nil {
		if *addrFile != "" {
			os.Remove(*addrFile) // workers wait for the restarted coordinator's address
		}
		if ctx.Err() == nil {
			return err // the store failed (Coordinator.Err)
		}
		fmt.Fprintln(stderr, "stopping: every accepted result is in the store; start again with the same store to resume")
		return nil
	}
	if *addrFile != "" {
		// Workers that start from now on read this and exit at once instead of waiting.
		if err := writeFileAtomic(*addrFile, []byte(sweepCompleteMark+"\n")); err != nil {
			log.Warn("could not mark the address file complete", "error", err)
		}
	}
	status := co.StatusNow()
	printStatus(stdout, status, false)
	if *keep {
		fmt.Fprintln(stderr, "sweep finished; still serving status (SIGTERM to stop)")
		<-ctx.Done()
	} else {
		// Let workers hear that the sweep is complete before the socket closes.
		time.Sleep(min(*lease/4, 3*time.Second))
	}
	if len(status.Parked) > 0 {
		return errors.New("some tasks were parked after repeated failures (see above); fix the cause, then serve again with --retry-parked")
	}
	return nil
}

// retryParkedFlag is --retry-parked, for the commands that run a coordinator.
func retryParkedFlag(fs *flag.FlagSet) *bool {
	return fs.Bool("retry-parked", false, "queue the tasks an earlier run parked after repeated failures again (once the cause is fixed)")
}

// sweepCompleteMark replaces the address in --address-file once the sweep is complete.
const sweepCompleteMark = "complete"

// writeFileAtomic writes data to path through a temporary file and a rename, so a
// reader never sees half a file.
func writeFileAtomic(path string, data []byte) error { return writeViaTemp(path, data, 0o644, true) }
