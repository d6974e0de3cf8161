package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func writeSweep(t *testing.T, body string) string {
	t.Helper()
	p := filepath.Join(t.TempDir(), "sw.toml")
	if err := os.WriteFile(p, []byte(body), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

func TestPlanQuick(t *testing.T) {
	code, out, errs := runCLI(t, "plan", "../../examples/quick.toml")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	for _, want := range []string{"marrowfield-warmup", "d1-T3", "d2-T5", "total: 6 cells", "estimates from the cost model"} {
		if !strings.Contains(out, want) {
			t.Errorf("plan output lacks %q:\n%s", want, out)
		}
	}
}

func TestPlanJSON(t *testing.T) {
	code, out, errs := runCLI(t, "plan", "--json", "--cores", "50", "../../examples/cluster.toml")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var p struct {
		Hash  string `json:"hash"`
		Tasks uint64 `json:"tasks"`
		Cells []struct {
			ID          string  `json:"id"`
			Replicates  uint64  `json:"replicates"`
			Tasks       uint64  `json:"tasks"`
			RepsPerTask uint64  `json:"replicates_per_task"`
			Parts       int     `json:"parts_per_replicate"`
			SplitAt     float64 `json:"split_at"`
			CPUHours    float64 `json:"cpu_hours"`
		} `json:"cells"`
		CPUHours  float64 `json:"cpu_hours"`
		WallHours float64 `json:"wall_hours"`
		Cores     int     `json:"cores"`
		Absurd    bool    `json:"absurd"`
	}
	if err := json.Unmarshal([]byte(out), &p); err != nil {
		t.Fatalf("not one JSON object: %v\n%s", err, out)
	}
	if len(p.Hash) != 64 || len(p.Cells) != 28 || p.Absurd || p.Cores != 50 {
		t.Fatalf("plan %+v", p)
	}
	var tasks uint64
	var hours float64
	split := false
	for _, c := range p.Cells {
		tasks += c.Tasks
		hours += c.CPUHours
		if c.Parts > 1 {
			split = true
			if c.Tasks != c.Replicates*uint64(c.Parts) || c.SplitAt <= 0 || c.RepsPerTask != 0 {
				t.Errorf("split cell %+v", c)
			}
		} else if want := (c.Replicates + c.RepsPerTask - 1) / c.RepsPerTask; c.Tasks != want {
			t.Errorf("cell %s: %d tasks, want %d", c.ID, c.Tasks, want)
		}
	}
	if !split || tasks != p.Tasks || math.Abs(hours-p.CPUHours) > 1e-9*p.CPUHours || math.Abs(p.WallHours*50-p.CPUHours) > 1e-9*p.CPUHours {
		t.Fatalf("totals disagree with the rows: tasks %d vs %d, hours %v vs %v", tasks, p.Tasks, hours, p.CPUHours)
	}
}

func TestPlanBadFile(t *testing.T) {
	path := writeSweep(t, "seed = 1\n[grid]\ndims = [1, 1]\nhorizons = [2]\nreplicates = 3\n")
	code, _, errs := runCLI(t, "plan", path)
	if code != 2 || !strings.Contains(errs, path+":3: key grid.dims: dimension 1 is listed twice") {
		t.Fatalf("exit %d: %s", code, errs)
	}
	if n := strings.Count(strings.TrimSpace(errs), "\n"); n != 0 {
		t.Fatalf("error is not one line: %q", errs)
	}
	if code, _, errs := runCLI(t, "plan", writeSweep(t, "seed = \n")); code != 2 || !strings.Contains(errs, ":1: TOML syntax") {
		t.Fatalf("syntax error: exit %d: %s", code, errs)
	}
	if code, _, _ := runCLI(t, "plan"); code != 2 {
		t.Fatalf("no file: exit %d", code)
	}
	if code, _, _ := runCLI(t, "plan", "a.toml", "b.toml"); code != 2 {
		t.Fatalf("two files: exit %d", code)
	}
	if code, _, _ := runCLI(t, "plan", "--help"); code != 0 {
		t.Fatalf("--help: exit %d", code)
	}
}

func TestPlanAbsurd(t *testing.T) {
	// T = 40 is about 4.7e17 nodes per replicate: far above the limit.
	path := writeSweep(t, "seed = 1\n[grid]\ndims = [2]\nhorizons = [40]\nreplicates = 100\n")
	code, out, errs := runCLI(t, "plan", path)
	if code != 2 || !strings.Contains(errs, "refusing") || !strings.Contains(errs, "CPU-hours") || out != "" {
		t.Fatalf("absurd sweep: exit %d: %s", code, errs)
	}
	if n := strings.Count(strings.TrimSpace(errs), "\n"); n != 0 {
		t.Fatalf("refusal is not one line: %q", errs)
	}
	code, out, errs = runCLI(t, "plan", path, "--force")
	if code != 0 || !strings.Contains(out, "warning") || !strings.Contains(out, "d2-T40") {
		t.Fatalf("--force: exit %d: %s%s", code, out, errs)
	}
	// Forced past float64's range, --json still prints JSON (null for the overflow).
	path = writeSweep(t, "seed = 1\n[grid]\ndims = [2]\nhorizons = [1000]\nreplicates = 100\n")
	code, out, errs = runCLI(t, "plan", "--json", "--force", path)
	var m map[string]any
	if code != 0 || json.Unmarshal([]byte(out), &m) != nil || m["nodes"] != nil {
		t.Fatalf("overflowing plan: exit %d: %s%s", code, out, errs)
	}
}

func TestPlanFlagsAfterFile(t *testing.T) {
	if code, out, errs := runCLI(t, "plan", "--cores", "10", "../../examples/quick.toml", "--json"); code != 0 || !strings.HasPrefix(out, "{") {
		t.Fatalf("exit %d: %s%s", code, out, errs)
	}
	if code, _, errs := runCLI(t, "plan", "../../examples/quick.toml", "--bogus"); code != 2 || !strings.Contains(errs, "bogus") {
		t.Fatalf("unknown flag after the file: exit %d: %s", code, errs)
	}
	if code, _, _ := runCLI(t, "plan", "../../examples/quick.toml", "--cores", "0"); code != 2 {
		t.Fatalf("--cores 0: exit %d", code)
	}
}

// TestHelpOnStandardOutput: every command's --help (and -h) prints its usage on standard
// output, where it was asked for (so a pager or grep sees it), nothing on standard error,
// and exits 0.
func TestHelpOnStandardOutput(t *testing.T) {
	for name := range commands {
		for _, flagName := range []string{"--help", "-h"} {
			code, out, errs := runCLI(t, name, flagName)
			if code != 0 || !strings.HasPrefix(out, "Usage: bbmx "+name+" ") || errs != "" {
				t.Errorf("%s %s: exit %d, stdout %.60q, stderr %.60q", name, flagName, code, out, errs)
			}
		}
	}
}
