package main

import (
	"context"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	iofs "io/fs"
	"os"
	"os/signal"
	"runtime"
	"strconv"
	"strings"
	"syscall"
	"time"

	"bbmx/coordinator"
	"bbmx/engine"
	"bbmx/results"
	"bbmx/worker"
)

func init() {
	register(command{name: "run", summary: "run a sweep on this machine (coordinator and workers in one process), or one shard of it", run: runRun})
}

// parseShard reads "i/n" with 0 <= i < n.
func parseShard(s string) (i, n int, err error) {
	a, b, ok := strings.Cut(s, "/")
	if ok {
		i, err = strconv.Atoi(a)
		if err == nil {
			n, err = strconv.Atoi(b)
		}
	}
	if !ok || err != nil || n < 1 || i < 0 || i >= n || n > 1<<20 {
		return 0, 0, usagef("--shard %q: want i/n with 0 <= i < n, e.g. 0/4", s)
	}
	return i, n, nil
}

// localWallLimit: a local run estimated to take longer than this on this machine is
// refused unless forced. A week on one machine is almost surely a sweep meant for a
// cluster (bbmx serve and bbmx work, or shards).
const localWallLimit = 7 * 24 * time.Hour

// checkLocalTime turns cpu, the cost model's CPU seconds of what is left to run here,
// into the wall time on this machine's threads, prints it when it is more than a
// minute, and refuses it past localWallLimit unless forced.
func checkLocalTime(stderr io.Writer, cpu float64, threads int, force bool) error {
	hours := cpu / float64(threads) / 3600
	if hours*3600 > localWallLimit.Seconds() && !force {
		return usagef("refusing: what is left needs %s on %d threads of this machine (cost-model estimate); run it on a cluster "+
			"(bbmx serve and bbmx work, or --shard i/n per job: see 'Running on a cluster' in the README), shrink it, or pass --force",
			hoursText(hours), threads)
	}
	if hours > 1.0/60 {
		fmt.Fprintf(stderr, "estimate for what is left: %s on %d threads of this machine (cost model; real speed depends on the machine)\n",
			hoursText(hours), threads)
	}
	return nil
}

