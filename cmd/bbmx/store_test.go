package main

import (
	"path/filepath"
	"strings"
	"testing"
)

// sim --store, then merge, show and audit: the store path works end to end.
func TestStoreCommands(t *testing.T) {
	dir := t.TempDir()
	a, b, m := filepath.Join(dir, "a.db"), filepath.Join(dir, "b.db"), filepath.Join(dir, "m.db")
	for _, args := range [][]string{
		{"sim", "--horizon", "3", "--replicates", "20", "--seed", "4", "--store", a},
		{"sim", "--horizon", "3", "--replicates", "20", "--seed", "4", "--first", "10", "--store", b},
	} {
		if code, _, errs := runCLI(t, args...); code != 0 {
			t.Fatalf("%v: %s", args, errs)
		}
	}
	// Adding replicates already held is refused with a hint, and exit status 1.
	if code, _, errs := runCLI(t, "sim", "--horizon", "3", "--replicates", "5", "--seed", "4", "--store", a); code != 1 || !strings.Contains(errs, "overlap") {
		t.Fatalf("overlap: exit %d %s", code, errs)
	}
	if code, _, errs := runCLI(t, "merge", "--out", m, a, b); code != 0 {
		t.Fatal(errs)
	}
	code, out, errs := runCLI(t, "show", m)
	if code != 0 || !strings.Contains(out, "30 replicates") || !strings.Contains(out, "[0, 30)") {
		t.Fatalf("show: %d %s %s", code, out, errs)
	}
	code, out, errs = runCLI(t, "audit", m, "--sample", "5")
	if code != 0 || !strings.Contains(out, "audit passed: 5") {
		t.Fatalf("audit: %d %s %s", code, out, errs)
	}
	if code, _, _ := runCLI(t, "merge", a); code != 2 {
		t.Fatal("merge without --out should be a usage error")
	}
	if code, _, errs := runCLI(t, "show", filepath.Join(dir, "none.db")); code != 1 || !strings.Contains(errs, "no such file") {
		t.Fatalf("missing store: %d %s", code, errs)
	}
	// A store in a folder not made yet, holding one replicate: show gives no standard
	// error for a single sample rather than a zero one.
	one := filepath.Join(dir, "new", "one.db")
	if code, _, errs := runCLI(t, "sim", "--horizon", "3", "--replicates", "1", "--seed", "4", "--store", one); code != 0 {
		t.Fatal(errs)
	}
	code, out, errs = runCLI(t, "show", one)
	if code != 0 || !strings.Contains(out, "1 replicate, R*_T - m_T = ") || strings.Contains(out, "±") {
		t.Fatalf("show of one replicate: %d %s %s", code, out, errs)
	}
}

func TestExportCommand(t *testing.T) {
	dir := t.TempDir()
	a := filepath.Join(dir, "a.db")
	if code, _, errs := runCLI(t, "sim", "--horizon", "3", "--replicates", "12", "--store", a); code != 0 {
		t.Fatal(errs)
	}
	for _, f := range []string{"csv", "json", "parquet"} {
		out := filepath.Join(dir, "r."+f)
		if code, _, errs := runCLI(t, "export", a, "--format", f, "--out", out); code != 0 {
			t.Fatalf("%s: %s", f, errs)
		}
	}
	out := filepath.Join(dir, "cells.json")
	if code, _, errs := runCLI(t, "export", a, "--what", "cells", "--format", "json", "--out", out); code != 0 {
		t.Fatal(errs)
	}
	if !strings.Contains(readFile(t, out), `"replicates": 12`) {
		t.Fatal("cell summary lacks the replicate count")
	}
	if code, _, _ := runCLI(t, "export", a, "--format", "xls", "--out", out); code != 2 {
		t.Fatal("bad format should be a usage error")
	}
}

// TestAuditSaysWhatItSkipped: a store whose sweep keeps no per-replicate records, grown by
// `sim --store` with a cell that does, audits that cell and names the one it could not
// check, so "audit passed" does not read as covering it.
func TestAuditSaysWhatItSkipped(t *testing.T) {
	st := filepath.Join(t.TempDir(), "a.db")
	sweepFile := writeSweep(t, `name = "fernhollow-audit"
seed = 3
keep_records = false
[grid]
dims = [2]
horizons = [2]
replicates = 10
`)
	if code, _, errs := runCLI(t, "run", sweepFile, "--store", st, "--no-report"); code != 0 {
		t.Fatal(errs)
	}
	if code, _, errs := runCLI(t, "sim", "--dim", "2", "--horizon", "3", "--replicates", "5", "--seed", "3", "--store", st); code != 0 {
		t.Fatal(errs)
	}
	code, out, errs := runCLI(t, "audit", st)
	if code != 0 || !strings.Contains(out, "audit passed: 5") || !strings.Contains(out, "not checked: 1 cell(s) keep no per-replicate records (d2-T2)") {
		t.Fatalf("audit: %d %s %s", code, out, errs)
	}
}
