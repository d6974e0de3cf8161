package main

import (
	"flag"
	"fmt"
	"io"
	"strings"

	"bbmx/engine"
	"bbmx/results"
)

func init() {
	register(command{name: "merge", summary: "merge stores from several runs or collaborators into a new one", run: runMerge})
	register(command{name: "audit", summary: "re-simulate a random sample of stored replicates and compare bit for bit", run: runAudit})
	register(command{name: "show", summary: "summarise what a store holds: cells, replicates, provenance", run: runShow})
}

func runMerge(args []string, stdout, stderr io.Writer) error {
	fs := newFlagSet("merge", "--out OUT.db IN.db...",
		"Merges stores into a new store OUT. Inputs are only read. Cells must have the same model and\n"+
			"observables, and records the same engine format. Replicates are keyed by (seed, replicate):\n"+
			"disjoint ranges are joined, identical overlaps kept once, and differing overlaps refused\n"+
			"with a report of cell, seed and replicate. Different seeds are independent replicates.")
	out := fs.String("out", "", "path of the merged store to create (must not exist)")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if *out == "" {
		return usagef("--out is required")
	}
	if fs.NArg() == 0 {
		return usagef("name at least one input store")
	}
	if err := results.MergeStores(*out, fs.Args()); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "merged %d store(s) into %s\n", fs.NArg(), *out)
	return nil
}

func runAudit(args []string, stdout, stderr io.Writer) error {
	fs := newFlagSet("audit", "STORE [--sample N] [--seed S]",
		"Re-simulates a random sample of the replicates stored in STORE and compares each record bit\n"+
			"for bit with the stored one. Exits 1 if any differs.")
	sample := fs.Int("sample", 20, "replicates to re-simulate per cell")
	seed := fs.Uint64("seed", 1, "seed of the random choice of replicates")
	path, err := storeArg(fs, args)
	if err != nil {
		return err
	}
	if *sample < 1 {
		return usagef("--sample must be at least 1, got %d", *sample)
	}
	st, err := results.Open(path, true)
	if err != nil {
		return err
	}
	defer st.Close()
	rep, err := st.Audit(*sample, *seed)
	if err != nil {
		return err
	}
	for _, m := range rep.Mismatches {
		fmt.Fprintf(stdout, "MISMATCH cell %s seed %d replicate %d\n", m.CellID, m.Seed, m.Rep)
	}
	if len(rep.Mismatches) > 0 {
		return fmt.Errorf("%d of %d re-simulated replicates differ from the store", len(rep.Mismatches), rep.Checked)
	}
	fmt.Fprintf(stdout, "audit passed: %d replicates re-simulated, all bit-identical\n", rep.Checked)
	if len(rep.NoRecords) > 0 {
		fmt.Fprintf(stdout, "not checked: %d cell(s) keep no per-replicate records (%s)\n", len(rep.NoRecords), strings.Join(rep.NoRecords, ", "))
	}
	return nil
}

// storeArg parses flags that may come before or after one positional STORE argument.
func storeArg(fs *flag.FlagSet, args []string) (string, error) {
	return positionalArg(fs, args, "name the store file")
}

// positionalArg parses flags that may come before or after a command's one positional
// argument (a store, a sweep file, a folder) and returns that argument; missing is the
// error when there is none.
func positionalArg(fs *flag.FlagSet, args []string, missing string) (string, error) {
	var path string
	if len(args) > 0 && !strings.HasPrefix(args[0], "-") {
		path, args = args[0], args[1:]
	}
	if err := parseFlags(fs, args); err != nil {
		return "", err
	}
	if path == "" && fs.NArg() > 0 {
		path = fs.Arg(0)
		if err := parseFlags(fs, fs.Args()[1:]); err != nil { // flags may follow it
			return "", err
		}
	}
	if fs.NArg() > 0 {
		return "", usagef("unexpected argument %q", fs.Arg(0))
	}
	if path == "" {
		return "", usagef("%s", missing)
	}
	return path, nil
}

