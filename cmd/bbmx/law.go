package main

import (
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"math"
	"runtime"
	"strconv"
	"strings"
	"sync"

	"bbmx/engine"
	"bbmx/engine/law"
)

func init() {
	register(command{name: "law", summary: "exact law of the maximal radius (deterministic equation solver)", run: runLaw})
}

const lawDescription = `Computes the exact distribution of the maximal radius R*_T = max |X_v(T)| of branching
Brownian motion in R^d started from one particle at the origin, by solving the radial
reaction-diffusion equation it obeys:
  P(R*_T <= R) = w(T, 0),  w_t = (sigma^2/2)(w_rr + (d-1)/r w_r) + beta (w^k - w),
  w(0, r) = 1{r <= R}.
With --one-sided (d = 1 only) it gives instead the law of max X_v(T), from the same
equation on the line.

It prints the distribution function at the given radii and the quantiles (found by root
finding in R), with the centring m_T = v T + (d-4)/(2 theta) log T for comparison. With
neither --radius nor --quantiles it prints the quantiles 0.1, 0.5 and 0.9.

These numbers are deterministic, not statistical estimates: the same command prints the
same numbers. Each is shown with its numerical error estimate, obtained by refining the
grid (Richardson extrapolation); the grid is refined until that estimate is below
--tolerance (an absolute error in probability; a quantile's error is in radius units).`

// lawReport is the JSON form of the output.
type lawReport struct {
	Dim       int          `json:"dim"`
	Sigma     float64      `json:"sigma"`
	Beta      float64      `json:"beta"`
	Children  int          `json:"children"`
	OneSided  bool         `json:"one_sided"`
	Horizon   float64      `json:"horizon"`
	Tolerance float64      `json:"tolerance"`
	Centring  float64      `json:"centring"`
	CDF       []lawPoint   `json:"cdf"`
	Quantiles []lawQuantle `json:"quantiles"`
}

type lawPoint struct {
	Radius float64 `json:"radius"`
	P      float64 `json:"p"`
	Err    float64 `json:"err"`
}

type lawQuantle struct {
	Q      float64 `json:"q"`
	Radius float64 `json:"radius"`
	Err    float64 `json:"err"`
}

// floatList is a comma-separated list flag.
type floatList struct {
	name string
	vals []float64
	set  bool
}

func (l *floatList) String() string {
	s := make([]string, len(l.vals))
	for i, v := range l.vals {
		s[i] = strconv.FormatFloat(v, 'g', -1, 64)
	}
	return strings.Join(s, ",")
}

func (l *floatList) Set(s string) error {
	l.set = true
	for _, f := range strings.Split(s, ",") {
		f = strings.TrimSpace(f)
		if f == "" {
			continue
		}
		v, err := strconv.ParseFloat(f, 64)
		if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("cannot read %q as a finite number", f)
		}
		l.vals = append(l.vals, v)
	}
	if len(l.vals) == 0 {
		return fmt.Errorf("empty list %q", s)
	}
	return nil
}

