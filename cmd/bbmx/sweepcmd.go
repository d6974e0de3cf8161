package main

import (
	"fmt"
	"io"
	"log/slog"
	"path/filepath"
	"strings"
	"time"

	"bbmx/coordinator/sweep"
)

// Shared pieces of the commands that run sweeps (run, serve).

// loadSweep reads a sweep file; a bad file is a usage error (exit 2) naming key and line.
func loadSweep(path string) (*sweep.Sweep, error) {
	sw, err := sweep.Load(path)
	if err != nil {
		return nil, usageError{err.Error()}
	}
	return sw, nil
}

// checkCost prints the cost model's estimate for the whole sweep and refuses an absurd
// sweep unless forced. It returns the estimate for callers that go on to use it.
func checkCost(sw *sweep.Sweep, force bool, stderr io.Writer) (sweep.Estimate, error) {
	est := sw.Estimate()
	if est.Absurd && !force {
		return est, usagef("refusing: the sweep needs about %.3g tree nodes, roughly %.0f CPU-hours (estimate from the cost model); shrink it or pass --force",
			est.Nodes, est.CPUSeconds/3600)
	}
	if est.CPUSeconds > 60 {
		fmt.Fprintf(stderr, "estimate for the whole sweep: %.3g tree nodes, about %.1f CPU-hours (cost model; work already in the store is skipped)\n",
			est.Nodes, est.CPUSeconds/3600)
	}
	return est, nil
}

// defaultStorePath is where a sweep's store goes when none is named: a folder
// bbmx-data/ beside where the command runs, one file per sweep file.
func defaultStorePath(sweepPath, suffix string) string {
	stem := strings.TrimSuffix(filepath.Base(sweepPath), filepath.Ext(sweepPath))
	return filepath.Join("bbmx-data", stem+suffix+".db")
}

// newLogger logs to stderr as text, one line per event.
func newLogger(w io.Writer, verbose bool) *slog.Logger {
	lvl := slog.LevelInfo
	if !verbose {
		lvl = slog.LevelWarn
	}
	return slog.New(slog.NewTextHandler(w, &slog.HandlerOptions{Level: lvl,
		ReplaceAttr: func(groups []string, a slog.Attr) slog.Attr {
			if a.Key == slog.TimeKey && len(groups) == 0 {
				return slog.String("time", a.Value.Time().Format(time.TimeOnly))
			}
			return a
		}}))
}
