package engine

// Figures of the cost model shared by every command that estimates work before doing it
// (`bbmx sim`, `bbmx plan`, the coordinator's task sizing). A replicate to horizon t has
// about Model.ExpectedNodes(t) tree nodes.

// AbsurdNodes is the total node count above which a run is refused unless forced:
// about 170 CPU-hours at NominalNodeSeconds.
const AbsurdNodes = 1e13

// NominalNodeSeconds is a deliberately round per-node cost in d <= 3, used for estimates
// shown before a run and for task sizing, on the safe side of the measured figures in
// BENCHMARKS.md (about 25-45 ns per node in d = 1, 2, 3 on the shared development
// machines, depending on their load). NodeSeconds extends it to every dimension.
const NominalNodeSeconds = 60e-9

// NodeSeconds is the cost model's time per tree node in dimension d: NominalNodeSeconds
// up to d = 3 (the walk with positions in registers), then 85 ns at d = 4 plus 13 ns per
// further coordinate (the general walk draws, adds and squares one normal per
// coordinate). Measured: about 1.4, 1.7, 2.5, 4.1 and 8.1-9.1 times the d = 3 cost at
// d = 4, 6, 10, 20 and 40 (BENCHMARKS.md, "cost per node by dimension"); this keeps at
// least the margin over them that NominalNodeSeconds has at d <= 3.
func NodeSeconds(d int) float64 {
	if d <= 3 {
		return NominalNodeSeconds
	}
	return 85e-9 + float64(float64(d-4)*13e-9)
}

// AbsurdSweepNodes is the same limit for a sweep run on a cluster (`bbmx plan`, the
// coordinator): about 17,000 CPU-hours at NominalNodeSeconds, more than one sweep of a
// research group's allocation usually holds. Sweeps above it need --force; since the
// cost grows like e^{g T}, a mistyped horizon lands far above it.
const AbsurdSweepNodes = 1e15

// NominalReplicateSeconds is the cost model's CPU time of one replicate of cell c: its
// expected nodes at NodeSeconds, a fixed 5 µs for its record, and for each checkpoint s
// a fixed 2 µs plus CrossingSeconds for each of the E[N_s] = e^{g s} particles alive at
// s. A checkpoint near the horizon can cost several times the walk itself: every particle
// crossing it adds its terms of Z_s, W_s and of Z_s(u) on each direction of the grid.
func NominalReplicateSeconds(c Cell) float64 {
	c = c.WithDefaults()
	sec := float64(c.Model.ExpectedNodes(c.Horizon)*NodeSeconds(c.Model.Dim)) + 5e-6
	crossing := CrossingSeconds(c.Model.Dim, c.NumDirections())
	for _, s := range c.Observe.Checkpoints {
		sec += 2e-6 + float64(c.Model.MeanPopulation(s)*crossing)
	}
	return sec
}

// CrossingSeconds is the cost model's time for one particle crossing a checkpoint in
// dimension d with a grid of dirs directions: 0.5 µs for its Z_s and W_s terms (three
// Φ_d and two exponentials), and per direction 50 ns plus 5 ns per coordinate (a dot
// product, an exponential and an exact sum). On the safe side of the measured figures
// (BENCHMARKS.md, "cost of a checkpoint crossing": 0.3-0.4 µs and 27-49 ns per
// direction in d = 2, 3, 6), by the margin NominalNodeSeconds has.
func CrossingSeconds(d, dirs int) float64 {
	return 0.5e-6 + float64(float64(dirs)*(50e-9+float64(float64(d)*5e-9)))
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
