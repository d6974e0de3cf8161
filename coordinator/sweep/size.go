package sweep

import (
	"math"

	"bbmx/engine"
)

// MaxParts bounds the subtree tasks one replicate is cut into.
const MaxParts = 65536

// MaxTasks bounds the tasks of a whole sweep: the coordinator plans every task up front
// and keeps it in memory (about 300 bytes each, so 2.4 GB at the bound), so a cheap
// sweep with a billion replicates of large records would otherwise exhaust memory
// before running anything. No sweep under the absurdity limit needs more, unless its
// tasks are far below task_seconds because of their records' size.
const MaxTasks = 8_000_000

// partsOversample is how many subtrees, on average, each part of a split replicate gets:
// the automatic split time makes the mean population at s0 this many times the number
// of parts, so that parts even out although the subtrees' sizes vary a lot.
const partsOversample = 8

// Sizing is how a cell is cut into tasks.
type Sizing struct {
	PerTask uint64  // replicates per task (>= 1) when Parts == 1; 1 when split
	Parts   int     // > 1: each replicate is split into this many subtree tasks at SplitAt
	SplitAt float64 // split time s0 (0 when Parts == 1)
}

// replicateSeconds is the cost model's CPU time of one replicate of c.
func replicateSeconds(c CellSpec) float64 { return engine.NominalReplicateSeconds(c.Cell) }

// Size cuts a cell into tasks of about TaskSeconds of one core each, by the cost model
// (engine.NominalReplicateSeconds: the expected nodes at the nominal cost per node, plus
// the fixed work of a replicate and of its checkpoints):
//
//   - A replicate that fits in a task: PerTask = max(1, floor(TaskSeconds / cost)) whole
//     replicates per task, at most engine.MaxTaskResultBytes of records, Parts = 1. It
//     does not depend on the cell's replicate count, so growing a sweep keeps task
//     boundaries where they were.
//   - A bigger one: Parts = ceil(cost / TaskSeconds), at most MaxParts; each replicate
//     is cut at time SplitAt into subtrees rooted at the particles then alive, shared
//     out among Parts tasks. SplitAt is the sweep's split_at if set; otherwise the
//     smallest s0 with mean population e^{g s0} >= 8 Parts (about eight subtrees a
//     part), but at most T/2.
//
// Any split gives the same records bit for bit, so sizing never changes results.
func (s *Sweep) Size(c CellSpec) Sizing {
	cost := replicateSeconds(c)
	if cost <= s.TaskSeconds {
		per := math.Floor(s.TaskSeconds / cost)
		n := uint64(1)
		if per > 1 {
			n = uint64(min(per, 1<<62))
		}
		// A task's records must fit in one result message.
		n = min(n, uint64(max(1, engine.MaxTaskResultBytes/engine.RecordBytes(c.Cell))))
		return Sizing{PerTask: n, Parts: 1}
	}
	parts := MaxParts
	if p := math.Ceil(cost / s.TaskSeconds); p < MaxParts {
		parts = max(2, int(p))
	}
	s0 := s.SplitAt
	if s0 == 0 {
		g := c.Cell.Model.Growth()
		target := float64(partsOversample * parts)
		s0 = math.Log(target) / g
		if math.Exp(g*s0) < target {
			s0 = math.Nextafter(s0, math.Inf(1))
		}
		s0 = min(s0, c.Cell.Horizon/2)
	}
	return Sizing{PerTask: 1, Parts: parts, SplitAt: s0}
}

