package sweep

import (
	"errors"
	"fmt"
	"strings"
	"testing"
)

// base is a valid sweep file; the error cases below change one thing in it. Line
// numbers in the cases count from the first line of the file.
const base = `name = "test"
seed = 7
task_seconds = 60
keep_records = true
split_at = 0

[model]
sigma = 1.0
beta = 1.0
children = 2

[grid]
dims = [1, 2, 3]
horizons = [4.0, 6.0, 8.0]
replicates = 1000

[[grid.override]]
dim = 3
horizon = 8.0
replicates = 200

[observe]
top_k = 32
window = 8.0
bin_width = 0.05
checkpoints = [1.0, 2.0, 4.0]
directions = 16
lambda = 0.0
`

// with replaces the line of base that starts with prefix (the first such line after the
// line starting with after, when after is not empty) by repl.
func with(t testing.TB, after, prefix, repl string) string {
	t.Helper()
	lines := strings.Split(base, "\n")
	armed := after == ""
	for i, l := range lines {
		if !armed {
			armed = strings.HasPrefix(l, after)
			continue
		}
		if strings.HasPrefix(l, prefix) {
			lines[i] = repl
			return strings.Join(lines, "\n")
		}
	}
	t.Fatalf("no line %q after %q in base", prefix, after)
	return ""
}

func TestBaseParses(t *testing.T) {
	s, err := Parse([]byte(base), "base.toml")
	if err != nil {
		t.Fatal(err)
	}
	if s.Seed != 7 || len(s.Cells()) != 9 || len(s.Overrides) != 1 || s.Overrides[0].Replicates != 200 {
		t.Fatalf("parsed %+v", s)
	}
}

