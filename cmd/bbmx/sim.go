package main

import (
	"bufio"
	"context"
	"encoding/hex"
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"os/signal"
	"runtime"
	"strconv"
	"strings"
	"sync"
	"time"

	"github.com/schollz/progressbar/v3"
	"golang.org/x/term"

	"bbmx/coordinator/sweep"
	"bbmx/engine"
	"bbmx/results"
)

func init() {
	register(command{name: "sim", summary: "simulate one cell (d, T) on this machine and summarise it", run: runSim})
}

// modelFlags registers the model's flags on fs; law and sim share them.
func modelFlags(fs *flag.FlagSet, m *engine.Model) {
	fs.IntVar(&m.Dim, "dim", 2, "dimension d of the space (>= 1)")
	fs.Float64Var(&m.Sigma, "sigma", 1, "diffusion: each coordinate has variance sigma^2 per unit time")
	fs.Float64Var(&m.Beta, "beta", 1, "branching rate: lifetimes are exponential with this rate")
	fs.IntVar(&m.Children, "children", 2, "offspring per branching (>= 2)")
}

// parseTimes parses a comma-separated list of times.
func parseTimes(s string) ([]float64, error) {
	if strings.TrimSpace(s) == "" {
		return nil, nil
	}
	var out []float64
	for _, f := range strings.Split(s, ",") {
		v, err := strconv.ParseFloat(strings.TrimSpace(f), 64)
		if err != nil || math.IsNaN(v) {
			return nil, fmt.Errorf("%q is not a number", f)
		}
		out = append(out, v)
	}
	return out, nil
}

type simSummary struct {
	Dim            int     `json:"dim"`
	Sigma          float64 `json:"sigma"`
	Beta           float64 `json:"beta"`
	Children       int     `json:"children"`
	Horizon        float64 `json:"horizon"`
	Replicates     uint64  `json:"replicates"`
	Seed           uint64  `json:"seed"`
	MeanPopulation float64 `json:"mean_population"`
	TheoryPop      float64 `json:"expected_population"`
	MeanMaxRadius  float64 `json:"mean_max_radius"`
	SEMaxRadius    float64 `json:"se_mean_max_radius"`
	SDMaxRadius    float64 `json:"sd_max_radius"`
	Centring       float64 `json:"centring"`
	MeanShifted    float64 `json:"mean_max_minus_centring"`
	RecordsSHA256  string  `json:"records_sha256"`
	Seconds        float64 `json:"seconds"`
}

