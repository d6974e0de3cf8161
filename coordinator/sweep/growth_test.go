package sweep

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"testing"

	"bbmx/engine"
)

func TestCheckGrowthAllows(t *testing.T) {
	old := mustParse(t, base, "old.toml")
	if err := old.CheckGrowth(old); err != nil {
		t.Fatalf("a sweep does not continue itself: %v", err)
	}
	grown := base
	for _, r := range [][2]string{
		{"dims = [1, 2, 3]", "dims = [1, 2, 3, 4]"},
		{"horizons = [4.0, 6.0, 8.0]", "horizons = [4.0, 6.0, 8.0, 10.0]"},
		{"replicates = 1000", "replicates = 5000"},
		{"replicates = 200", "replicates = 300"},
		{`name = "test"`, `name = "renamed"`},
		{"task_seconds = 60", "task_seconds = 600"},
		{"split_at = 0", "split_at = 2.5"},
	} {
		if !strings.Contains(grown, r[0]) {
			t.Fatalf("base has no %q", r[0])
		}
		grown = strings.Replace(grown, r[0], r[1], 1)
	}
	if err := mustParse(t, grown, "new.toml").CheckGrowth(old); err != nil {
		t.Fatalf("growth refused: %v", err)
	}
}

func TestCheckGrowthRefuses(t *testing.T) {
	old := mustParse(t, base, "old.toml")
	cases := []struct{ prefix, repl, want string }{
		{"seed", "seed = 8", "the store was made with seed 7; this sweep has seed 8: a different seed is a different sweep"},
		{"sigma", "sigma = 2", "model.sigma = 1; this sweep has 2"},
		{"beta", "beta = 0.5", "model.beta"},
		{"children", "children = 3", "model.children"},
		{"top_k", "top_k = 16", "observe.top_k = 32; this sweep has 16"},
		{"window", "window = 6", "observe.window"},
		{"bin_width", "bin_width = 0.1", "observe.bin_width"},
		{"checkpoints", "checkpoints = [1.0, 2.0, 3.0]", "observe.checkpoints"},
		{"directions", "directions = 8", "observe.directions"},
		{"lambda", "lambda = 0.5", "observe.lambda"},
		{"keep_records", "keep_records = false", "keep_records = true; this sweep has false"},
		{"dims", "dims = [2, 3]", "dimension 1, which this sweep drops"},
		{"horizons", "horizons = [4.0, 8.0]", "horizon 6, which this sweep drops"},
		{"replicates", "replicates = 999", "cell d1-T4 has 1000 replicates in the store's sweep but 999 here"},
	}
	for _, c := range cases {
		s := mustParse(t, with(t, "", c.prefix, c.repl), "new.toml")
		err := s.CheckGrowth(old)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: got %v, want %q", c.repl, err, c.want)
		}
	}
	// Lowering an override below what the store's sweep asked for.
	s := mustParse(t, with(t, "[[grid", "replicates", "replicates = 100"), "new.toml")
	if err := s.CheckGrowth(old); err == nil || !strings.Contains(err.Error(), "cell d3-T8 has 200") {
		t.Errorf("lowered override: %v", err)
	}
}

// expectedNodes is the mean number of tree nodes of one replicate to horizon t: with
// B branchings, nodes = 1 + k B and N_t = 1 + (k-1) B, so E[nodes] = 1 + k (E[N_t] - 1)/(k-1)
// with E[N_t] = e^{beta (k-1) t} (derived; the mean population is SPEC §2's).
func expectedNodes(beta float64, k int, t float64) float64 {
	kf := float64(k)
	return 1 + kf*(math.Exp(beta*(kf-1)*t)-1)/(kf-1)
}

