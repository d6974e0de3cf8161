package engine

// Figures of the cost model shared by every command that estimates work before doing it
// (`bbmx sim`, `bbmx plan`, the coordinator's task sizing). A replicate to horizon t has
// about Model.ExpectedNodes(t) tree nodes.

// AbsurdNodes is the total node count above which a run is refused unless forced:
// about 170 CPU-hours at NominalNodeSeconds.
const AbsurdNodes = 1e13

// NominalNodeSeconds is a deliberately round per-node cost used for estimates shown
// before a run and for task sizing, on the safe side of the measured figures in
// BENCHMARKS.md (about 25-40, 30-50 and 35-55 ns per node in d = 1, 2, 3 on the shared
// development machines, depending on their load).
const NominalNodeSeconds = 60e-9

// AbsurdSweepNodes is the same limit for a sweep run on a cluster (`bbmx plan`, the
// coordinator): about 17,000 CPU-hours at NominalNodeSeconds, more than one sweep of a
// research group's allocation usually holds. Sweeps above it need --force; since the
// cost grows like e^{g T}, a mistyped horizon lands far above it.
const AbsurdSweepNodes = 1e15

// NominalReplicateSeconds is the cost model's CPU time of one replicate of cell c: its
// expected nodes at NominalNodeSeconds, plus the fixed work of a replicate (its record)
// and of each checkpoint (the exact sums of Z_s, W_s and Z_s(u) on the direction grid),
// which dominate at short horizons. The fixed parts are round figures from
// BENCHMARKS.md ("per-replicate overhead").
func NominalReplicateSeconds(c Cell) float64 {
	c = c.WithDefaults()
	perCheckpoint := 2e-6 + float64(1e-6*float64(c.NumDirections()))
	return float64(c.Model.ExpectedNodes(c.Horizon)*NominalNodeSeconds) + 5e-6 + float64(perCheckpoint*float64(len(c.Observe.Checkpoints)))
}

// RecordBytes estimates the size of one replicate record of cell c, for bounding the
// size of a task's result.
func RecordBytes(c Cell) int {
	c = c.WithDefaults()
	checks := len(c.Observe.Checkpoints) * (32 + 8*c.NumDirections())
	return 32 + c.Observe.TopK*8*(c.Model.Dim+1) + 2*c.Bins() + checks
}

// MaxTaskResultBytes bounds one task's records; tasks of cheap cells get fewer
// replicates so their result fits well within the transport's message limit.
const MaxTaskResultBytes = 8 << 20