func runSim(args []string, stdout, stderr io.Writer) error {
	fs := newFlagSet("sim", "--dim D --horizon T --replicates N [flags]",
		"Simulates replicates of branching Brownian motion exactly (event-driven, no time step) to\n"+
			"horizon T and prints a summary: mean population, mean and spread of the maximal radius\n"+
			"R*_T, and the centring m_T(d) = v T + (d-4)/(2 theta) log T. The numbers are Monte Carlo\n"+
			"estimates; records_sha256 identifies the exact records (same seed, same bits, on any\n"+
			"machine and any thread count).\n\nExample: bbmx sim --dim 3 --horizon 8 --replicates 200 --seed 7")
	m := engine.DefaultModel()
	modelFlags(fs, &m)
	horizon := fs.Float64("horizon", 0, "horizon T (> 0); cost grows like e^{beta (k-1) T}")
	reps := fs.Int64("replicates", 100, "number of independent replicates")
	seed := fs.Uint64("seed", 1, "seed: a replicate depends only on (seed, cell, replicate number)")
	threads := fs.Int("threads", runtime.NumCPU(), "goroutines to use")
	splitAt := fs.Float64("split-at", 0, "compute each replicate as subtrees rooted at the particles alive at this time (same result; tests the split path)")
	checks := fs.String("checkpoints", "", "comma-separated times s <= T at which N_s, Z_s, W_s and Z_s(u) are recorded")
	topK := fs.Int("top", 32, "number of largest radii kept per replicate")
	window := fs.Float64("window", 8, "extremal histogram covers R - m_T in [-window, window) plus an overflow bin")
	bin := fs.Float64("bin", 0.05, "extremal histogram bin width")
	dirs := fs.Int("directions", 16, "size of the direction grid for Z_s(u)")
	asJSON := fs.Bool("json", false, "print the summary as one JSON object")
	out := fs.String("out", "", "write every replicate record to this file as JSON lines")
	force := fs.Bool("force", false, "run even if the cost estimate is absurd")
	storePath := fs.String("store", "", "also add the replicates to this store (created if absent); see bbmx show, audit, merge")
	first := fs.Uint64("first", 0, "number of the first replicate (to add more replicates to a store)")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usagef("unexpected argument %q", fs.Arg(0))
	}
	cps, err := parseTimes(*checks)
	if err != nil {
		return usagef("--checkpoints: %v", err)
	}
	if *reps < 0 {
		return usagef("--replicates must not be negative, got %d", *reps)
	}
	if *reps == 0 {
		return usagef("--replicates must be at least 1, got 0")
	}
	if *threads < 1 {
		return usagef("--threads must be at least 1, got %d", *threads)
	}
	cell := engine.Cell{Model: m, Horizon: *horizon, Observe: engine.Observe{
		TopK: *topK, Window: *window, BinWidth: *bin, Checkpoints: cps, Directions: *dirs}}
	if err := cell.Validate(); err != nil {
		return usagef("%v", err)
	}
	cell = cell.WithDefaults()
	if *splitAt < 0 || *splitAt >= *horizon {
		return usagef("--split-at %v is outside [0, horizon %v)", *splitAt, *horizon)
	}
	nodes := m.ExpectedNodes(*horizon) * float64(*reps)
	cpu := float64(*reps) * engine.NominalReplicateSeconds(cell) // the walk, and the checkpoints' crossings
	if nodes > engine.AbsurdNodes && !*force {
		return usagef("refusing: about %.3g tree nodes, roughly %.0f CPU-hours (estimate); lower --horizon or --replicates, or pass --force", nodes, cpu/3600)
	}
	if cpu > 60 && !*asJSON {
		fmt.Fprintf(stderr, "estimate: %.3g tree nodes, about %s of CPU, %s on %d threads\n",
			nodes, time.Duration(cpu*1e9).Round(time.Second), time.Duration(cpu/float64(*threads)*1e9).Round(time.Second), *threads)
	}

	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	var bar *progressbar.ProgressBar
	if f, ok := stderr.(*os.File); ok && term.IsTerminal(int(f.Fd())) {
		bar = progressbar.NewOptions64(*reps, progressbar.OptionSetWriter(stderr),
			progressbar.OptionSetDescription("replicates"), progressbar.OptionShowCount(),
			progressbar.OptionSetPredictTime(true), progressbar.OptionThrottle(200*time.Millisecond))
	}
	start := time.Now()
	var recs []engine.Record
	if *splitAt > 0 {
		recs, err = simulateSplit(ctx, cell, *seed, *first, uint64(*reps), *splitAt, *threads, bar)
	} else {
		b := engine.Batch{Cell: cell, Seed: *seed, From: *first, To: *first + uint64(*reps), Threads: *threads}
		if bar != nil {
			var mu sync.Mutex
			b.Progress = func(int64) { mu.Lock(); bar.Add(1); mu.Unlock() }
		}
		recs, err = b.Run(ctx)
	}
	if bar != nil {
		bar.Finish()
		fmt.Fprintln(stderr)
	}
	if err != nil {
		return err
	}
	sum := summarise(cell, *seed, recs)
	sum.Seconds = time.Since(start).Seconds()
	if *out != "" {
		if err := writeRecordsJSONL(*out, recs); err != nil {
			return err
		}
	}
	if *storePath != "" {
		if err := addToStore(*storePath, cell, *seed, *first, recs); err != nil {
			return err
		}
	}
	if *asJSON {
		enc := json.NewEncoder(stdout)
		return enc.Encode(sum)
	}
	fmt.Fprintf(stdout, "cell: d=%d sigma=%g beta=%g k=%d, horizon T=%g, %d replicates, seed %d\n",
		m.Dim, m.Sigma, m.Beta, m.Children, *horizon, *reps, *seed)
	fmt.Fprintf(stdout, "population N_T:     mean %.6g   (theory e^{gT} = %.6g)\n", sum.MeanPopulation, sum.TheoryPop)
	fmt.Fprintf(stdout, "maximal radius R*_T: mean %.5f ± %.5f (s.e.), sd %.5f\n", sum.MeanMaxRadius, sum.SEMaxRadius, sum.SDMaxRadius)
	fmt.Fprintf(stdout, "centring m_T(d):    %.5f   so mean R*_T - m_T = %.5f\n", sum.Centring, sum.MeanShifted)
	fmt.Fprintf(stdout, "records sha256:     %s\n", sum.RecordsSHA256)
	fmt.Fprintf(stdout, "time:               %.2fs  (Monte Carlo estimates; ± is one standard error)\n", sum.Seconds)
	return nil
}