func runShow(args []string, stdout, stderr io.Writer) error {
	fs := newFlagSet("show", "STORE", "Prints the cells a store holds, how many replicates of which seeds, and where they came from.")
	path, err := storeArg(fs, args)
	if err != nil {
		return err
	}
	st, err := results.Open(path, true)
	if err != nil {
		return err
	}
	defer st.Close()
	_, sum, err := st.Spec()
	if err != nil {
		return err
	}
	ids, err := st.Cells()
	if err != nil {
		return err
	}
	stream, err := st.Stream()
	if err != nil {
		return err
	}
	fmt.Fprintf(stdout, "store %s (sweep %x, engine random stream %d)\n", path, sum[:6], stream)
	if stream != engine.StreamVersion {
		fmt.Fprintf(stdout, "  this bbmx's engine uses stream %d: it reads this store but cannot resume, grow or audit it\n", engine.StreamVersion)
	}
	if len(ids) == 0 {
		fmt.Fprintln(stdout, "no cells yet")
	}
	for _, id := range ids {
		c, sk, err := st.CellSketch(id)
		if err != nil {
			return err
		}
		mean, se := sk.MeanShift()
		if sk.N == 1 {
			fmt.Fprintf(stdout, "cell %s: d=%d T=%g, 1 replicate, R*_T - m_T = %.4f (one sample: no standard error)\n",
				id, c.Model.Dim, c.Horizon, mean)
		} else {
			fmt.Fprintf(stdout, "cell %s: d=%d T=%g, %d replicates, mean R*_T - m_T = %.4f ± %.4f (estimate ± s.e.)\n",
				id, c.Model.Dim, c.Horizon, sk.N, mean, se)
		}
		for _, r := range sk.Ranges {
			fmt.Fprintf(stdout, "    seed %d: replicates [%d, %d)\n", r.Seed, r.From, r.To)
		}
	}
	digest, err := st.ContentDigest()
	if err != nil {
		return err
	}
	fmt.Fprintf(stdout, "content digest %x (equal digests: the same results bit for bit)\n", digest)
	prov, err := st.Provenance()
	if err != nil {
		return err
	}
	for in, cells := range prov {
		for id, rs := range cells {
			fmt.Fprintf(stdout, "from %s: cell %s %v\n", in, id, rs)
		}
	}
	return nil
}

func init() {
	register(command{name: "export", summary: "write a store's records or cell summaries as CSV, JSON or Parquet", run: runExport})
}

func runExport(args []string, stdout, stderr io.Writer) error {
	fs := newFlagSet("export", "STORE --format csv|json|parquet --out PATH [--what records|cells]",
		"Writes the per-replicate records (one row per replicate: cell, seed, replicate, population,\n"+
			"maximal radius and its direction, top radii, checkpoint N, Z and W) or one summary row per\n"+
			"cell, in forms pandas and R read directly. Parquet is for records.")
	format := fs.String("format", "csv", "csv, json or parquet")
	out := fs.String("out", "", "file to write")
	what := fs.String("what", "records", "records or cells")
	path, err := storeArg(fs, args)
	if err != nil {
		return err
	}
	if *out == "" {
		return usagef("--out is required")
	}
	switch *format {
	case "csv", "json", "parquet":
	default:
		return usagef("--format must be csv, json or parquet, got %q", *format)
	}
	st, err := results.Open(path, true)
	if err != nil {
		return err
	}
	defer st.Close()
	switch *what {
	case "records":
		err = st.ExportRecords(*out, *format)
	case "cells":
		if *format == "parquet" {
			return usagef("cell summaries export as csv or json")
		}
		err = st.ExportCells(*out, *format)
	default:
		return usagef("--what must be records or cells, got %q", *what)
	}
	if err != nil {
		return err
	}
	fmt.Fprintf(stdout, "wrote %s\n", *out)
	return nil
}