func TestParseErrors(t *testing.T) {
	cases := []struct {
		name string
		file string
		line int
		key  string // "" for syntax errors
		msg  string
	}{
		// Unknown keys, top level and nested, with their line.
		{"unknown top-level key", with(t, "", "keep_records", "keep_record = true"), 4, "keep_record", `unknown key "keep_record"`},
		{"unknown model key", with(t, "", "beta", "rate = 1.0"), 9, "model.rate", `unknown key "rate"`},
		{"unknown grid key", with(t, "[grid]", "replicates", "replicate = 10"), 15, "grid.replicate", `unknown key "replicate"`},
		{"unknown override key", with(t, "[[grid", "replicates", "reps = 200"), 20, "grid.override.reps", `unknown key "reps"`},
		{"unknown observe key", with(t, "", "lambda", "lamda = 0.5"), 28, "observe.lamda", `unknown key "lamda"`},
		{"unknown table", base + "\n[extra]\nx = 1\n", 30, "extra", `unknown key "extra"`},
		// Wrong types.
		{"seed as string", with(t, "", "seed", `seed = "7"`), 2, "seed", "must be an integer"},
		{"seed as float", with(t, "", "seed", `seed = 7.5`), 2, "seed", "must be an integer, got float 7.5"},
		{"name as number", with(t, "", "name", `name = 3`), 1, "name", "must be a string"},
		{"task_seconds as string", with(t, "", "task_seconds", `task_seconds = "1m"`), 3, "task_seconds", "must be a number"},
		{"keep_records as string", with(t, "", "keep_records", `keep_records = "yes"`), 4, "keep_records", "must be true or false"},
		{"split_at as bool", with(t, "", "split_at", `split_at = true`), 5, "split_at", "must be a number"},
		{"model as value", strings.Replace(with(t, "", "[model]", "model = 1"), "sigma = 1.0\nbeta = 1.0\nchildren = 2\n", "", 1), 7, "model", "must be a table"},
		{"sigma as string", with(t, "", "sigma", `sigma = "one"`), 8, "model.sigma", "must be a number"},
		{"children as float", with(t, "", "children", `children = 2.0`), 10, "model.children", "must be an integer"},
		{"dims as integer", with(t, "", "dims", `dims = 2`), 13, "grid.dims", "must be an array"},
		{"dims element float", with(t, "", "dims", `dims = [1, 2.5]`), 13, "grid.dims", "must be an integer, got float 2.5"},
		{"horizons element string", with(t, "", "horizons", `horizons = [4, "6"]`), 14, "grid.horizons", "must be a number"},
		{"replicates as float", with(t, "[grid]", "replicates", `replicates = 1e3`), 15, "grid.replicates", "must be an integer"},
		{"override horizon string", with(t, "[[grid", "horizon", `horizon = "8"`), 19, "grid.override.horizon", "must be a number"},
		{"top_k as float", with(t, "", "top_k", `top_k = 32.0`), 23, "observe.top_k", "must be an integer"},
		{"checkpoints as number", with(t, "", "checkpoints", `checkpoints = 1.0`), 26, "observe.checkpoints", "must be an array"},
		{"date where a number goes", with(t, "", "window", `window = 2024-01-01`), 24, "observe.window", "must be a number, got a date"},
		// Bad values, one per key.
		{"negative seed", with(t, "", "seed", `seed = -1`), 2, "seed", "non-negative"},
		{"long name", with(t, "", "name", `name = "`+strings.Repeat("x", 300)+`"`), 1, "name", "at most 200"},
		{"name with newline", with(t, "", "name", `name = "a\nb"`), 1, "name", "one line"},
		{"task_seconds zero", with(t, "", "task_seconds", `task_seconds = 0`), 3, "task_seconds", "between 1 and 86400"},
		{"task_seconds too big", with(t, "", "task_seconds", `task_seconds = 1e6`), 3, "task_seconds", "between 1 and 86400"},
		{"task_seconds nan", with(t, "", "task_seconds", `task_seconds = nan`), 3, "task_seconds", "finite"},
		{"split_at negative", with(t, "", "split_at", `split_at = -1`), 5, "split_at", "[0, 4)"},
		{"split_at at min horizon", with(t, "", "split_at", `split_at = 4`), 5, "split_at", "[0, 4)"},
		{"sigma zero", with(t, "", "sigma", `sigma = 0`), 8, "model.sigma", "sigma must be a positive"},
		{"sigma infinite", with(t, "", "sigma", `sigma = inf`), 8, "model.sigma", "finite"},
		{"beta negative", with(t, "", "beta", `beta = -1`), 9, "model.beta", "beta must be"},
		{"children one", with(t, "", "children", `children = 1`), 10, "model.children", "at least 2"},
		{"children huge", with(t, "", "children", `children = 9223372036854775807`), 10, "model.children", "larger than the supported 64"},
		{"dimension zero", with(t, "", "dims", `dims = [0, 1]`), 13, "grid.dims", "at least 1"},
		{"dimension 65", with(t, "", "dims", `dims = [1, 65]`), 13, "grid.dims", "supported 64"},
		{"empty dims", with(t, "", "dims", `dims = []`), 13, "grid.dims", "at least one dimension"},
		{"duplicate dims", with(t, "", "dims", `dims = [1, 2, 1]`), 13, "grid.dims", "dimension 1 is listed twice"},
		{"duplicate horizons", with(t, "", "horizons", `horizons = [4, 6, 8, 4.0]`), 14, "grid.horizons", "horizon 4 is listed twice"},
		{"empty horizons", with(t, "", "horizons", `horizons = []`), 14, "grid.horizons", "at least one horizon"},
		{"horizon zero", with(t, "", "horizons", `horizons = [0, 4, 6, 8]`), 14, "grid.horizons", "positive finite"},
		{"horizon infinite", with(t, "", "horizons", `horizons = [4, 6, 8, inf]`), 14, "grid.horizons", "finite"},
		{"replicates zero", with(t, "[grid]", "replicates", `replicates = 0`), 15, "grid.replicates", "between 1 and 1000000000"},
		{"replicates too many", with(t, "[grid]", "replicates", `replicates = 1_000_000_001`), 15, "grid.replicates", "between 1 and 1000000000"},
		{"override replicates zero", with(t, "[[grid", "replicates", `replicates = 0`), 20, "grid.override.replicates", "between 1"},
		{"top_k zero", with(t, "", "top_k", `top_k = 0`), 23, "observe.top_k", "top-K must be between 1 and 4096"},
		{"window negative", with(t, "", "window", `window = -8`), 24, "observe.window", "window must be positive"},
		{"bin width zero", with(t, "", "bin_width", `bin_width = 0`), 25, "observe.bin_width", "bin width must be"},
		{"too many bins", with(t, "", "bin_width", `bin_width = 0.0001`), 25, "observe.bin_width", "more than 65536 bins"},
		{"window too wide for the default bin", with(t, "", "window", `window = 1e6`), 24, "observe.window", "histogram of window 1e+06 and bin 0.05 has more than 65536 bins"},
		{"window huge", with(t, "", "window", `window = 1e308`), 24, "observe.window", "histogram of window 1e+308 and bin 0.05 has more than 65536 bins"},
		{"checkpoint negative", with(t, "", "checkpoints", `checkpoints = [-1, 2]`), 26, "observe.checkpoints", "positive finite"},
		{"duplicate checkpoints", with(t, "", "checkpoints", `checkpoints = [1, 2, 1.0]`), 26, "observe.checkpoints", "checkpoint 1 is listed twice"},
		{"directions zero", with(t, "", "directions", `directions = 0`), 27, "observe.directions", "between 1 and 4096"},
		{"lambda negative", with(t, "", "lambda", `lambda = -0.5`), 28, "observe.lambda", "non-negative"},
		// Missing required keys.
		{"missing seed", with(t, "", "seed", ``), 0, "seed", "is required"},
		{"missing dims", with(t, "", "dims", ``), 12, "grid.dims", "is required"},
		{"missing horizons", with(t, "", "horizons", ``), 12, "grid.horizons", "is required"},
		{"missing replicates", with(t, "[grid]", "replicates", ``), 12, "grid.replicates", "is required"},
		{"missing override horizon", with(t, "[[grid", "horizon", ``), 17, "grid.override.horizon", "is required"},
		{"missing grid", strings.Replace(base, "[grid]\ndims = [1, 2, 3]\nhorizons = [4.0, 6.0, 8.0]\nreplicates = 1000\n\n[[grid.override]]\ndim = 3\nhorizon = 8.0\nreplicates = 200\n", "", 1), 0, "grid", "is required"},
		// Overrides outside the grid, twice for one cell.
		{"override dim outside", with(t, "[[grid", "dim", `dim = 4`), 18, "grid.override.dim", "names cell d4-T8, but dimension 4 is not in grid.dims"},
		{"override horizon outside", with(t, "[[grid", "horizon", `horizon = 7`), 19, "grid.override.horizon", "horizon 7 is not in grid.horizons"},
		{"override twice", base + "\n[[grid.override]]\ndim = 3\nhorizon = 8\nreplicates = 5\n", 30, "grid.override", "cell d3-T8 is overridden twice"},
		// Too many cells.
		{"too many cells", with(t, "", "horizons", "horizons = ["+seq(400)+"]"), 12, "grid", "3 dims × 400 horizons = 1200 cells; a sweep has at most 1024"},
		// Syntax errors carry the parser's line.
		{"syntax: missing value", with(t, "", "beta", "beta = "), 9, "", "TOML syntax"},
		{"syntax: unclosed array", with(t, "", "horizons", "horizons = [4, 6"), 15, "", "TOML syntax"},
		{"syntax: duplicate key", with(t, "", "beta", "sigma = 2.0"), 9, "", "TOML syntax"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := Parse([]byte(c.file), "sw.toml")
			if err == nil {
				t.Fatalf("accepted:\n%s", c.file)
			}
			var e *Error
			if !errors.As(err, &e) {
				t.Fatalf("error %v is a %T, not *Error", err, err)
			}
			if e.File != "sw.toml" || e.Line != c.line || e.Key != c.key || !strings.Contains(e.Msg, c.msg) {
				t.Fatalf("got %q (line %d key %q), want line %d key %q message containing %q", err, e.Line, e.Key, c.line, c.key, c.msg)
			}
			prefix := fmt.Sprintf("sw.toml:%d: ", c.line)
			if c.line == 0 {
				prefix = "sw.toml: "
			}
			if c.key != "" {
				prefix += "key " + c.key + ": "
			}
			if !strings.HasPrefix(err.Error(), prefix) {
				t.Fatalf("%q does not start with %q", err, prefix)
			}
		})
	}
}

