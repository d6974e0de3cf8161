package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// bbmx report on a small store: the folder is written, the headline printed, and bad
// input is a usage error (exit 2) or a clear failure (exit 1).
func TestReportCommand(t *testing.T) {
	dir := t.TempDir()
	st := filepath.Join(dir, "s.db")
	for _, T := range []string{"2", "3", "4"} {
		if code, _, errs := runCLI(t, "sim", "--horizon", T, "--replicates", "60", "--checkpoints", "1", "--store", st); code != 0 {
			t.Fatalf("sim T=%s: %s", T, errs)
		}
	}
	out := filepath.Join(dir, "rep")
	code, stdout, errs := runCLI(t, "report", st, "--out", out, "--bootstrap", "20", "--quiet")
	if code != 0 {
		t.Fatalf("report: exit %d: %s", code, errs)
	}
	for _, s := range []string{"Theory vs measured", "KS distance to the exact law", "d=2 centring", filepath.Join(out, "report.html")} {
		if !strings.Contains(stdout, s) {
			t.Errorf("output lacks %q:\n%s", s, stdout)
		}
	}
	if _, err := os.Stat(filepath.Join(out, "report.md")); err != nil {
		t.Error(err)
	}
	code, help, _ := runCLI(t, "report", "--help")
	if code != 0 {
		t.Errorf("--help: exit %d", code)
	}
	for _, s := range []string{"Usage: bbmx report STORE --out DIR", "statistical estimate", "--level"} {
		if !strings.Contains(help, s) {
			t.Errorf("--help lacks %q", s)
		}
	}
	for _, c := range []struct {
		args []string
		code int
		want string
	}{
		{[]string{"report", st}, 2, "--out DIR is required"},
		{[]string{"report", st, "--out", out, "--level", "2"}, 2, "--level"},
		{[]string{"report", st, "--out", out, "--bootstrap", "1"}, 2, "--bootstrap"},
		{[]string{"report", st, "--out", st}, 2, "not a folder"},
		{[]string{"report", filepath.Join(dir, "none.db"), "--out", out}, 1, "no such file"},
	} {
		code, _, errs := runCLI(t, c.args...)
		if code != c.code || !strings.Contains(errs, c.want) {
			t.Errorf("%v: exit %d %q, want %d and %q", c.args, code, errs, c.code, c.want)
		}
	}
}
