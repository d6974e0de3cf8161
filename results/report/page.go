package report

import (
	"encoding/csv"
	"encoding/json"
	"fmt"
	"html"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
)

// Files of the report folder besides the figures and the per-cell tables.
const (
	SummaryCSV  = "summary.csv"  // the theory-vs-measured table
	SummaryJSON = "summary.json" // the same, with every number
	TablesJSON  = "tables.json"  // every other table
)

var summaryHeader = []string{"group", "quantity", "theory", "kind", "theory_value", "estimate", "lo", "hi", "p_value", "n", "method", "verdict"}

func numOrEmpty(x float64) string {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return ""
	}
	return strconv.FormatFloat(x, 'g', 10, 64)
}

func (r Row) csv() []string {
	return []string{r.Group, r.Quantity, r.Theory, r.Kind, numOrEmpty(r.Value), numOrEmpty(r.Estimate), numOrEmpty(r.Lo),
		numOrEmpty(r.Hi), numOrEmpty(r.P), strconv.Itoa(r.N), r.Method, r.Verdict}
}

// jsonNum is a number that is null when not finite.
type jsonNum float64

func (x jsonNum) MarshalJSON() ([]byte, error) {
	if math.IsNaN(float64(x)) || math.IsInf(float64(x), 0) {
		return []byte("null"), nil
	}
	return []byte(strconv.FormatFloat(float64(x), 'g', -1, 64)), nil
}

type jsonRow struct {
	Group       string  `json:"group"`
	Quantity    string  `json:"quantity"`
	Theory      string  `json:"theory"`
	Kind        string  `json:"kind"`
	TheoryValue jsonNum `json:"theory_value"`
	Estimate    jsonNum `json:"estimate"`
	Lo          jsonNum `json:"lo"`
	Hi          jsonNum `json:"hi"`
	P           jsonNum `json:"p_value"`
	N           int     `json:"n"`
	Method      string  `json:"method"`
	Verdict     string  `json:"verdict"`
}

func writeCSV(path string, header []string, rows [][]string) error {
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	w := csv.NewWriter(f)
	w.Write(header)
	w.WriteAll(rows)
	if err := w.Error(); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}

func writeJSON(path string, v any) error {
	b, err := json.MarshalIndent(v, "", "  ")
	if err != nil {
		return err
	}
	return os.WriteFile(path, append(b, '\n'), 0o644)
}

const disclaimer = "Every measured number here is a statistical estimate from a finite number of simulated replicates, " +
	"shown with its uncertainty. Intervals are %s confidence intervals; a verdict \"agrees\" means the theory value lies " +
	"in the interval or, for a test, that its p-value is at least %s. Under the theory each verdict is therefore wrong " +
	"with probability %s, so with many rows some \"differs\" are expected by chance. Rows of kind \"exact\" hold at every " +
	"horizon (the exact law from the law solver, rotation invariance, the many-to-one formula); rows of kind \"limit\" are " +
	"asymptotic statements as T (and s) grow, and are expected to differ at short horizons."

func (b *builder) disclaimer() string {
	a := fmt.Sprintf("%.3g", 1-b.opt.Level)
	return fmt.Sprintf(disclaimer, pct(b.opt.Level), a, a)
}

// writePage writes report.md, report.html, the summary as CSV and JSON, and every table.
func (b *builder) writePage() error {
	r := b.rep
	var rows [][]string
	jrows := make([]jsonRow, 0, len(r.Rows))
	for _, row := range r.Rows {
		rows = append(rows, row.csv())
		jrows = append(jrows, jsonRow{row.Group, row.Quantity, row.Theory, row.Kind, jsonNum(row.Value), jsonNum(row.Estimate),
			jsonNum(row.Lo), jsonNum(row.Hi), jsonNum(row.P), row.N, row.Method, row.Verdict})
	}
	if err := writeCSV(filepath.Join(b.dir, SummaryCSV), summaryHeader, rows); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	if err := writeJSON(filepath.Join(b.dir, SummaryJSON), map[string]any{
		"sweep": r.Sweep, "level": r.Level, "cells": r.Cells, "rows": jrows, "skipped": nonNil(r.Skipped)}); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	type jtable struct {
		Name    string     `json:"name"`
		Caption string     `json:"caption"`
		Header  []string   `json:"header"`
		Rows    [][]string `json:"rows"`
	}
	var jt []jtable
	for _, t := range r.Tables {
		if err := writeCSV(filepath.Join(b.dir, t.Name+".csv"), t.Header, t.Rows); err != nil {
			return fmt.Errorf("report: %w", err)
		}
		jt = append(jt, jtable{t.Name, t.Caption, t.Header, t.Rows})
	}
	if err := writeJSON(filepath.Join(b.dir, TablesJSON), jt); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	if err := os.WriteFile(filepath.Join(b.dir, "report.md"), []byte(b.markdown()), 0o644); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	if err := os.WriteFile(r.HTMLPath(), []byte(b.html()), 0o644); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	return nil
}

func nonNil(s []string) []string {
	if s == nil {
		return []string{}
	}
	return s
}