func runRun(args []string, stdout, stderr io.Writer) error {
	fs := newFlagSet("run", "SWEEP.toml [--store PATH] [--threads N] [--shard i/n] [--force]",
		"Runs a sweep on this machine: a coordinator and one worker per core in one process, no\n"+
			"network. Results go to a store (one bbolt file); the default is bbmx-data/<sweep>.db.\n"+
			"Ctrl-C stops cleanly; running the same command again resumes where it stopped and never\n"+
			"counts a replicate twice. The sweep may grow between runs (more replicates, horizons or\n"+
			"dimensions); changing its model, seed or observables is refused. An existing store is\n"+
			"read whole for damage first, and a write to it that fails (a full disk, a damaged file)\n"+
			"stops the run with the reason; what was stored before stays.\n\n"+
			"With --shard i/n it computes only share i of n (for clusters that forbid long-running\n"+
			"services: a job array runs every i, then 'bbmx merge' joins the shard stores into\n"+
			"exactly the store a coordinated run would make). See 'bbmx plan' for the cost first.\n\n"+
			"When the sweep completes it writes a report folder and prints the headline table.\n"+
			"Every figure from simulation is a statistical estimate.")
	storePath := fs.String("store", "", "results store (default bbmx-data/<sweep file name>.db, or ...-shard-i-of-n.db)")
	threads := fs.Int("threads", runtime.NumCPU(), "tasks run at once, one core each; the default is this machine's number of cores")
	shard := fs.String("shard", "", "compute only share i of n, written as i/n (e.g. 3/16)")
	force := fs.Bool("force", false, "run even if the cost estimate is absurd, or more than a week on this machine")
	reportDir := fs.String("report", "", "folder for the report when the sweep completes (default: beside the store)")
	noReport := fs.Bool("no-report", false, "do not write a report at the end")
	verbose := fs.Bool("verbose", false, "log every lease and commit event")
	retry := retryParkedFlag(fs)
	path, err := positionalArg(fs, args, "name one sweep file, e.g. bbmx run examples/quick.toml")
	if err != nil {
		return err
	}
	if *threads < 1 || *threads > 4096 {
		return usagef("--threads must be between 1 and 4096, got %d", *threads)
	}
	opt := coordinator.Options{Lease: 8 * time.Second, Log: newLogger(stderr, *verbose), RetryParked: *retry}
	suffix := ""
	if *shard != "" {
		if opt.Shard, opt.Shards, err = parseShard(*shard); err != nil {
			return err
		}
		suffix = fmt.Sprintf("-shard-%d-of-%d", opt.Shard, opt.Shards)
	}
	sw, err := loadSweep(path)
	if err != nil {
		return err
	}
	est, err := checkCost(sw, *force, stderr)
	if err != nil {
		return err
	}
	if *storePath == "" {
		*storePath = defaultStorePath(path, suffix)
	}
	// The local time check comes before a new store is made, so a refusal leaves nothing.
	if _, err := os.Stat(*storePath); errors.Is(err, iofs.ErrNotExist) {
		if err := checkLocalTime(stderr, est.CPUSeconds/float64(max(opt.Shards, 1)), *threads, *force); err != nil {
			return err
		}
	}
	st, created, err := results.OpenOrCreate(*storePath, sw.Canonical())
	if err != nil {
		return err
	}
	defer st.Close()
	noteStoreCheck(stderr, *storePath)
	co, err := coordinator.Open(st, sw, opt)
	if err != nil {
		return err
	}
	defer co.Close()
	share := co.Share()
	if !created {
		done, cpu := co.InFlight(), 0.0
		for _, c := range sw.Cells() {
			left := share[c.ID] - min(done[c.ID], share[c.ID])
			cpu += float64(left) * engine.NominalReplicateSeconds(c.Cell)
		}
		if err := checkLocalTime(stderr, cpu, *threads, *force); err != nil {
			return err
		}
		fmt.Fprintf(stderr, "resuming %s: only what it lacks is run\n", *storePath)
	}

	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	start := time.Now()
	want := map[string]uint64{}
	var order []string
	for _, c := range sw.Cells() {
		want[c.ID] = share[c.ID] // a shard's share with --shard
		order = append(order, c.ID)
	}
	stopView, viewDone := make(chan struct{}), make(chan struct{})
	go progressView(stderr, 250*time.Millisecond, func() []cellProgress {
		now := co.InFlight()
		var ps []cellProgress
		for _, id := range order {
			if n, ok := now[id]; ok {
				ps = append(ps, cellProgress{id: id, done: n, want: want[id]})
			}
		}
		return ps
	}, stopView, viewDone)
	stats, werr := worker.Run(ctx, co, worker.Options{Threads: *threads, Log: opt.Log})
	close(stopView)
	<-viewDone
	wall := time.Since(start)
	if err := co.Err(); err != nil {
		return err // the workers stopped because the coordinator refused them work
	}
	if werr != nil {
		return werr
	}
	if ctx.Err() != nil {
		return errors.New("interrupted: everything finished so far is in the store; run the same command again to resume")
	}
	if err := co.Wait(ctx); err != nil {
		return err
	}
	co.Close()
	status := co.StatusNow()
	printParked(stderr, status)
	digest, err := st.ContentDigest()
	if err != nil {
		return err
	}
	which := ""
	if opt.Shards > 1 {
		which = fmt.Sprintf(" (shard %d of %d)", opt.Shard, opt.Shards)
	}
	fmt.Fprintf(stdout, "sweep %q%s: %d tasks in %s on %d threads; simulating took %s of CPU\n",
		sw.Name, which, stats.Tasks, wall.Round(time.Millisecond), *threads, stats.Compute.Round(time.Millisecond))
	fmt.Fprintf(stdout, "store %s, content digest %s\n", *storePath, hex.EncodeToString(digest[:]))
	if len(status.Parked) > 0 {
		return fmt.Errorf("%d task(s) parked after repeated failures (listed above); fix the cause, then run again with --retry-parked", len(status.Parked))
	}
	if opt.Shards > 1 || *noReport {
		return nil
	}
	// The sweep is stored and closed: Ctrl-C now simply ends the process rather than
	// being caught and ignored while the fits run (minutes on a large store).
	stop()
	return finalReport(st, *storePath, *reportDir, stdout, stderr)
}

// noteStoreCheck says, for a large store, that it is read whole before the sweep goes on
// (the coordinator verifies it first, results.Store.Verify): a minute or more for tens of
// gigabytes not in memory, which would otherwise pass without a word.
func noteStoreCheck(w io.Writer, path string) {
	if fi, err := os.Stat(path); err == nil && fi.Size() >= 1<<30 {
		fmt.Fprintf(w, "checking %s (%.1f GiB) for damage before going on: it is read once\n", path, float64(fi.Size())/(1<<30))
	}
}
