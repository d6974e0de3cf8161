package report

import (
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"

	"gonum.org/v1/gonum/stat/distuv"

	"bbmx/engine/law"
	"bbmx/results"
)

// Options tunes a report. The zero value is usable: every field has a fast default.
type Options struct {
	// Bootstrap is the number of bootstrap resamples for the intervals that use them
	// (the tail slope); zero means 200.
	Bootstrap int
	// Seed drives the bootstrap; the same seed gives the same report.
	Seed uint64
	// Level is the confidence level of every interval; zero means 0.95.
	Level float64
	// LawTolerance is the absolute error in probability asked of the exact law; zero
	// means 1e-5.
	LawTolerance float64
	// TailFraction is the share of the largest values used for the tail slope; zero
	// means 0.1.
	TailFraction float64
	// Progress, if not nil, receives one line per step.
	Progress io.Writer
}

func (o Options) withDefaults() (Options, error) {
	if o.Bootstrap == 0 {
		o.Bootstrap = 200
	}
	if o.Level == 0 {
		o.Level = 0.95
	}
	if o.LawTolerance == 0 {
		o.LawTolerance = 1e-5
	}
	if o.TailFraction == 0 {
		o.TailFraction = 0.1
	}
	switch {
	case o.Bootstrap < 10:
		return o, fmt.Errorf("bootstrap resamples must be at least 10, got %d", o.Bootstrap)
	case !(o.Level > 0.5 && o.Level < 1):
		return o, fmt.Errorf("confidence level must be in (0.5, 1), got %v", o.Level)
	case !(o.LawTolerance > 0 && o.LawTolerance <= 1e-2):
		return o, fmt.Errorf("law tolerance must be in (0, 0.01], got %v", o.LawTolerance)
	case !(o.TailFraction > 0 && o.TailFraction <= 0.5):
		return o, fmt.Errorf("tail fraction must be in (0, 0.5], got %v", o.TailFraction)
	}
	return o, nil
}

// z is the two-sided normal quantile of the level.
func (o Options) z() float64 { return distuv.UnitNormal.Quantile(0.5 + o.Level/2) }

func (o Options) logf(format string, a ...any) {
	if o.Progress != nil {
		fmt.Fprintf(o.Progress, format+"\n", a...)
	}
}

// Kinds of theory a row is compared with.
const (
	KindExact = "exact" // holds at every horizon: a disagreement is a bug or a false alarm
	KindLimit = "limit" // holds as T (and s) grow: a disagreement at short horizons is expected
)

// Verdicts.
const (
	Agrees   = "agrees"
	Differs  = "differs"
	NoTheory = "-"
)

// Row is one line of the theory-vs-measured table.
type Row struct {
	Group    string  // what the row is about, e.g. "d=2 T=4" or "d=2 centring"
	Quantity string  // what is measured
	Theory   string  // the theory as text ("" when there is none)
	Value    float64 // the theory as a number (NaN when it is not one)
	Kind     string  // KindExact, KindLimit or "" (no theory)
	Estimate float64
	Lo, Hi   float64 // interval at the report's level (NaN when none)
	P        float64 // p-value of a test (NaN when the row is not a test)
	Method   string  // how the estimate and its interval were obtained
	N        int     // observations used
	Verdict  string
}

// judge sets the verdict: a test agrees when p >= 1 - level, an estimate when the
// theory value lies in its interval.
func (r *Row) judge(level float64) {
	switch {
	case r.Kind == "":
		r.Verdict = NoTheory
	case !math.IsNaN(r.P):
		r.Verdict = Differs
		if r.P >= 1-level {
			r.Verdict = Agrees
		}
	case !math.IsNaN(r.Value) && !math.IsNaN(r.Lo):
		r.Verdict = Differs
		if r.Lo <= r.Value && r.Value <= r.Hi {
			r.Verdict = Agrees
		}
	default:
		r.Verdict = NoTheory
	}
}

// Figure is one plot written as PNG and SVG.
type Figure struct {
	Name    string // file stem; the files are Name.png and Name.svg
	Title   string
	Caption string
}

// Table is a named table written as CSV (and inside tables.json).
type Table struct {
	Name    string // file stem of the CSV
	Caption string
	Header  []string
	Rows    [][]string
}

// Report is what Write produced.
type Report struct {
	Dir     string // the report folder
	Sweep   string // SHA-256 of the store's sweep spec, in hex: the sweep's identity
	Rows    []Row
	Figures []Figure
	Tables  []Table
	Skipped []string // fits that could not be made, with the reason
	Cells   int      // cells read
	Level   float64
}

// HTMLPath is the path of the report page.
func (r *Report) HTMLPath() string { return filepath.Join(r.Dir, "report.html") }