func (b *builder) markdown() string {
	r := b.rep
	var sb strings.Builder
	fmt.Fprintf(&sb, "# Branching Brownian motion sweep: fits and theory\n\n")
	fmt.Fprintf(&sb, "Sweep %s; %d cells.\n\n**%s**\n\n", short(r.Sweep), r.Cells, b.disclaimer())
	sb.WriteString("## Theory vs measured\n\n")
	sb.WriteString("| group | quantity | theory | estimate | interval | verdict | n | method |\n|---|---|---|---|---|---|---|---|\n")
	for _, row := range r.Rows {
		fmt.Fprintf(&sb, "| %s | %s | %s | %s | %s | %s | %d | %s |\n", mdCell(row.Group), mdCell(row.Quantity), mdCell(row.theoryCell()),
			fmtNum(row.Estimate), row.intervalText(), row.Verdict, row.N, mdCell(row.Method))
	}
	fmt.Fprintf(&sb, "\nThe table as CSV: [%s](%s); as JSON: [%s](%s).\n", SummaryCSV, SummaryCSV, SummaryJSON, SummaryJSON)
	if len(r.Skipped) > 0 {
		sb.WriteString("\n## Skipped fits\n\n")
		for _, s := range r.Skipped {
			fmt.Fprintf(&sb, "- %s\n", mdCell(s))
		}
	}
	sb.WriteString("\n## Figures\n\n")
	for _, f := range r.Figures {
		fmt.Fprintf(&sb, "### %s\n\n![%s](%s.png)\n\n%s ([SVG](%s.svg))\n\n", f.Title, f.Title, f.Name, f.Caption, f.Name)
	}
	sb.WriteString("## Tables\n\n")
	for _, t := range r.Tables {
		fmt.Fprintf(&sb, "- [%s.csv](%s.csv): %s\n", t.Name, t.Name, t.Caption)
	}
	fmt.Fprintf(&sb, "- [%s](%s): all of these tables in one JSON file\n", TablesJSON, TablesJSON)
	return sb.String()
}

func (r Row) theoryCell() string {
	if r.Theory == "" {
		return "-"
	}
	if r.Kind == "" {
		return r.Theory
	}
	return r.Theory + " (" + r.Kind + ")"
}

func short(s string) string {
	if len(s) > 16 {
		return s[:16]
	}
	return s
}

func mdCell(s string) string {
	s = strings.ReplaceAll(s, "|", "\\|")
	return strings.ReplaceAll(s, "*", "\\*")
}

const css = `body{font-family:sans-serif;max-width:75em;margin:1em auto;padding:0 1em;color:#222}
table{border-collapse:collapse;font-size:0.9em}td,th{border:1px solid #bbb;padding:0.2em 0.5em;text-align:left}
th{background:#eee}td.n{text-align:right;font-family:monospace}.differs{color:#b00;font-weight:bold}.agrees{color:#060}
.note{background:#fff8e0;border:1px solid #e0c060;padding:0.6em}figure{margin:1.5em 0}img{max-width:100%}
figcaption{font-size:0.9em;color:#444}`

func (b *builder) html() string {
	r := b.rep
	e := html.EscapeString
	var sb strings.Builder
	sb.WriteString("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\n<title>BBM sweep report</title>\n<style>" + css + "</style></head><body>\n")
	sb.WriteString("<h1>Branching Brownian motion sweep: fits and theory</h1>\n")
	fmt.Fprintf(&sb, "<p>Sweep <code>%s</code>; %d cells.</p>\n<p class=\"note\">%s</p>\n", e(r.Sweep), r.Cells, e(b.disclaimer()))
	sb.WriteString("<h2>Theory vs measured</h2>\n<table>\n<tr><th>group</th><th>quantity</th><th>theory</th><th>estimate</th><th>interval</th><th>verdict</th><th>n</th><th>method</th></tr>\n")
	for _, row := range r.Rows {
		cls := ""
		if row.Verdict == Agrees || row.Verdict == Differs {
			cls = ` class="` + row.Verdict + `"`
		}
		fmt.Fprintf(&sb, "<tr><td>%s</td><td>%s</td><td>%s</td><td class=\"n\">%s</td><td class=\"n\">%s</td><td%s>%s</td><td class=\"n\">%d</td><td>%s</td></tr>\n",
			e(row.Group), e(row.Quantity), e(row.theoryCell()), e(fmtNum(row.Estimate)), e(row.intervalText()), cls, e(row.Verdict), row.N, e(row.Method))
	}
	fmt.Fprintf(&sb, "</table>\n<p>The table as <a href=\"%s\">CSV</a> and <a href=\"%s\">JSON</a>.</p>\n", SummaryCSV, SummaryJSON)
	if len(r.Skipped) > 0 {
		sb.WriteString("<h2>Skipped fits</h2>\n<ul>\n")
		for _, s := range r.Skipped {
			fmt.Fprintf(&sb, "<li>%s</li>\n", e(s))
		}
		sb.WriteString("</ul>\n")
	}
	sb.WriteString("<h2>Figures</h2>\n")
	for _, f := range r.Figures {
		fmt.Fprintf(&sb, "<figure><img src=\"%s.png\" alt=\"%s\"><figcaption>%s (<a href=\"%s.svg\">SVG</a>)</figcaption></figure>\n",
			e(f.Name), e(f.Title), e(f.Caption), e(f.Name))
	}
	sb.WriteString("<h2>Tables</h2>\n<ul>\n")
	for _, t := range r.Tables {
		fmt.Fprintf(&sb, "<li><a href=\"%s.csv\">%s.csv</a>: %s</li>\n", e(t.Name), e(t.Name), e(t.Caption))
	}
	fmt.Fprintf(&sb, "<li><a href=\"%s\">%s</a>: all of these tables in one JSON file</li>\n</ul>\n</body></html>\n", TablesJSON, TablesJSON)
	return sb.String()
}
