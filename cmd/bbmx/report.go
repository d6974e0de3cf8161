package main

import (
	"fmt"
	"io"
	"os"

	"bbmx/results"
	"bbmx/results/report"
)

func init() {
	register(command{name: "report", summary: "fit a store's results, compare them with theory, write a page with figures and tables", run: runReport})
}

const reportHelp = `Reads the store STORE (only reads it) and writes the folder DIR:
  report.html, report.md   one page: the theory-vs-measured table, then every figure
  *.png, *.svg             figures: histogram of R*_T - m_T with the fitted Gumbel and the
                           exact law, log-tail with the fitted slope, centring across
                           horizons, random shift, direction and PIT histograms, extremal
                           intensity, particles within x of the maximum
  summary.csv, .json       the theory-vs-measured table
  *.csv, tables.json       intensity per bin, gaps between top radii, counts within x
and prints the table's rows that have a theory, with the path of report.html.

What is fitted, per cell (d, T): moments and quantiles of R*_T - m_T (quantiles against
the exact law from the law solver), a maximum-likelihood Gumbel (scale against 1/theta),
the upper-tail slope (against -theta, bootstrap interval), a Kolmogorov-Smirnov test
against the exact law; per checkpoint s: the random shift R*_T - m_T - log(Z_s)/theta as a
Gumbel and the share of Z_s <= 0; the direction of the farthest particle (uniformity;
for d = 2 also its PIT under Z_s(u) du); gaps, counts within x of the maximum and the mean
extremal intensity against the many-to-one formula. Across the horizons of one model:
median and mean of R*_T against a T + b log T + c, a against v, b against (d-4)/(2 theta).

Every measured number is a statistical estimate. Intervals are at --level; "agrees" means
the theory lies in the interval (or a test's p-value is at least 1 - level), so each
verdict is a false alarm with probability 1 - level. Rows marked "limit" hold only as T
grows and are expected to differ at short horizons; rows marked "exact" hold at every T.
A store kept without per-replicate records still gives moments, quantiles, Gumbel and
tail fits, a conservative grouped KS test, the Z_s <= 0 share and the intensity; the
page lists what it skipped.

Example: bbmx report sweep.db --out sweep-report`

func runReport(args []string, stdout, stderr io.Writer) error {
	fs := newFlagSet("report", "STORE --out DIR [flags]", reportHelp)
	out := fs.String("out", "", "folder to write the report into (created if missing; earlier report files are overwritten)")
	boot := fs.Int("bootstrap", 200, "bootstrap resamples for the tail-slope interval (at least 10)")
	seed := fs.Uint64("seed", 1, "seed of the bootstrap; the same seed gives the same report")
	level := fs.Float64("level", 0.95, "confidence level of every interval, in (0.5, 1)")
	tol := fs.Float64("law-tolerance", 1e-5, "absolute error in probability asked of the exact law, in (0, 0.01]")
	tail := fs.Float64("tail-fraction", 0.1, "share of the largest R*_T - m_T used for the tail slope, in (0, 0.5]")
	quiet := fs.Bool("quiet", false, "do not print progress to stderr")
	path, err := storeArg(fs, args)
	if err != nil {
		return err
	}
	if *out == "" {
		return usagef("--out DIR is required")
	}
	switch {
	case *boot < 10:
		return usagef("--bootstrap must be at least 10, got %d", *boot)
	case !(*level > 0.5 && *level < 1):
		return usagef("--level must be in (0.5, 1), got %v", *level)
	case !(*tol > 0 && *tol <= 1e-2):
		return usagef("--law-tolerance must be in (0, 0.01], got %v", *tol)
	case !(*tail > 0 && *tail <= 0.5):
		return usagef("--tail-fraction must be in (0, 0.5], got %v", *tail)
	}
	if fi, err := os.Stat(*out); err == nil && !fi.IsDir() {
		return usagef("--out %s exists and is not a folder", *out)
	}
	st, err := results.Open(path, true)
	if err != nil {
		return err
	}
	defer st.Close()
	opt := report.Options{Bootstrap: *boot, Seed: *seed, Level: *level, LawTolerance: *tol, TailFraction: *tail}
	if !*quiet {
		opt.Progress = stderr
	}
	rep, err := report.Write(st, *out, opt)
	if err != nil {
		return err
	}
	fmt.Fprint(stdout, rep.Headline())
	return nil
}
