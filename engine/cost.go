package engine

// Figures of the cost model shared by every command that estimates work before doing it
// (`bbmx sim`, `bbmx plan`, the coordinator's task sizing). A replicate to horizon t has
// about Model.ExpectedNodes(t) tree nodes.

// AbsurdNodes is the total node count above which a run is refused unless forced:
// about 100 CPU-hours at the engine's measured tens of nanoseconds per node.
const AbsurdNodes = 1e13

// NominalNodeSeconds is a deliberately round per-node cost used for estimates shown
// before a run; BENCHMARKS.md has the measured figures.
const NominalNodeSeconds = 40e-9

// AbsurdSweepNodes is the same limit for a sweep run on a cluster (`bbmx plan`, the
// coordinator): about 11,000 CPU-hours at NominalNodeSeconds, more than one sweep of a
// research group's allocation usually holds. Sweeps above it need --force; since the
// cost grows like e^{g T}, a mistyped horizon lands far above it.
const AbsurdSweepNodes = 1e15