func TestEstimate(t *testing.T) {
	s := mustParse(t, base, "e.toml")
	// base: d = 1, 2, 3 × T = 4, 6, 8 at 1000 replicates, except d3-T8 at 200 (derived
	// by hand from the file).
	want := 3*1000*(expectedNodes(1, 2, 4)+expectedNodes(1, 2, 6)) + (2*1000+200)*expectedNodes(1, 2, 8)
	e := s.Estimate()
	if math.Abs(e.Nodes-want) > 1e-9*want {
		t.Fatalf("nodes %v, want %v", e.Nodes, want)
	}
	var cpu float64
	for _, c := range s.Cells() {
		cpu += float64(c.Replicates) * engine.NominalReplicateSeconds(c.Cell)
	}
	if math.Abs(e.CPUSeconds-cpu) > 1e-12*cpu || e.CPUSeconds < e.Nodes*engine.NominalNodeSeconds || e.Absurd {
		t.Fatalf("estimate %+v, want %v CPU-seconds", e, cpu)
	}
	// Ternary branching at rate 0.5: g = 1 (derived as above).
	s3 := mustParse(t, "seed = 1\n[model]\nbeta = 0.5\nchildren = 3\n[grid]\ndims = [2]\nhorizons = [5]\nreplicates = 7\n", "k3.toml")
	if got, want := s3.Estimate().Nodes, 7*expectedNodes(0.5, 3, 5); math.Abs(got-want) > 1e-9*want {
		t.Fatalf("k = 3: nodes %v, want %v", got, want)
	}
	// In d = 10 a node costs 85 + 6 × 13 = 163 ns (the general walk: one normal per
	// coordinate; engine.NodeSeconds's rule), against 60 ns in d <= 3.
	s10 := mustParse(t, "seed = 1\n[grid]\ndims = [3, 10]\nhorizons = [6]\nreplicates = 10\n", "d10.toml")
	for _, c := range s10.Cells() {
		perNode := map[int]float64{3: 60e-9, 10: 163e-9}[c.Cell.Model.Dim]
		want := expectedNodes(1, 2, 6)*perNode + 5e-6 // no checkpoints
		if got := engine.NominalReplicateSeconds(c.Cell); math.Abs(got-want) > 1e-9*want {
			t.Fatalf("%s: %v CPU-seconds per replicate, want %v", c.ID, got, want)
		}
	}
	// A checkpoint at s = 7 in a d = 3, T = 8 cell is crossed by e^7 particles on average,
	// each at 0.5 µs + 16 directions × (50 + 3 × 5) ns = 1.54 µs (engine.CrossingSeconds's
	// rule): about 1.7 ms, five times the walk's 2(e^8) - 1 nodes at 60 ns.
	sc := mustParse(t, "seed = 1\n[grid]\ndims = [3]\nhorizons = [8]\nreplicates = 10\n[observe]\ncheckpoints = [7]\n", "cp.toml")
	cc := sc.Cells()[0].Cell
	walk := expectedNodes(1, 2, 8)*60e-9 + 5e-6
	wantCP := walk + 2e-6 + math.Exp(7)*1.54e-6
	if got := engine.NominalReplicateSeconds(cc); math.Abs(got-wantCP) > 1e-9*wantCP || got < 5*walk {
		t.Fatalf("with a checkpoint at 7: %v CPU-seconds per replicate, want %v", got, wantCP)
	}
	// A horizon of 40 is about 4.7e17 nodes a replicate: absurd even once (more
	// replicates are refused by Parse for their task count, TestTooManyTasks).
	big := mustParse(t, "seed = 1\n[grid]\ndims = [1]\nhorizons = [40]\nreplicates = 1\n", "big.toml")
	if !big.Estimate().Absurd {
		t.Fatal("T = 40 is not absurd")
	}
}