// seq lists n distinct horizons 1..n.
func seq(n int) string {
	parts := make([]string, n)
	for i := range parts {
		parts[i] = fmt.Sprint(i + 1)
	}
	return strings.Join(parts, ", ")
}

// Keys are found on their own line in layouts the scanner must understand: dotted keys,
// inline tables across lines, arrays across lines with comments and strings holding
// '#', '=' and brackets, and inline arrays of tables.
func TestErrorLinesInOtherLayouts(t *testing.T) {
	cases := []struct {
		name, file string
		line       int
		key        string
	}{
		{"dotted keys", "seed = 1\ngrid.dims = [1]\ngrid.horizons = [2]\ngrid.replicates = 3\nmodel.sigma = -1\n", 5, "model.sigma"},
		{"inline table across lines", "seed = 1\nname = \"a # [b] = c\"\nmodel = {\n  sigma = 1,\n  beta = -2,\n}\n[grid]\ndims = [1]\nhorizons = [2]\nreplicates = 3\n", 5, "model.beta"},
		{"array element on its own line", "seed = 1\n[grid]\ndims = [\n  1,  # one\n  2,\n  99, # too big\n]\nhorizons = [2]\nreplicates = 3\n", 6, "grid.dims"},
		{"multi-line string before the key", "seed = 1\nname = '''\nx = 1\n[grid]\n'''\n[grid]\ndims = [1]\nhorizons = [2]\nreplicates = 3\nbogus = 1\n", 10, "grid.bogus"},
		{"inline array of tables", "seed = 1\n[grid]\ndims = [1]\nhorizons = [2]\nreplicates = 3\noverride = [\n  {dim = 1, horizon = 2, replicates = 4},\n  {dim = 5, horizon = 2, replicates = 4},\n]\n", 8, "grid.override.dim"},
		{"second of three overrides", "seed = 1\n[grid]\ndims = [1, 2]\nhorizons = [2]\nreplicates = 3\n[[grid.override]]\ndim = 1\nhorizon = 2\nreplicates = 4\n[[grid.override]]\ndim = 2\nhorizon = 2\nreplicates = -4\n[[grid.override]]\ndim = 3\nhorizon = 2\nreplicates = 4\n", 13, "grid.override.replicates"},
		{"quoted key", "seed = 1\n\"odd key\" = 2\n[grid]\ndims = [1]\nhorizons = [2]\nreplicates = 3\n", 2, `"odd key"`},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := Parse([]byte(c.file), "f.toml")
			var e *Error
			if !errors.As(err, &e) || e.Line != c.line || e.Key != c.key {
				t.Fatalf("got %v, want line %d key %s", err, c.line, c.key)
			}
		})
	}
}

