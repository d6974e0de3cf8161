package main

import (
	"fmt"
	"io"
	"path/filepath"
	"strings"

	"bbmx/results"
	"bbmx/results/report"
)

// finalReport writes the report of a finished sweep (default folder: beside the store,
// <store>-report) and prints its headline table.
func finalReport(st *results.Store, storePath, dir string, stdout, stderr io.Writer) error {
	if dir == "" {
		dir = strings.TrimSuffix(storePath, filepath.Ext(storePath)) + "-report"
	}
	fmt.Fprintf(stderr, "fitting and writing the report to %s (Ctrl-C stops it; the sweep stays stored and 'bbmx report %s --out DIR' writes it later) ...\n", dir, storePath)
	rep, err := report.Write(st, dir, report.Options{})
	if err != nil {
		return fmt.Errorf("the sweep is complete and stored, but the report failed: %w (retry with 'bbmx report %s --out DIR')", err, storePath)
	}
	fmt.Fprintln(stdout)
	fmt.Fprint(stdout, rep.Headline())
	return nil
}
