package results

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"os"
	"path/filepath"
	"reflect"
	"strconv"
	"testing"

	"github.com/parquet-go/parquet-go"
)

func TestExportRoundTrips(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "s.db")
	storeWith(t, path, 8, 0, 25)
	st, err := Open(path, true)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	want, err := st.Rows()
	if err != nil || len(want) != 25 {
		t.Fatalf("%d rows %v", len(want), err)
	}
	pq := filepath.Join(dir, "r.parquet")
	if err := st.ExportRecords(pq, "parquet"); err != nil {
		t.Fatal(err)
	}
	got, err := parquet.ReadFile[RecordRow](pq)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(got, want) {
		t.Fatal("Parquet read back differs from the store's rows")
	}
	cp := filepath.Join(dir, "r.csv")
	if err := st.ExportRecords(cp, "csv"); err != nil {
		t.Fatal(err)
	}
	f, _ := os.Open(cp)
	recs, err := csv.NewReader(f).ReadAll()
	f.Close()
	if err != nil || len(recs) != 26 {
		t.Fatalf("csv: %d lines %v", len(recs), err)
	}
	if x, _ := strconv.ParseFloat(recs[3][6], 64); x != want[2].MaxRadius {
		t.Fatalf("csv max radius %v, want %v (exact round trip)", x, want[2].MaxRadius)
	}
	// Every row column is there, under its JSON name.
	jsonNames := map[string]bool{}
	for i := range reflect.TypeFor[RecordRow]().NumField() {
		jsonNames[reflect.TypeFor[RecordRow]().Field(i).Tag.Get("json")] = true
	}
	if len(recs[0]) != len(jsonNames) {
		t.Fatalf("csv columns %v, want the %d of a row", recs[0], len(jsonNames))
	}
	for j, name := range recs[0] {
		if !jsonNames[name] {
			t.Fatalf("csv column %q is not a row column", name)
		}
		if name == "checkpoint_population" {
			wantN := strconv.FormatUint(want[2].CheckN[0], 10) + ";" + strconv.FormatUint(want[2].CheckN[1], 10)
			if recs[3][j] != wantN {
				t.Fatalf("csv checkpoint_population %q, want %q", recs[3][j], wantN)
			}
		}
	}
	if err := st.ExportRecords(filepath.Join(dir, "x"), "xls"); err == nil {
		t.Fatal("unknown format accepted")
	}
}

// A cell of one replicate has no spread to estimate; its summary still exports as valid
// JSON (which has no NaN), with a standard error of 0.
func TestExportCellsOneReplicate(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "s.db")
	storeWith(t, path, 8, 0, 1)
	st, err := Open(path, true)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	b := exportedCells(t, st, "json")
	var rows []CellRow
	if err := json.Unmarshal(b, &rows); err != nil || len(rows) != 1 || rows[0].Replicates != 1 || rows[0].SEMeanShift != 0 {
		t.Fatalf("rows %+v (%v) from %s", rows, err, b)
	}
}

// An export never overwrites the store it reads, nor any other store: the output path
// named by mistake would otherwise be truncated and the sweep's results lost. Each
// format is refused and both stores keep their content.
func TestExportRefusesToOverwriteAStore(t *testing.T) {
	dir := t.TempDir()
	path, other := filepath.Join(dir, "s.db"), filepath.Join(dir, "other.db")
	storeWith(t, path, 8, 0, 5)
	storeWith(t, other, 9, 0, 5)
	want, wantOther := contentDigest(t, path), contentDigest(t, other)
	st, err := Open(path, true)
	if err != nil {
		t.Fatal(err)
	}
	for _, target := range []string{path, other} {
		for _, format := range []string{"csv", "json", "parquet"} {
			if err := st.ExportRecords(target, format); err == nil {
				t.Errorf("records as %s over %s: no error", format, filepath.Base(target))
			}
		}
		for _, format := range []string{"csv", "json"} {
			if err := st.ExportCells(target, format); err == nil {
				t.Errorf("cells as %s over %s: no error", format, filepath.Base(target))
			}
		}
	}
	st.Close()
	if got := contentDigest(t, path); got != want {
		t.Fatal("exporting changed the store")
	}
	if got := contentDigest(t, other); got != wantOther {
		t.Fatal("exporting changed another store")
	}
	if left, _ := filepath.Glob(filepath.Join(dir, ".*partial")); len(left) != 0 {
		t.Fatalf("temporary files left: %v", left)
	}
}

// A store with no cells yet exports its cell summaries as an empty JSON array (it was
// null, which a reader expecting a list of rows refuses) and a CSV of the header only.
func TestExportCellsEmptyStore(t *testing.T) {
	st, err := Create(filepath.Join(t.TempDir(), "s.db"), []byte("spec"))
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	if b := exportedCells(t, st, "json"); string(b) != "[]\n" {
		t.Fatalf("cells of an empty store as JSON: %q", b)
	}
	if b := exportedCells(t, st, "csv"); len(b) == 0 || b[len(b)-1] != '\n' || bytes.Count(b, []byte("\n")) != 1 {
		t.Fatalf("cells of an empty store as CSV: %q", b)
	}
}

// exportedCells returns what ExportCells writes in format.
func exportedCells(t *testing.T, st *Store, format string) []byte {
	t.Helper()
	out := filepath.Join(t.TempDir(), "cells."+format)
	if err := st.ExportCells(out, format); err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile(out)
	if err != nil {
		t.Fatal(err)
	}
	return b
}
