package report_test

import (
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"encoding/xml"
	"errors"
	"fmt"
	"image/png"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"bbmx/engine"
	"bbmx/results"
	"bbmx/results/report"
)

// buildStore simulates d = 1, 2 and T = 3, 4, 5 with checkpoints 1 and 2 and commits
// them to a new store.
func buildStore(t *testing.T, path string, n uint64, keep bool) *results.Store {
	t.Helper()
	st, err := results.Create(path, []byte("report test sweep"))
	if err != nil {
		t.Fatal(err)
	}
	var batch []results.TaskResult
	for _, d := range []int{1, 2} {
		for _, T := range []float64{3, 4, 5} {
			m := engine.Model{Dim: d, Sigma: 1, Beta: 1, Children: 2}
			c := engine.Cell{Model: m, Horizon: T, Observe: engine.Observe{TopK: 16, Checkpoints: []float64{1, 2}, Directions: 16}}
			seed := uint64(100*d) + uint64(T)
			recs, err := engine.Batch{Cell: c, Seed: seed, From: 0, To: n, Threads: 2}.Run(context.Background())
			if err != nil {
				t.Fatal(err)
			}
			batch = append(batch, results.TaskResult{CellID: fmt.Sprintf("d%d-T%g", d, T), Cell: c, Seed: seed, Records: recs, KeepRecords: keep})
		}
	}
	if err := st.Commit(batch, nil); err != nil {
		t.Fatal(err)
	}
	return st
}

func findRow(rows []report.Row, group, quantity string) (report.Row, bool) {
	for _, r := range rows {
		if r.Group == group && r.Quantity == quantity {
			return r, true
		}
	}
	return report.Row{}, false
}

// checkFiles checks every figure decodes as a non-empty PNG and parses as SVG XML.
func checkFiles(t *testing.T, rep *report.Report) {
	t.Helper()
	for _, f := range rep.Figures {
		b, err := os.ReadFile(filepath.Join(rep.Dir, f.Name+".png"))
		if err != nil {
			t.Fatal(err)
		}
		img, err := png.Decode(bytes.NewReader(b))
		if err != nil {
			t.Fatalf("%s.png: %v", f.Name, err)
		}
		if r := img.Bounds(); r.Dx() < 100 || r.Dy() < 100 {
			t.Errorf("%s.png is only %dx%d", f.Name, r.Dx(), r.Dy())
		}
		s, err := os.ReadFile(filepath.Join(rep.Dir, f.Name+".svg"))
		if err != nil {
			t.Fatal(err)
		}
		dec := xml.NewDecoder(bytes.NewReader(s))
		root := ""
		for {
			tok, err := dec.Token()
			if errors.Is(err, io.EOF) {
				break
			}
			if err != nil {
				t.Fatalf("%s.svg is not XML: %v", f.Name, err)
			}
			if se, ok := tok.(xml.StartElement); ok && root == "" {
				root = se.Name.Local
			}
		}
		if root != "svg" {
			t.Errorf("%s.svg: root element %q, want svg", f.Name, root)
		}
	}
	for _, name := range []string{"report.md", "report.html", report.SummaryCSV, report.SummaryJSON, report.TablesJSON} {
		if fi, err := os.Stat(filepath.Join(rep.Dir, name)); err != nil || fi.Size() == 0 {
			t.Errorf("%s missing or empty (%v)", name, err)
		}
	}
}

