package coordinator

import (
	"encoding/json"
	"fmt"
	"hash/fnv"
	"sort"

	"bbmx/coordinator/sweep"
	"bbmx/engine"
	"bbmx/results"
)

// taskState is where a task is in its life: pending → leased → done, or parked after
// too many failed attempts. A parked task can still be completed by a late result.
type taskState uint8

const (
	statePending taskState = iota
	stateLeased
	stateCommitting
	stateDone
	stateParked
)

// task is a unit of work: replicates [from, to) of a cell, or (split) the subtrees
// [rootFrom, rootTo) of replicate from, rooted at the particles alive at splitAt.
type task struct {
	id       string
	cell     *cellState
	from, to uint64
	split    bool
	splitAt  float64
	roots    uint64
	rootFrom uint64
	rootTo   uint64
	unit     uint64 // shard unit (a range task, or all parts of one replicate); see unitOf

	state    taskState
	attempts uint32 // leases handed out, including the current one
	failures uint32 // failed attempts (errors, rejected results, expired leases)
	lastErr  string
	worker   string
	handedBy string // the worker that last handed this task back (it may not adopt it again)
	deadline int64  // unix ms
	progress uint64
	digest   [32]byte
}

// cellState is one cell's plan and progress.
type cellState struct {
	spec     sweep.CellSpec
	cellJSON []byte
	done     uint64 // replicates committed for the sweep's seed
	share    uint64 // replicates this coordinator is to hold when done (a shard's share, or all)
	tasks    []*task
	// parts holds, per split replicate, the parts received so far (committed or being
	// committed), keyed by rootFrom.
	parts map[uint64]map[uint64]*engine.Part
	// dropped counts, per split replicate, the times its parts failed to assemble and
	// were all dropped (kept in the task records across restarts). A part validated
	// before the latest drop is stale: it is dropped too when its commit returns.
	dropped map[uint64]uint32
}

// unitOf numbers a cell's j-th shard unit so that shard (unit mod n) spreads every cell
// over the shards; it depends only on the cell id and j, never on what is done.
func unitOf(cellID string, j uint64) uint64 {
	h := fnv.New32a()
	h.Write([]byte(cellID))
	return uint64(h.Sum32()) + j
}

// perTask is the number of replicates per range task (the sweep's sizing already
// bounds a task's records to engine.MaxTaskResultBytes).
func perTask(sz sweep.Sizing) uint64 { return max(sz.PerTask, 1) }

// missing returns the replicate ranges of [0, want) not in have (sorted, disjoint
// ranges of one seed).
func missing(have []results.Range, seed, want uint64) [][2]uint64 {
	var out [][2]uint64
	next := uint64(0)
	for _, r := range have {
		if r.Seed != seed || r.To <= next {
			continue
		}
		if r.From > next {
			out = append(out, [2]uint64{next, min(r.From, want)})
		}
		next = r.To
		if next >= want {
			break
		}
	}
	if next < want {
		out = append(out, [2]uint64{next, want})
	}
	// drop empty ranges (when a stored range starts beyond want)
	j := 0
	for _, r := range out {
		if r[1] > r[0] {
			out[j] = r
			j++
		}
	}
	return out[:j]
}

// cut splits [from, to) at multiples of n, so the same replicates always form the same
// tasks whatever was already done (task ids stay stable across restarts).
func cut(from, to, n uint64) [][2]uint64 {
	var out [][2]uint64
	for a := from; a < to; {
		b := min((a/n+1)*n, to)
		out = append(out, [2]uint64{a, b})
		a = b
	}
	return out
}

// planCell builds the tasks of one cell that are not done yet. storedParts maps a split
// replicate to the parts already committed (rootFrom → encoding).
func planCell(cs sweep.CellSpec, sz sweep.Sizing, seed uint64, have []results.Range,
	storedParts map[uint64]map[uint64][]byte) (*cellState, error) {
	cj, err := json.Marshal(cs.Cell)
	if err != nil {
		return nil, err
	}
	c := &cellState{spec: cs, cellJSON: cj, parts: map[uint64]map[uint64]*engine.Part{}, dropped: map[uint64]uint32{}}
	for _, r := range have {
		if r.Seed == seed {
			c.done += min(r.To, cs.Replicates) - min(r.From, cs.Replicates)
		}
	}
	todo := missing(have, seed, cs.Replicates)
	if sz.Parts <= 1 {
		n := perTask(sz)
		for _, m := range todo {
			for _, r := range cut(m[0], m[1], n) {
				c.tasks = append(c.tasks, &task{id: fmt.Sprintf("%s/r%d-%d", cs.ID, r[0], r[1]), cell: c,
					from: r[0], to: r[1], unit: unitOf(cs.ID, r[0]/n)})
			}
		}
		return c, nil
	}
	for _, m := range todo {
		for rep := m[0]; rep < m[1]; rep++ {
			roots, err := engine.CountRoots(cs.Cell, seed, rep, sz.SplitAt)
			if err != nil {
				return nil, fmt.Errorf("cell %s replicate %d: %w", cs.ID, rep, err)
			}
			// Stored parts count only where they are exactly one of this plan's part
			// tasks: a sweep resumed with another split time or task size cuts the
			// replicate differently, and a part of the old cut must neither mark a new
			// task done nor be merged with the new parts. Such parts are left unused (the
			// replicate's stored parts are deleted when it completes).
			got := storedParts[rep]
			parts := uint64(sz.Parts)
			var last *task
			allStored := true
			for i := uint64(0); i < parts; i++ {
				a, b := roots*i/parts, roots*(i+1)/parts
				if a == b {
					continue
				}
				t := &task{id: fmt.Sprintf("%s/r%d/s%g/p%d-%d", cs.ID, rep, sz.SplitAt, a, b), cell: c,
					from: rep, to: rep + 1, split: true, splitAt: sz.SplitAt, roots: roots, rootFrom: a, rootTo: b, unit: unitOf(cs.ID, rep)}
				if enc, ok := got[a]; ok {
					p, err := engine.DecodePart(cs.Cell, enc)
					if err != nil {
						return nil, fmt.Errorf("cell %s replicate %d: stored part: %w", cs.ID, rep, err)
					}
					if p.Replicate == rep && p.SplitAt == sz.SplitAt && p.Roots == roots && p.From == a && p.To == b {
						if c.parts[rep] == nil {
							c.parts[rep] = map[uint64]*engine.Part{}
						}
						c.parts[rep][a] = p
						t.state = stateDone
					}
				}
				allStored = allStored && t.state == stateDone
				last = t
				c.tasks = append(c.tasks, t)
			}
			// Stored parts that cover the whole replicate were never assembled (the
			// commit that assembles them deletes them); only a failed store write while
			// dropping parts that did not assemble can leave them. Computing the last
			// part again makes its arrival assemble and check them; else the replicate
			// would silently never be done.
			if last != nil && allStored {
				last.state = statePending
				delete(c.parts[rep], last.rootFrom)
			}
		}
	}
	return c, nil
}

// sortedKeys returns a map's uint64 keys in increasing order.
func sortedKeys[V any](m map[uint64]V) []uint64 {
	ks := make([]uint64, 0, len(m))
	for k := range m {
		ks = append(ks, k)
	}
	sort.Slice(ks, func(i, j int) bool { return ks[i] < ks[j] })
	return ks
}