// A checkpoint at the horizon costs more than the walk: e^24 crossings at 1.46 µs
// (d = 2, 16 directions) against 2e^24 nodes at 60 ns, about 12 times (derived from
// engine.CrossingSeconds's rule). 15,000 replicates are 7.9e14 nodes, under the node
// limit, but about 174,000 CPU-hours, ten times the limit's 16,700: absurd.
func TestEstimateAbsurdByCheckpointCost(t *testing.T) {
	s := mustParse(t, "seed = 1\ntask_seconds = 3600\n[grid]\ndims = [2]\nhorizons = [24]\nreplicates = 15000\n[observe]\ncheckpoints = [24]\n", "cp.toml")
	e := s.Estimate()
	if e.Nodes > engine.AbsurdSweepNodes || e.CPUSeconds/3600 < 150000 {
		t.Fatalf("scenario drifted: %+v", e)
	}
	if !e.Absurd {
		t.Fatalf("%.0f CPU-hours is not absurd: %+v", e.CPUSeconds/3600, e)
	}
	// Without the checkpoint the same grid is under both limits.
	if e := mustParse(t, "seed = 1\ntask_seconds = 3600\n[grid]\ndims = [2]\nhorizons = [24]\nreplicates = 15000\n", "w.toml").Estimate(); e.Absurd {
		t.Fatalf("without checkpoints: %+v", e)
	}
}

func cellOf(t *testing.T, s *Sweep, id string) CellSpec {
	t.Helper()
	for _, c := range s.Cells() {
		if c.ID == id {
			return c
		}
	}
	t.Fatalf("no cell %s", id)
	return CellSpec{}
}

func TestSizeWholeReplicates(t *testing.T) {
	s := mustParse(t, "seed = 1\n[grid]\ndims = [2]\nhorizons = [4, 14]\nreplicates = 1000\n", "s.toml")
	for _, c := range []struct {
		id string
		t  float64
	}{{"d2-T4", 4}, {"d2-T14", 14}} {
		cs := cellOf(t, s, c.id)
		cost := expectedNodes(1, 2, c.t)*engine.NodeSeconds(2) + 5e-6 // no checkpoints
		per := uint64(math.Floor(60 / cost))                          // derived from the rule in Size's comment
		per = min(per, uint64(engine.MaxTaskResultBytes/engine.RecordBytes(cs.Cell)))
		z := s.Size(cs)
		if z.Parts != 1 || z.SplitAt != 0 || z.PerTask != per {
			t.Fatalf("%s: %+v, want %d replicates per task", c.id, z, per)
		}
		if n, want := s.TaskCount(cs), (1000+per-1)/per; n != want {
			t.Fatalf("%s: %d tasks, want %d", c.id, n, want)
		}
	}
	// T = 14: a replicate is about (2e^14 - 1) × 60 ns + 5 µs ≈ 0.1443 s, so 415 per task and
	// 3 tasks for 1000 (derived).
	if z := s.Size(cellOf(t, s, "d2-T14")); z.PerTask != 415 || s.TaskCount(cellOf(t, s, "d2-T14")) != 3 {
		t.Fatalf("d2-T14: %+v", z)
	}
}

func TestSizeSplitReplicates(t *testing.T) {
	s := mustParse(t, "seed = 1\n[grid]\ndims = [3]\nhorizons = [22]\nreplicates = 10\n", "s.toml")
	cs := cellOf(t, s, "d3-T22")
	// One replicate is about (2e^22 - 1) × 60 ns ≈ 430 s, so 8 parts of a minute
	// (derived), split where e^{s0} = 8 × 8.
	z := s.Size(cs)
	if z.Parts != 8 || z.PerTask != 1 {
		t.Fatalf("%+v", z)
	}
	if math.Exp(z.SplitAt) < 64 || math.Abs(z.SplitAt-math.Log(64)) > 1e-12 {
		t.Fatalf("split at %v, want log 64 = %v", z.SplitAt, math.Log(64))
	}
	if n := s.TaskCount(cs); n != 80 {
		t.Fatalf("%d tasks, want 10 × 8", n)
	}
	// A split time in the file is used as given.
	s.SplitAt = 2.5
	if z := s.Size(cs); z.SplitAt != 2.5 || z.Parts != 8 {
		t.Fatalf("split_at 2.5: %+v", z)
	}
	// The automatic split time is at most T/2 (reachable only below the file's bound on
	// task_seconds, so the sweep is altered by hand here).
	s.SplitAt, s.TaskSeconds = 0, 1e-9
	cs = cellOf(t, mustParse(t, "seed = 1\n[grid]\ndims = [1]\nhorizons = [4]\nreplicates = 1\n", "h.toml"), "d1-T4")
	if z := s.Size(cs); z.SplitAt != 2 || z.Parts <= 1 {
		t.Fatalf("T/2 cap: %+v", z)
	}
	// Parts are capped.
	s.TaskSeconds = 1
	cs = cellOf(t, mustParse(t, "seed = 1\n[grid]\ndims = [1]\nhorizons = [40]\nreplicates = 1\n", "c.toml"), "d1-T40")
	if z := s.Size(cs); z.Parts != MaxParts {
		t.Fatalf("parts cap: %+v", z)
	}
}