// simulateSplit computes every replicate as subtree parts rooted at time s0, spreading the
// parts of each replicate over the threads, and merges them.
func simulateSplit(ctx context.Context, c engine.Cell, seed, first, reps uint64, s0 float64, threads int, bar *progressbar.ProgressBar) ([]engine.Record, error) {
	recs := make([]engine.Record, reps)
	for rep := first; rep < first+reps; rep++ {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		roots, err := engine.CountRoots(c, seed, rep, s0)
		if err != nil {
			return nil, err
		}
		n := min(uint64(threads), roots)
		parts := make([]*engine.Part, n)
		errs := make([]error, n)
		var wg sync.WaitGroup
		for i := uint64(0); i < n; i++ {
			wg.Add(1)
			go func() {
				defer wg.Done()
				parts[i], errs[i] = engine.SimulatePartContext(ctx, c, seed, rep, s0, roots*i/n, roots*(i+1)/n)
			}()
		}
		wg.Wait()
		for _, e := range errs {
			if e != nil {
				return nil, e
			}
		}
		for i := uint64(1); i < n; i++ {
			if err := parts[0].Merge(parts[i]); err != nil {
				return nil, err
			}
		}
		if recs[rep-first], err = parts[0].Record(c); err != nil {
			return nil, err
		}
		if bar != nil {
			bar.Add(1)
		}
	}
	return recs, nil
}

func summarise(c engine.Cell, seed uint64, recs []engine.Record) simSummary {
	m := c.Model
	s := simSummary{Dim: m.Dim, Sigma: m.Sigma, Beta: m.Beta, Children: m.Children, Horizon: c.Horizon,
		Replicates: uint64(len(recs)), Seed: seed, Centring: m.Centring(c.Horizon), TheoryPop: m.MeanPopulation(c.Horizon)}
	var pop, mean, m2 float64
	for i, r := range recs {
		pop += float64(r.Population)
		x := r.MaxRadius()
		d := x - mean
		mean += d / float64(i+1)
		m2 += d * (x - mean)
	}
	n := float64(len(recs))
	s.MeanPopulation = pop / n
	s.MeanMaxRadius = mean
	if len(recs) > 1 {
		s.SDMaxRadius = math.Sqrt(m2 / (n - 1))
		s.SEMaxRadius = s.SDMaxRadius / math.Sqrt(n)
	}
	s.MeanShifted = mean - s.Centring
	d := engine.RecordsDigest(recs)
	s.RecordsSHA256 = hex.EncodeToString(d[:])
	return s
}

// jsonRecord is the JSON-lines form of one replicate record.
type jsonRecord struct {
	Replicate  uint64                   `json:"replicate"`
	Population uint64                   `json:"population"`
	MaxRadius  float64                  `json:"max_radius"`
	MaxDir     []float64                `json:"max_direction"`
	TopRadii   []float64                `json:"top_radii"`
	Hist       []uint64                 `json:"extremal_histogram"`
	Checks     []engine.CheckpointStats `json:"checkpoints"`
}

func writeRecordsJSONL(path string, recs []engine.Record) error {
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	w := bufio.NewWriter(f)
	enc := json.NewEncoder(w)
	for _, r := range recs {
		jr := jsonRecord{Replicate: r.Replicate, Population: r.Population, MaxRadius: r.MaxRadius(), MaxDir: r.Top[0].Dir, Hist: r.Hist, Checks: r.Checks}
		for _, p := range r.Top {
			jr.TopRadii = append(jr.TopRadii, p.Radius)
		}
		if err := enc.Encode(jr); err != nil {
			f.Close()
			return err
		}
	}
	if err := w.Flush(); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}

// addToStore commits one sim run's records to a store, creating it if needed.
func addToStore(path string, c engine.Cell, seed, first uint64, recs []engine.Record) error {
	spec, _ := json.Marshal(map[string]any{"made_by": "bbmx sim", "model": c.Model})
	st, _, err := results.OpenOrCreate(path, spec)
	if err != nil {
		return err
	}
	if err := st.CheckStream(); err != nil {
		st.Close()
		return err
	}
	id := sweep.CellID(c.Model.Dim, c.Horizon)
	err = st.Commit([]results.TaskResult{{CellID: id, Cell: c, Seed: seed, From: first, Records: recs, KeepRecords: true}}, nil)
	if cerr := st.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return fmt.Errorf("store %s: %w (use another --seed or --first to add new replicates)", path, err)
	}
	return nil
}