// End to end: a small sweep (d = 1, 2; T = 3, 4, 5; 300 replicates per cell) gives a
// report with every row, valid figures, and Kolmogorov-Smirnov tests against the exact
// law that pass. The KS checks reject at p < 0.001 with fixed seeds: false-alarm rate
// 0.1% per cell, 0.6% for the six cells (derived). The same holds for the direction
// uniformity tests (exact by rotation invariance of the model).
func TestReportEndToEnd(t *testing.T) {
	dir := t.TempDir()
	st := buildStore(t, filepath.Join(dir, "sweep.db"), 300, true)
	defer st.Close()
	var progress bytes.Buffer
	rep, err := report.Write(st, filepath.Join(dir, "out"), report.Options{Seed: 7, Progress: &progress})
	if err != nil {
		t.Fatal(err)
	}
	checkFiles(t, rep)

	cellRows := []string{
		"mean of R*_T - m_T", "sd of R*_T - m_T", "skewness of R*_T - m_T",
		"0.1-quantile of R*_T - m_T", "0.5-quantile of R*_T - m_T", "0.9-quantile of R*_T - m_T",
		"Gumbel location of R*_T - m_T", "Gumbel scale of R*_T - m_T", "upper-tail slope of log P(R*_T - m_T > x)",
		"KS distance to the exact law of R*_T", "mean gap R_(1) - R_(2)", "mean number within 0.5 of the maximum",
		"mean number with R - m_T in [-8, 8)", "mean number with R - m_T >= 0",
	}
	checkRows := []string{
		"share of replicates with Z_s <= 0", "Gumbel location of R*_T - m_T - log(Z_s)/theta", "Gumbel scale of R*_T - m_T - log(Z_s)/theta",
	}
	for _, d := range []int{1, 2} {
		for _, T := range []float64{3, 4, 5} {
			g := fmt.Sprintf("d=%d T=%g", d, T)
			want := append([]string(nil), cellRows...)
			if d == 1 {
				want = append(want, "share of farthest particles on the + side")
			} else {
				want = append(want, "mean resultant length of the farthest direction", "KS distance of the farthest angle to uniform")
			}
			for _, q := range want {
				if _, ok := findRow(rep.Rows, g, q); !ok {
					t.Errorf("%s: no row %q", g, q)
				}
			}
			for _, s := range []float64{1, 2} {
				gs := fmt.Sprintf("%s s=%g", g, s)
				w := checkRows
				if d == 2 {
					w = append(w[:len(w):len(w)], "KS distance of the angle's PIT under Z_s(u)+ du to uniform")
				}
				for _, q := range w {
					if _, ok := findRow(rep.Rows, gs, q); !ok {
						t.Errorf("%s: no row %q", gs, q)
					}
				}
			}
			ks, _ := findRow(rep.Rows, g, "KS distance to the exact law of R*_T")
			t.Logf("%s: KS D=%.4f p=%.3f", g, ks.Estimate, ks.P)
			if ks.P < 0.001 {
				t.Errorf("%s: simulation disagrees with the exact law: D=%.4f p=%.2g", g, ks.Estimate, ks.P)
			}
			for _, q := range []string{"share of farthest particles on the + side", "mean resultant length of the farthest direction"} {
				if r, ok := findRow(rep.Rows, g, q); ok && r.P < 0.001 {
					t.Errorf("%s: %s: p = %.2g", g, q, r.P)
				}
			}
		}
		for _, q := range []string{"a (median of R*_T)", "b (median of R*_T)", "c (median of R*_T)", "a (mean of R*_T)", "b (mean of R*_T)"} {
			if _, ok := findRow(rep.Rows, fmt.Sprintf("d=%d centring", d), q); !ok {
				t.Errorf("d=%d: no centring row %q", d, q)
			}
		}
	}
	if len(rep.Skipped) != 0 {
		t.Errorf("fits skipped with records present: %q", rep.Skipped)
	}

	// The summary CSV has one line per row and the JSON the same rows.
	f, err := os.Open(filepath.Join(rep.Dir, report.SummaryCSV))
	if err != nil {
		t.Fatal(err)
	}
	lines, err := csv.NewReader(f).ReadAll()
	f.Close()
	if err != nil || len(lines) != len(rep.Rows)+1 {
		t.Fatalf("summary.csv: %d lines for %d rows (%v)", len(lines), len(rep.Rows), err)
	}
	var js struct {
		Rows []map[string]any `json:"rows"`
	}
	b, _ := os.ReadFile(filepath.Join(rep.Dir, report.SummaryJSON))
	if err := json.Unmarshal(b, &js); err != nil || len(js.Rows) != len(rep.Rows) {
		t.Fatalf("summary.json: %d rows for %d (%v)", len(js.Rows), len(rep.Rows), err)
	}
	head := rep.Headline()
	for _, s := range []string{"KS distance to the exact law of R*_T", "verdict", rep.HTMLPath()} {
		if !strings.Contains(head, s) {
			t.Errorf("headline lacks %q:\n%s", s, head)
		}
	}
	page, _ := os.ReadFile(rep.HTMLPath())
	if !strings.Contains(string(page), "statistical estimate") {
		t.Error("report.html does not say the numbers are statistical estimates")
	}
	t.Log("\n" + head)
}