// checkTasks refuses a sweep that is cut into more than MaxTasks tasks, naming the
// replicate count of its largest cell (written as overrides[i], or the grid's default
// when i < 0). It depends on the cost model, so only Parse runs it: a stored sweep stays
// readable whatever a later cost model says.
func (s *Sweep) checkTasks(overrideIndex func(d int, t float64) int) *fieldError {
	var total, most uint64
	var big CellSpec
	for _, c := range s.Cells() {
		n := s.TaskCount(c)
		total += n // at most MaxCells × MaxReplicates × MaxParts: no overflow
		if n > most {
			most, big = n, c
		}
	}
	if total <= MaxTasks {
		return nil
	}
	key := "grid.replicates"
	if i := overrideIndex(big.Cell.Model.Dim, big.Cell.Horizon); i >= 0 {
		key = joinKey(indexKey("grid.override", i), "replicates")
	}
	e := s.Estimate()
	return errAt(key, "the sweep is cut into %d tasks (cell %s alone into %d; about %.3g tree nodes, %.3g CPU-hours by the cost model); the coordinator holds every task in memory, at most %d: ask for fewer replicates, a longer task_seconds, or a smaller observe.top_k (a task holds at most %d MiB of records)",
		total, big.ID, most, e.Nodes, e.CPUSeconds/3600, MaxTasks, engine.MaxTaskResultBytes>>20)
}

// checkSplit refuses a split_at so late that the tree above it costs more than a
// quarter of a task: every part task walks that tree again to find its subtrees, and
// planning walks it once per replicate to count them, so a split near the horizon made
// planning run for hours and every part cost nearly the whole replicate. Like
// checkTasks it depends on the cost model and only Parse runs it.
func (s *Sweep) checkSplit() *fieldError {
	if s.SplitAt == 0 {
		return nil // automatic: at most T/2, with about eight subtrees a part
	}
	for _, c := range s.Cells() {
		z := s.Size(c)
		if z.Parts <= 1 {
			continue // the cell is not split
		}
		m := c.Cell.Model
		top := float64(m.ExpectedNodes(z.SplitAt) * engine.NodeSeconds(m.Dim))
		if limit := s.TaskSeconds / 4; top > limit {
			latest := math.Log(limit/engine.NodeSeconds(m.Dim)/(float64(m.Children)/float64(m.Children-1))) / m.Growth()
			return errAt("split_at", "split_at %v is too late for cell %s: each of its %d parts first walks the tree above the split, about %.3g nodes (%.3g s by the cost model), more than a quarter of task_seconds %v; choose split_at at most %.3g, or 0 for automatic",
				s.SplitAt, c.ID, z.Parts, m.ExpectedNodes(z.SplitAt), top, s.TaskSeconds, math.Max(latest, 0))
		}
	}
	return nil
}

// TaskCount is the number of tasks the whole cell needs.
func (s *Sweep) TaskCount(c CellSpec) uint64 { return s.Size(c).Tasks(c.Replicates) }

// Tasks is the number of tasks that this sizing cuts the given replicates into.
func (z Sizing) Tasks(replicates uint64) uint64 {
	if z.Parts > 1 {
		return replicates * uint64(z.Parts)
	}
	return (replicates + z.PerTask - 1) / z.PerTask
}

// Estimate totals the cost model over the cells. The figures are estimates: the node
// count of a replicate is random (its mean is Model.ExpectedNodes) and the time per node
// is the nominal engine.NodeSeconds, not a measurement on this machine. Absurd is
// Nodes > engine.AbsurdSweepNodes, the cluster-sized limit (engine.AbsurdNodes, the one
// for a run on one machine, is a hundred times lower), or CPUSeconds above what that
// many nodes cost at NominalNodeSeconds: checkpoints near the horizon can cost ten times
// the walk (more with many directions), and a node count alone would not see it.
func (s *Sweep) Estimate() Estimate {
	var e Estimate
	for _, c := range s.Cells() {
		e.Nodes += float64(c.Replicates) * c.Cell.Model.ExpectedNodes(c.Cell.Horizon)
		e.CPUSeconds += float64(c.Replicates) * replicateSeconds(c)
	}
	e.Absurd = !(e.Nodes <= engine.AbsurdSweepNodes) || !(e.CPUSeconds <= AbsurdSweepSeconds)
	return e
}

// AbsurdSweepSeconds is the CPU time above which a sweep is absurd whatever its node
// count: engine.AbsurdSweepNodes at the nominal cost per node.
const AbsurdSweepSeconds = engine.AbsurdSweepNodes * engine.NominalNodeSeconds
