package main

import (
	"encoding/hex"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"text/tabwriter"
	"time"

	"bbmx/coordinator/sweep"
	"bbmx/engine"
)

func init() {
	register(command{name: "plan", summary: "check a sweep file and show its cells, tasks and estimated cost before running it", run: runPlan})
}

// planCell is one row of the plan.
type planCell struct {
	ID             string  `json:"id"`
	Dim            int     `json:"dim"`
	Horizon        float64 `json:"horizon"`
	Replicates     uint64  `json:"replicates"`
	NodesPerRep    any     `json:"nodes_per_replicate"` // number, or null when it overflows
	Tasks          uint64  `json:"tasks"`
	RepsPerTask    uint64  `json:"replicates_per_task"` // 0 when replicates are split
	PartsPerRep    int     `json:"parts_per_replicate"` // 1 when not split
	SplitAt        float64 `json:"split_at"`            // 0 when not split
	CPUHours       any     `json:"cpu_hours"`
	cpuHoursFinite float64
}

type planSummary struct {
	Sweep       string     `json:"sweep"`
	File        string     `json:"file"`
	Hash        string     `json:"hash"`
	Seed        uint64     `json:"seed"`
	TaskSeconds float64    `json:"task_seconds"`
	Cells       []planCell `json:"cells"`
	Tasks       uint64     `json:"tasks"`
	Nodes       any        `json:"nodes"`
	CPUHours    any        `json:"cpu_hours"`
	Cores       int        `json:"cores"`
	WallHours   any        `json:"wall_hours"`
	Absurd      bool       `json:"absurd"`
	Note        string     `json:"note"`
}

// num is x, or nil (JSON null) when x is not finite (a cost that overflows float64).
func num(x float64) any {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return nil
	}
	return x
}

const planNote = "estimates from the cost model: (k e^{gT} - 1)/(k - 1) expected tree nodes per replicate " +
	"at a nominal %.0f ns per node in d <= 3 (%.0f ns at d = 4, %.0f ns more per further dimension), plus, at each " +
	"checkpoint s, about a microsecond for each of the e^{gs} particles alive then (more with many directions); node " +
	"counts are random and real speed depends on the machine"

func runPlan(args []string, stdout, stderr io.Writer) error {
	fs := newFlagSet("plan", "SWEEP.toml [--cores N] [--json] [--force]",
		"Reads a sweep file, checks every key (an error names the key and its line), and prints\n"+
			"what running it means: the sweep's identity (the first 12 hex digits of the SHA-256 of\n"+
			"its canonical form; stores remember it), then one row per cell:\n\n"+
			"  cell       d<dim>-T<horizon>, the name stores and reports use\n"+
			"  reps       replicates wanted for the cell\n"+
			"  nodes/rep  expected tree nodes of one replicate, (k e^{gT} - 1)/(k - 1), g = beta (k-1)\n"+
			"  tasks      units of work handed to workers, each about task_seconds on one core\n"+
			"  per task   whole replicates per task, or, for replicates too big for one task, the\n"+
			"             parts each is split into and the split time s0 (subtrees rooted at the\n"+
			"             particles alive at s0; the merged result is bit-identical to an unsplit run)\n"+
			"  CPU-h      the cell's CPU-hours\n\n"+
			"and the totals, with the wall time on --cores cores if the work spreads evenly. All\n"+
			"figures are estimates from the cost model, not measurements. A sweep above\n"+
			fmt.Sprintf("%.0g tree nodes (about %.0f CPU-hours in d <= 3) is refused (exit status 2) unless --force is given:\n", engine.AbsurdSweepNodes, engine.AbsurdSweepNodes*engine.NodeSeconds(3)/3600)+
			"the cost grows like e^{gT}, so a mistyped horizon shows up here.\n\n"+
			"The file (TOML; defaults in brackets): seed (required), name, task_seconds [60],\n"+
			"keep_records [true], split_at [0: automatic]; [model] sigma [1], beta [1], children [2];\n"+
			"[grid] dims, horizons, replicates (required), and [[grid.override]] tables of dim,\n"+
			"horizon, replicates for single cells; [observe] top_k [32], window [8], bin_width [0.05],\n"+
			"checkpoints [none], directions [16], lambda [theta/2]. examples/quick.toml and\n"+
			"examples/cluster.toml show every key.\n\n"+
			"Example: bbmx plan examples/quick.toml; then bbmx run examples/quick.toml")
	cores := fs.Int("cores", 100, "cores for the wall-time estimate")
	asJSON := fs.Bool("json", false, "print the plan as one JSON object")
	force := fs.Bool("force", false, "show the plan even if the cost estimate is absurd")
	path, err := positionalArg(fs, args, "name one sweep file, e.g. bbmx plan examples/quick.toml")
	if err != nil {
		return err
	}
	if *cores < 1 {
		return usagef("--cores must be at least 1, got %d", *cores)
	}
	sw, err := loadSweep(path)
	if err != nil {
		return err
	}
	// The refusal, worded as for bbmx run; the estimate itself is printed below.
	est, err := checkCost(sw, *force, io.Discard)
	if err != nil {
		return err
	}
	p := makePlan(sw, est, path, *cores)
	if *asJSON {
		enc := json.NewEncoder(stdout)
		enc.SetIndent("", "  ")
		return enc.Encode(p)
	}
	writePlan(stdout, p)
	return nil
}