// A cheap cell of large records: d = 64, top_k = 4096 is about 2.1 MB a record, so 3
// replicates a task (8 MiB), and a billion replicates are 333,333,334 tasks, about 2 CPU-
// hours but far more tasks than the coordinator can hold. Refused by Parse, naming the
// replicate count that asks for them, the default's or an override's.
func TestTooManyTasks(t *testing.T) {
	const grid = "seed = 1\n[grid]\ndims = [2, 64]\nhorizons = [0.01]\nreplicates = %d\n[observe]\ntop_k = 4096\n"
	for _, c := range []struct {
		name, file string
		line       int
		key        string
	}{
		{"default", fmt.Sprintf(grid, 1_000_000_000), 5, "grid.replicates"},
		{"override", fmt.Sprintf(grid, 1000) + "[[grid.override]]\ndim = 2\nhorizon = 0.01\nreplicates = 5\n[[grid.override]]\ndim = 64\nhorizon = 0.01\nreplicates = 1_000_000_000\n", 15, "grid.override.replicates"},
	} {
		_, err := Parse([]byte(c.file), "many.toml")
		var e *Error
		if !errors.As(err, &e) || e.Line != c.line || e.Key != c.key || !strings.Contains(e.Msg, "cell d64-T0.01 alone into 333333334") || !strings.Contains(e.Msg, "CPU-hours") || strings.Contains(err.Error(), "\n") {
			t.Fatalf("%s: got %v, want line %d key %s naming cell d64-T0.01 alone into 333333334 tasks", c.name, err, c.line, c.key)
		}
	}
	// The same grid at a million replicates is 333,334 tasks: accepted.
	if _, err := Parse([]byte(fmt.Sprintf(grid, 1_000_000)), "ok.toml"); err != nil {
		t.Fatal(err)
	}
}

// TestSplitTooLate: a split_at so late that the tree above it costs more than a quarter
// of a task is refused with the latest split_at that is not (every part walks that tree,
// and planning counts its subtrees replicate by replicate: a split at 19 of 20 ran for
// hours). The latest split_at it names is accepted, and so is any split_at for a cell
// small enough not to be split. Costs derived from the cost model: a d = 2 node is 60 ns,
// a binary replicate to time s has 2 e^s - 1 nodes, so a quarter of a 1-second task
// allows s up to log(0.25 / 120e-9) = 14.55.
func TestSplitTooLate(t *testing.T) {
	const file = "seed = 1\ntask_seconds = 1\nsplit_at = %v\n[grid]\ndims = [2]\nhorizons = [%v]\nreplicates = 4\n"
	_, err := Parse([]byte(fmt.Sprintf(file, 19, 20)), "late.toml")
	var e *Error
	if !errors.As(err, &e) || e.Line != 3 || e.Key != "split_at" || !strings.Contains(e.Msg, "choose split_at at most 14.5") || strings.Contains(err.Error(), "\n") {
		t.Fatalf("got %v, want line 3 key split_at naming 14.5", err)
	}
	for _, ok := range []string{fmt.Sprintf(file, 14.5, 20), fmt.Sprintf(file, 4, 5)} {
		if _, err := Parse([]byte(ok), "ok.toml"); err != nil {
			t.Errorf("%q: %v", ok, err)
		}
	}
}