func runLaw(args []string, stdout, stderr io.Writer) error {
	fs := newFlagSet("law", "--horizon T [--dim D] [--radius R,...] [--quantiles q,...] [flags]", lawDescription)
	dim := fs.Int("dim", 2, "dimension d of the space (>= 1)")
	sigma := fs.Float64("sigma", 1, "diffusion coefficient sigma: variance sigma^2 per unit time per coordinate")
	beta := fs.Float64("beta", 1, "branching rate beta: lifetimes are Exp(beta)")
	children := fs.Int("children", 2, "children per branching k (>= 2)")
	horizon := fs.Float64("horizon", 0, "horizon T (required, > 0)")
	radii := &floatList{name: "radius"}
	fs.Var(radii, "radius", "comma-separated radii R at which to print P(R*_T <= R) (levels x with --one-sided)")
	quants := &floatList{name: "quantiles"}
	fs.Var(quants, "quantiles", "comma-separated quantile levels in (0, 1) (default 0.1,0.5,0.9 when --radius is not given)")
	oneSided := fs.Bool("one-sided", false, "d = 1 only: the law of max X_v(T) instead of max |X_v(T)|")
	tol := fs.Float64("tolerance", 1e-5, "target absolute error in probability (> 0)")
	threads := fs.Int("threads", 0, "solves run at once (0: all CPUs)")
	asJSON := fs.Bool("json", false, "print JSON instead of a table")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usagef("unexpected argument %q (all inputs are flags)", fs.Arg(0))
	}
	set := map[string]bool{}
	fs.Visit(func(f *flag.Flag) { set[f.Name] = true })
	switch {
	case *dim < 1:
		return usagef("--dim must be at least 1, got %d", *dim)
	case !set["horizon"]:
		return usagef("--horizon is required")
	case !(*horizon > 0) || math.IsInf(*horizon, 0):
		return usagef("--horizon must be a positive finite number, got %v", *horizon)
	case !(*sigma > 0) || math.IsInf(*sigma, 0):
		return usagef("--sigma must be a positive finite number, got %v", *sigma)
	case !(*beta > 0) || math.IsInf(*beta, 0):
		return usagef("--beta must be a positive finite number, got %v", *beta)
	case *children < 2:
		return usagef("--children must be at least 2, got %d", *children)
	case !(*tol > 0) || *tol >= 1:
		return usagef("--tolerance must be in (0, 1), got %v", *tol)
	case *tol < 1e-12:
		return usagef("--tolerance %v is below the supported 1e-12", *tol)
	case *threads < 0:
		return usagef("--threads must be >= 0, got %d", *threads)
	case *oneSided && *dim != 1:
		return usagef("--one-sided needs --dim 1, got --dim %d", *dim)
	}
	m := engine.Model{Dim: *dim, Sigma: *sigma, Beta: *beta, Children: *children}
	if err := m.Validate(); err != nil {
		return usagef("%v", err)
	}
	for _, r := range radii.vals {
		if r < 0 && !*oneSided {
			return usagef("--radius must be >= 0, got %v", r)
		}
	}
	for _, q := range quants.vals {
		if !(q > 0 && q < 1) {
			return usagef("--quantiles must lie in (0, 1), got %v", q)
		}
	}
	if !radii.set && !quants.set {
		quants.vals = []float64{0.1, 0.5, 0.9}
	}
	nt := *threads
	if nt == 0 {
		nt = runtime.GOMAXPROCS(0)
	}

	rep := lawReport{Dim: m.Dim, Sigma: m.Sigma, Beta: m.Beta, Children: m.Children, OneSided: *oneSided,
		Horizon: *horizon, Tolerance: *tol, Centring: m.Centring(*horizon),
		CDF: []lawPoint{}, Quantiles: []lawQuantle{}}
	opt := law.Options{Tolerance: *tol, OneSided: *oneSided, Threads: nt}
	if len(radii.vals) > 0 {
		vals, err := law.CDF(m, *horizon, radii.vals, opt)
		if err != nil {
			return err
		}
		for _, v := range vals {
			rep.CDF = append(rep.CDF, lawPoint{Radius: v.Radius, P: v.P, Err: v.Err})
		}
	}
	if n := len(quants.vals); n > 0 {
		rep.Quantiles = make([]lawQuantle, n)
		inner := opt
		inner.Threads = max(1, nt/n)
		var (
			wg    sync.WaitGroup
			mu    sync.Mutex
			first error
			sem   = make(chan struct{}, nt)
		)
		for i, q := range quants.vals {
			wg.Add(1)
			go func() {
				defer wg.Done()
				sem <- struct{}{}
				defer func() { <-sem }()
				r, e, err := law.Quantile(m, *horizon, q, inner)
				mu.Lock()
				defer mu.Unlock()
				if err != nil && first == nil {
					first = err
				}
				rep.Quantiles[i] = lawQuantle{Q: q, Radius: r, Err: e}
			}()
		}
		wg.Wait()
		if first != nil {
			return first
		}
	}
	if *asJSON {
		enc := json.NewEncoder(stdout)
		enc.SetIndent("", "  ")
		return enc.Encode(rep)
	}
	printLaw(stdout, rep)
	return nil
}

func printLaw(w io.Writer, r lawReport) {
	what, sym := "maximal radius R*_T = max |X_v(T)|", "R"
	if r.OneSided {
		what, sym = "maximum M_T = max X_v(T) (one-sided)", "x"
	}
	fmt.Fprintf(w, "Exact law of the %s of branching Brownian motion\n", what)
	fmt.Fprintf(w, "model: d = %d, sigma = %g, beta = %g, children = %d; horizon T = %g\n", r.Dim, r.Sigma, r.Beta, r.Children, r.Horizon)
	fmt.Fprintf(w, "centring m_T = v T + (d-4)/(2 theta) log T = %.6f\n", r.Centring)
	fmt.Fprintf(w, "deterministic numerical solution; target error %g in probability (estimates by grid refinement)\n", r.Tolerance)
	if len(r.CDF) > 0 {
		fmt.Fprintf(w, "\n%14s  %16s  %10s  %12s\n", sym, "P(. <= "+sym+")", "± err", sym+" - m_T")
		for _, p := range r.CDF {
			fmt.Fprintf(w, "%14.6f  %16.10f  %10.2e  %12.6f\n", p.Radius, p.P, p.Err, p.Radius-r.Centring)
		}
	}
	if len(r.Quantiles) > 0 {
		fmt.Fprintf(w, "\n%8s  %14s  %10s  %12s\n", "q", "quantile", "± err", "minus m_T")
		for _, q := range r.Quantiles {
			fmt.Fprintf(w, "%8g  %14.6f  %10.2e  %12.6f\n", q.Q, q.Radius, q.Err, q.Radius-r.Centring)
		}
	}
}