func makePlan(sw *sweep.Sweep, est sweep.Estimate, path string, cores int) planSummary {
	h := sw.Hash()
	p := planSummary{Sweep: sw.Name, File: path, Hash: hex.EncodeToString(h[:]), Seed: sw.Seed,
		TaskSeconds: sw.TaskSeconds, Cores: cores, Absurd: est.Absurd,
		Nodes: num(est.Nodes), CPUHours: num(est.CPUSeconds / 3600),
		WallHours: num(est.CPUSeconds / 3600 / float64(cores)),
		Note: fmt.Sprintf(planNote, engine.NodeSeconds(3)*1e9, engine.NodeSeconds(4)*1e9,
			(engine.NodeSeconds(5)-engine.NodeSeconds(4))*1e9)}
	for _, c := range sw.Cells() {
		z := sw.Size(c)
		nodes := c.Cell.Model.ExpectedNodes(c.Cell.Horizon)
		hours := float64(c.Replicates) * engine.NominalReplicateSeconds(c.Cell) / 3600
		row := planCell{ID: c.ID, Dim: c.Cell.Model.Dim, Horizon: c.Cell.Horizon, Replicates: c.Replicates,
			NodesPerRep: num(nodes), Tasks: z.Tasks(c.Replicates), PartsPerRep: z.Parts, SplitAt: z.SplitAt,
			CPUHours: num(hours), cpuHoursFinite: hours}
		if z.Parts <= 1 {
			row.RepsPerTask = min(z.PerTask, c.Replicates)
		}
		p.Tasks += row.Tasks
		p.Cells = append(p.Cells, row)
	}
	return p
}

// hoursText words an estimated duration given in hours in the most readable unit.
func hoursText(h float64) string {
	switch {
	case math.IsInf(h, 0) || math.IsNaN(h) || h > 1e6:
		return fmt.Sprintf("about %.3g hours", h)
	case h < 1.0/3600:
		return "less than a second"
	case h < 1:
		return "about " + time.Duration(h*float64(time.Hour)).Round(time.Second).String()
	case h < 48:
		return fmt.Sprintf("about %.1f hours", h)
	}
	return fmt.Sprintf("about %.1f days", h/24)
}

func writePlan(w io.Writer, p planSummary) {
	name := p.Sweep
	if name == "" {
		name = "(unnamed)"
	}
	fmt.Fprintf(w, "sweep %s from %s, identity %s, seed %d\n", name, p.File, p.Hash[:12], p.Seed)
	fmt.Fprintf(w, "tasks of about %g s on one core\n\n", p.TaskSeconds)
	tw := tabwriter.NewWriter(w, 2, 8, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "cell\td\tT\treps\tnodes/rep\ttasks\tper task\tCPU-h\t")
	var total float64
	for _, c := range p.Cells {
		per := fmt.Sprintf("%d reps", c.RepsPerTask)
		if c.PartsPerRep > 1 {
			per = fmt.Sprintf("1/%d rep, s0 %.3g", c.PartsPerRep, c.SplitAt)
		}
		nodes, _ := c.NodesPerRep.(float64)
		if c.NodesPerRep == nil {
			nodes = math.Inf(1)
		}
		fmt.Fprintf(tw, "%s\t%d\t%g\t%d\t%.3g\t%d\t%s\t%s\t\n", c.ID, c.Dim, c.Horizon, c.Replicates, nodes, c.Tasks, per, cpuHours(c.cpuHoursFinite))
		total += c.cpuHoursFinite
	}
	tw.Flush()
	fmt.Fprintf(w, "\ntotal: %d cells, %d tasks, %s CPU-hours; %s on %d cores if the work spreads evenly\n",
		len(p.Cells), p.Tasks, cpuHours(total), hoursText(total/float64(p.Cores)), p.Cores)
	if p.Absurd {
		fmt.Fprintln(w, "warning: the cost is above the limit for a sweep (shown because of --force)")
	}
	fmt.Fprintf(w, "All figures are %s.\n", p.Note)
}

// cpuHours prints CPU-hours with sensible precision.
func cpuHours(h float64) string {
	switch {
	case h < 0.01:
		return fmt.Sprintf("%.2g", h)
	case h < 100:
		return fmt.Sprintf("%.2f", h)
	case h < 1e7:
		return fmt.Sprintf("%.0f", h)
	}
	return fmt.Sprintf("%.3g", h)
}
