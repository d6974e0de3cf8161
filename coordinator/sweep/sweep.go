// Package sweep reads sweep files (TOML), checks them, and gives each sweep a canonical
// form whose SHA-256 is the sweep's identity.
//
// A sweep names a model (sigma, beta, k shared by every cell; the dimension varies over
// the grid), a grid of dimensions and horizons, the replicates wanted per cell (one
// default, optionally overridden per (d, T)), the seed, the observables' settings and a
// target wall time per task. Cells are the points of the grid; a cell's identity is its
// ID ("d2-T8"), the same string `bbmx sim --store` uses.
//
// API CONTRACT (used by the coordinator; keep these names and meanings):
//
//	Load(path) / Parse(data, name) -> *Sweep, error   errors name the key and its line
//	(*Sweep).Cells() []CellSpec                         grid order: dims outer, horizons inner
//	(*Sweep).Canonical() []byte                         canonical JSON, stable across versions
//	(*Sweep).Hash() [32]byte                            SHA-256 of Canonical()
//	(*Sweep).CheckGrowth(old *Sweep) error              nil if s may continue a store made by old
//	(*Sweep).Estimate() Estimate                        cost model totals
//	(*Sweep).Size(CellSpec) Sizing                      how a cell is cut into tasks
//	(*Sweep).TaskCount(CellSpec) uint64                 tasks the whole cell needs
//	Decode(canonical []byte) (*Sweep, error)            inverse of Canonical (for stores)
package sweep

import (
	"bbmx/engine"
)

// Sweep is a parsed, validated sweep file.
type Sweep struct {
	Name        string         // a free label for humans (not part of the identity checks)
	Seed        uint64         // the sweep seed: replicate r of cell c is a pure function of (Seed, c, r)
	Sigma       float64        // default 1
	Beta        float64        // default 1
	Children    int            // default 2
	Dims        []int          // increasing, distinct
	Horizons    []float64      // increasing, distinct
	Replicates  uint64         // default replicates per cell
	Overrides   []Override     // replicates for particular (d, T) cells
	Observe     engine.Observe // shared settings; each cell keeps only the checkpoints <= its horizon
	TaskSeconds float64        // target wall time of one task on one core (default 60)
	SplitAt     float64        // time s0 at which replicates too big for one task are split (0: automatic)
	KeepRecords bool           // store per-replicate records as well as sketches (default true)
}

// Override sets the replicate count of one (d, T) cell.
type Override struct {
	Dim        int
	Horizon    float64
	Replicates uint64
}

// CellSpec is one cell of the grid.
type CellSpec struct {
	ID         string      // "d<dim>-T<horizon %g>"
	Cell       engine.Cell // WithDefaults applied; valid
	Replicates uint64
}

// Estimate is the cost model's view of a sweep (statistical estimate of the work).
type Estimate struct {
	Nodes      float64 // expected tree nodes in all, sum over cells of replicates * ExpectedNodes(T)
	CPUSeconds float64 // Nodes * the nominal cost per node
	Absurd     bool    // above the limit that needs --force
}