// Without records the report still fits what the sketch allows, says what it skipped,
// and the grouped KS test against the exact law passes (p >= 0.001 with fixed seeds:
// false-alarm rate at most 0.1% per cell, since the grouped test is conservative;
// derived).
func TestReportWithoutRecords(t *testing.T) {
	dir := t.TempDir()
	st := buildStore(t, filepath.Join(dir, "sweep.db"), 200, false)
	defer st.Close()
	rep, err := report.Write(st, filepath.Join(dir, "out"), report.Options{Bootstrap: 50})
	if err != nil {
		t.Fatal(err)
	}
	checkFiles(t, rep)
	for _, T := range []float64{3, 4, 5} {
		g := fmt.Sprintf("d=2 T=%g", T)
		for _, q := range []string{"mean of R*_T - m_T", "sd of R*_T - m_T", "0.5-quantile of R*_T - m_T",
			"Gumbel scale of R*_T - m_T", "KS distance to the exact law of R*_T", "mean number with R - m_T >= 0"} {
			if _, ok := findRow(rep.Rows, g, q); !ok {
				t.Errorf("%s: no row %q", g, q)
			}
		}
		if _, ok := findRow(rep.Rows, g+" s=1", "share of replicates with Z_s <= 0"); !ok {
			t.Errorf("%s: no Z_s <= 0 share", g)
		}
		ks, _ := findRow(rep.Rows, g, "KS distance to the exact law of R*_T")
		if ks.P < 0.001 {
			t.Errorf("%s: grouped KS against the exact law: D=%.4f p=%.2g", g, ks.Estimate, ks.P)
		}
		if _, ok := findRow(rep.Rows, g, "mean gap R_(1) - R_(2)"); ok {
			t.Errorf("%s: gaps reported without records", g)
		}
	}
	skipped := strings.Join(rep.Skipped, "\n")
	for _, s := range []string{"random-shift Gumbel fit", "direction tests", "gaps and counts within x", "skewness"} {
		if !strings.Contains(skipped, s) {
			t.Errorf("skipped list lacks %q:\n%s", s, skipped)
		}
	}
	page, _ := os.ReadFile(filepath.Join(rep.Dir, "report.md"))
	if !strings.Contains(string(page), "Skipped fits") {
		t.Error("report.md does not list the skipped fits")
	}
}

// Bad options and an empty store are clear errors, and nothing is written.
func TestReportBadInput(t *testing.T) {
	dir := t.TempDir()
	st, err := results.Create(filepath.Join(dir, "empty.db"), []byte("empty"))
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	out := filepath.Join(dir, "out")
	for _, c := range []struct {
		opt  report.Options
		want string
	}{
		{report.Options{Level: 1.5}, "confidence level"},
		{report.Options{Bootstrap: 3}, "bootstrap"},
		{report.Options{LawTolerance: 0.5}, "law tolerance"},
		{report.Options{TailFraction: 0.9}, "tail fraction"},
		{report.Options{}, "no cells"},
	} {
		_, err := report.Write(st, out, c.opt)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("options %+v: error %v, want one about %q", c.opt, err, c.want)
		}
	}
	if _, err := os.Stat(filepath.Join(out, "report.html")); err == nil {
		t.Error("a failed report wrote report.html")
	}
}

// Records kept for only part of a cell's replicates are not mixed with the sketch: the
// cell is reported from the sketch, and the page says why.
func TestReportPartialRecords(t *testing.T) {
	dir := t.TempDir()
	st, err := results.Create(filepath.Join(dir, "p.db"), []byte("partial"))
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	c := engine.Cell{Model: engine.Model{Dim: 1, Sigma: 1, Beta: 1, Children: 2}, Horizon: 3, Observe: engine.Observe{TopK: 4}}
	recs, err := engine.Batch{Cell: c, Seed: 5, From: 0, To: 200, Threads: 2}.Run(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	err = st.Commit([]results.TaskResult{
		{CellID: "c", Cell: c, Seed: 5, From: 0, Records: recs[:100], KeepRecords: true},
		{CellID: "c", Cell: c, Seed: 5, From: 100, Records: recs[100:]},
	}, nil)
	if err != nil {
		t.Fatal(err)
	}
	rep, err := report.Write(st, filepath.Join(dir, "out"), report.Options{Bootstrap: 20})
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(strings.Join(rep.Skipped, "\n"), "records cover only 100 of 200") {
		t.Errorf("partial records not reported: %q", rep.Skipped)
	}
	if r, ok := findRow(rep.Rows, "d=1 T=3", "mean of R*_T - m_T"); !ok || r.N != 200 {
		t.Errorf("mean row: %+v", r)
	}
}