// Write fits the store's cells and writes the report folder dir (created if missing;
// files of an earlier report there are overwritten).
func Write(st *results.Store, dir string, opt Options) (*Report, error) {
	if st == nil {
		return nil, fmt.Errorf("report: no store")
	}
	opt, err := opt.withDefaults()
	if err != nil {
		return nil, fmt.Errorf("report: %w", err)
	}
	if dir == "" {
		return nil, fmt.Errorf("report: no output folder given")
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, fmt.Errorf("report: %w", err)
	}
	cells, err := loadCells(st, opt)
	if err != nil {
		return nil, err
	}
	if len(cells) == 0 {
		return nil, fmt.Errorf("report: the store holds no cells with replicates")
	}
	b := &builder{opt: opt, dir: dir, laws: map[lawKey]*law.Table{}}
	_, sum, err := st.Spec()
	if err != nil {
		return nil, fmt.Errorf("report: %w", err)
	}
	b.rep = &Report{Dir: dir, Sweep: fmt.Sprintf("%x", sum), Cells: len(cells), Level: opt.Level}
	for _, c := range cells {
		opt.logf("fitting %s (%d replicates)", c.label, c.sk.N)
		if err := b.cell(c); err != nil {
			return nil, err
		}
	}
	if err := b.centring(cells); err != nil {
		return nil, err
	}
	for i := range b.rep.Rows {
		b.rep.Rows[i].judge(opt.Level)
	}
	opt.logf("writing %s", dir)
	if err := b.writePage(); err != nil {
		return nil, err
	}
	return b.rep, nil
}

// Headline returns the rows that have a theory as an aligned plain-text table for a
// terminal, followed by the path of report.html.
func (r *Report) Headline() string {
	var sb strings.Builder
	fmt.Fprintf(&sb, "Theory vs measured (%d cells; %s intervals; statistical estimates)\n", r.Cells, pct(r.Level))
	// The largest horizon of each model's dimension: its rows are the ones closest to the
	// limits, so they head the terminal; the page has every row.
	largest := map[int]float64{}
	parse := func(g string) (d int, t float64, ok bool) {
		_, err := fmt.Sscanf(g, "d=%d T=%g", &d, &t)
		return d, t, err == nil
	}
	for _, row := range r.Rows {
		if d, t, ok := parse(row.Group); ok && t > largest[d] {
			largest[d] = t
		}
	}
	counts := map[string][2]int{}
	rows := [][]string{{"group", "quantity", "theory", "estimate", "interval", "verdict"}}
	for _, row := range r.Rows {
		if row.Kind == "" {
			continue
		}
		c := counts[row.Kind]
		c[1]++
		if row.Verdict == Agrees {
			c[0]++
		}
		counts[row.Kind] = c
		d, t, ok := parse(row.Group)
		show := !ok || t == largest[d] || (row.Kind == KindExact && row.Verdict == Differs)
		if show {
			rows = append(rows, []string{row.Group, row.Quantity, row.theoryCell(), fmtNum(row.Estimate), row.intervalText(), row.Verdict})
		}
	}
	if c := counts[KindExact]; c[1] > 0 {
		fmt.Fprintf(&sb, "exact checks (hold at every T): %d of %d agree; at this level about %s differ by chance\n",
			c[0], c[1], pct(1-r.Level))
	}
	if c := counts[KindLimit]; c[1] > 0 {
		fmt.Fprintf(&sb, "limit comparisons (hold as T grows): %d of %d agree; short horizons are expected to differ\n", c[0], c[1])
	}
	sb.WriteString("Shown: fits across horizons, the largest horizon of each dimension, and exact checks that differ.\n")
	sb.WriteString(alignRows(rows))
	if n := len(r.Skipped); n > 0 {
		fmt.Fprintf(&sb, "%d fit(s) skipped; see the report.\n", n)
	}
	fmt.Fprintf(&sb, "Every row: %s\n", r.HTMLPath())
	return sb.String()
}

func pct(level float64) string { return strings.TrimSuffix(fmt.Sprintf("%.4g", 100*level), ".0") + "%" }

func (r Row) intervalText() string {
	switch {
	case !math.IsNaN(r.P):
		return "p = " + fmtP(r.P)
	case !math.IsNaN(r.Lo):
		return "[" + fmtNum(r.Lo) + ", " + fmtNum(r.Hi) + "]"
	}
	return "-"
}

func fmtNum(x float64) string {
	if math.IsNaN(x) {
		return "-"
	}
	a := math.Abs(x)
	if a != 0 && (a < 1e-3 || a >= 1e5) {
		return fmt.Sprintf("%.4g", x)
	}
	return fmt.Sprintf("%.4f", x)
}

func fmtP(p float64) string {
	if p < 1e-4 {
		return fmt.Sprintf("%.1e", p)
	}
	return fmt.Sprintf("%.4f", p)
}

// alignRows pads columns to a common width, two spaces apart.
func alignRows(rows [][]string) string {
	var w []int
	for _, r := range rows {
		for j, c := range r {
			if j >= len(w) {
				w = append(w, 0)
			}
			w[j] = max(w[j], len([]rune(c)))
		}
	}
	var sb strings.Builder
	for _, r := range rows {
		var line strings.Builder
		for j, c := range r {
			if j > 0 {
				line.WriteString("  ")
			}
			line.WriteString(c)
			if j < len(r)-1 {
				line.WriteString(strings.Repeat(" ", w[j]-len([]rune(c))))
			}
		}
		sb.WriteString(strings.TrimRight(line.String(), " "))
		sb.WriteByte('\n')
	}
	return sb.String()
}
