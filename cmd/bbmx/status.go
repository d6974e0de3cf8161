package main

import (
	"context"
	"fmt"
	"io"
	"time"

	"bbmx/coordinator"
	pb "bbmx/proto/bbmx/v1"
	"bbmx/results"
	"bbmx/worker"
)

func init() {
	register(command{name: "status", summary: "show a sweep's progress, from its coordinator or its store", run: runStatus})
}

func runStatus(args []string, stdout, stderr io.Writer) error {
	fs := newFlagSet("status", "(--store PATH | --coordinator HOST:PORT --token-file F [TLS flags])",
		"Prints per cell the replicates done and wanted, tasks leased and parked (with their errors).\n"+
			"Ask the running coordinator with --coordinator, or read a store that no process holds\n"+
			"open with --store.")
	storePath := fs.String("store", "", "read progress from this store")
	cf := addClientFlags(fs)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	switch {
	case fs.NArg() > 0:
		return usagef("unexpected argument %q", fs.Arg(0))
	case (*storePath == "") == (*cf.coordinator == ""):
		return usagef("give either --store or --coordinator")
	}
	var rep *pb.StatusReply
	if *storePath != "" {
		st, err := results.Open(*storePath, true)
		if err != nil {
			return fmt.Errorf("%w (while a coordinator holds it, ask the coordinator with --coordinator)", err)
		}
		defer st.Close()
		if rep, err = coordinator.Inspect(st); err != nil {
			return err
		}
	} else {
		cl, closeFn, err := cf.dial(*cf.coordinator)
		if err != nil {
			return err
		}
		defer closeFn()
		ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
		defer cancel()
		if rep, err = worker.Status(ctx, cl); err != nil {
			return err
		}
	}
	printStatus(stdout, rep, false)
	return nil
}

func replicatesDone(s *pb.StatusReply) (n uint64) {
	for _, c := range s.Cells {
		n += c.ReplicatesDone
	}
	return n
}

func replicatesWanted(s *pb.StatusReply) (n uint64) {
	for _, c := range s.Cells {
		n += c.ReplicatesWanted
	}
	return n
}

// printStatus writes a status table.
func printStatus(w io.Writer, s *pb.StatusReply, brief bool) {
	done, want := replicatesDone(s), replicatesWanted(s)
	state := "running"
	if s.Complete {
		state = "complete"
	}
	fmt.Fprintf(w, "sweep %q (%x): %s, %d/%d replicates, %d workers, %d tasks accepted, %d leases expired, %.1f CPU-s simulated\n",
		s.SweepName, s.SweepSha256[:min(6, len(s.SweepSha256))], state, done, want, s.Workers, s.Completions, s.LeaseExpiries, s.ComputeSeconds)
	if brief {
		return
	}
	fmt.Fprintf(w, "%-14s %12s %12s %8s %8s %8s\n", "cell", "replicates", "wanted", "to do", "leased", "parked")
	for _, c := range s.Cells {
		fmt.Fprintf(w, "%-14s %12d %12d %8d %8d %8d\n", c.CellId, c.ReplicatesDone, c.ReplicatesWanted, c.TasksTotal-c.TasksDone, c.TasksLeased, c.TasksParked)
	}
	printParked(w, s)
}

// printParked lists the tasks parked after repeated failures, one line each.
func printParked(w io.Writer, s *pb.StatusReply) {
	for _, p := range s.Parked {
		fmt.Fprintf(w, "PARKED %s after %d failed attempts: %s\n", p.TaskId, p.Attempts, p.Error)
	}
}