func TestDefaultsAndIntegersAsFloats(t *testing.T) {
	s, err := Parse([]byte("seed = 3\n[grid]\ndims = [2]\nhorizons = [4, 6]\nreplicates = 10\n"), "min.toml")
	if err != nil {
		t.Fatal(err)
	}
	if s.Sigma != 1 || s.Beta != 1 || s.Children != 2 || s.TaskSeconds != 60 || !s.KeepRecords || s.SplitAt != 0 {
		t.Fatalf("defaults: %+v", s)
	}
	o := s.Observe
	// lambda = theta/2 = sqrt2/2 in the standard model (SPEC §2: v = sqrt 2, theta = v/sigma^2; derived).
	if o.TopK != 32 || o.Window != 8 || o.BinWidth != 0.05 || o.Directions != 16 || o.Lambda != 0.7071067811865476 || len(o.Checkpoints) != 0 {
		t.Fatalf("observe defaults: %+v", o)
	}
	if s.Horizons[0] != 4 || s.Horizons[1] != 6 {
		t.Fatalf("horizons %v", s.Horizons)
	}
}

func TestCells(t *testing.T) {
	s, err := Parse([]byte(with(t, "", "dims", "dims = [3, 1, 2]")), "c.toml")
	if err != nil {
		t.Fatal(err)
	}
	cells := s.Cells()
	var ids []string
	for _, c := range cells {
		ids = append(ids, c.ID)
		if err := c.Cell.Validate(); err != nil {
			t.Fatalf("%s: %v", c.ID, err)
		}
	}
	want := "d1-T4 d1-T6 d1-T8 d2-T4 d2-T6 d2-T8 d3-T4 d3-T6 d3-T8"
	if got := strings.Join(ids, " "); got != want {
		t.Fatalf("cells %s, want %s", got, want)
	}
	for _, c := range cells {
		if c.ID == "d3-T8" && c.Replicates != 200 || c.ID != "d3-T8" && c.Replicates != 1000 {
			t.Fatalf("%s has %d replicates", c.ID, c.Replicates)
		}
		for _, cp := range c.Cell.Observe.Checkpoints {
			if cp > c.Cell.Horizon {
				t.Fatalf("%s keeps checkpoint %v", c.ID, cp)
			}
		}
	}
	if n := len(cells[0].Cell.Observe.Checkpoints); n != 3 { // T = 4 keeps 1, 2, 4
		t.Fatalf("d1-T4 keeps %d checkpoints", n)
	}
	if d := cells[0].Cell.NumDirections(); d != 2 { // d = 1: the two directions ±1
		t.Fatalf("d = 1 has %d directions", d)
	}
	if d := cells[3].Cell.Observe.Directions; d != 16 {
		t.Fatalf("d = 2 has %d directions", d)
	}
}

func TestLoad(t *testing.T) {
	if _, err := Load("does-not-exist.toml"); err == nil {
		t.Fatal("missing file accepted")
	}
	big := base + "# " + strings.Repeat("x", MaxFileBytes) + "\n"
	if _, err := Parse([]byte(big), "big.toml"); err == nil || !strings.Contains(err.Error(), "larger than") {
		t.Fatalf("oversized file: %v", err)
	}
}
