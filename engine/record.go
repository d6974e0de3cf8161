package engine

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"

	"bbmx/engine/exactsum"
	"bbmx/engine/wire"
)

// Point is one particle at the horizon: its distance from the origin and unit direction.
type Point struct {
	Radius float64
	Dir    []float64
}

// CheckpointStats are the observables at one checkpoint time s of one replicate.
type CheckpointStats struct {
	Time       float64
	Population uint64    // N_s
	Z          float64   // sphere-averaged derivative martingale Z_s
	W          float64   // sphere-averaged additive martingale W_s(lambda)
	ZDir       []float64 // Z_s(u) on the cell's direction grid
}

// Record is everything kept of one replicate at horizon T.
type Record struct {
	Replicate  uint64
	Dim        int
	Population uint64            // N_T
	Top        []Point           // the largest radii, decreasing; Top[0] is R*_T and its direction
	Hist       []uint64          // counts of R - m_T per bin on [-W, W), last bin [W, inf)
	Checks     []CheckpointStats // one per checkpoint, in time order
}

// MaxRadius is R*_T.
func (r *Record) MaxRadius() float64 { return r.Top[0].Radius }

// partCheck holds one checkpoint's sums exactly, so parts of a replicate merge to the
// same bits whatever the split.
type partCheck struct {
	n    uint64
	z, w exactsum.Acc
	zdir []exactsum.Acc
}

// Part is the contribution of a range of subtrees of one replicate: the subtrees rooted
// at the particles alive at SplitAt with depth-first index in [From, To). The part with
// From = 0 also carries the contributions of the particles that died before SplitAt.
// An unsplit replicate is the single part SplitAt = 0, From = 0, To = Roots = 1.
type Part struct {
	Replicate uint64
	SplitAt   float64
	Roots     uint64 // number of particles alive at SplitAt
	From, To  uint64
	top       topK
	pop       uint64
	hist      []uint64
	checks    []partCheck
}

// Complete reports whether the part covers every subtree of its replicate.
func (p *Part) Complete() bool { return p.From == 0 && p.To == p.Roots }

// Merge adds the adjacent part q (q.From == p.To, same replicate and split) into p.
func (p *Part) Merge(q *Part) error {
	switch {
	case p.Replicate != q.Replicate:
		return fmt.Errorf("cannot merge parts of replicates %d and %d", p.Replicate, q.Replicate)
	case p.SplitAt != q.SplitAt || p.Roots != q.Roots:
		return fmt.Errorf("replicate %d: parts split differently (at %v with %d roots, at %v with %d)",
			p.Replicate, p.SplitAt, p.Roots, q.SplitAt, q.Roots)
	case q.From != p.To:
		return fmt.Errorf("replicate %d: part [%d,%d) does not follow [%d,%d)", p.Replicate, q.From, q.To, p.From, p.To)
	case len(p.hist) != len(q.hist) || len(p.checks) != len(q.checks) || p.top.k != q.top.k:
		return fmt.Errorf("replicate %d: parts were recorded with different settings", p.Replicate)
	}
	// Counts that wrap around can only come from a corrupt part (a simulation cannot
	// reach 2^64 particles); refuse them before changing p.
	wraps := p.pop+q.pop < p.pop
	for i := range p.hist {
		wraps = wraps || p.hist[i]+q.hist[i] < p.hist[i]
	}
	for i := range p.checks {
		wraps = wraps || p.checks[i].n+q.checks[i].n < p.checks[i].n
	}
	if wraps {
		return fmt.Errorf("replicate %d: the parts' particle counts overflow", p.Replicate)
	}
	p.To = q.To
	p.pop += q.pop
	for i := range p.hist {
		p.hist[i] += q.hist[i]
	}
	for i := range p.checks {
		a, b := &p.checks[i], &q.checks[i]
		a.n += b.n
		a.z.Merge(&b.z)
		a.w.Merge(&b.w)
		for j := range a.zdir {
			a.zdir[j].Merge(&b.zdir[j])
		}
	}
	for _, e := range q.top.items {
		p.top.offer(e.r, e.pos)
	}
	return nil
}

// Record turns a complete part into the replicate's record.
func (p *Part) Record(c Cell) (Record, error) {
	if !p.Complete() {
		return Record{}, fmt.Errorf("replicate %d: only subtrees [%d,%d) of %d are present", p.Replicate, p.From, p.To, p.Roots)
	}
	rec := Record{Replicate: p.Replicate, Dim: c.Model.Dim, Population: p.pop, Hist: append([]uint64(nil), p.hist...)}
	for _, e := range p.top.sorted() {
		rec.Top = append(rec.Top, Point{Radius: e.r, Dir: direction(e.pos, e.r)})
	}
	for i, pc := range p.checks {
		cs := CheckpointStats{Time: c.Observe.Checkpoints[i], Population: pc.n, Z: pc.z.Float64(), W: pc.w.Float64()}
		cs.ZDir = make([]float64, len(pc.zdir))
		for j := range pc.zdir {
			cs.ZDir[j] = pc.zdir[j].Float64()
		}
		rec.Checks = append(rec.Checks, cs)
	}
	return rec, nil
}

func direction(pos []float64, r float64) []float64 {
	d := make([]float64, len(pos))
	if r == 0 {
		d[0] = 1
		return d
	}
	for i, x := range pos {
		d[i] = x / r
	}
	return d
}

// Record encoding: a canonical byte form, the same on every machine. SHA-256 of the
// concatenated encodings in replicate order is what proves bit-identity across runs.
const recordFormat = 1

// FormatVersion is the version of the record encoding; stores refuse records of another.
const FormatVersion = recordFormat

// Version identifies what this engine produces: the random stream (high byte) and the
// record encoding (low byte). A worker's must equal its coordinator's.
const Version = StreamVersion<<8 | FormatVersion

func appendF64(b []byte, x float64) []byte {
	return binary.LittleEndian.AppendUint64(b, math.Float64bits(x))
}

// AppendBinary appends the canonical encoding of r.
func (r *Record) AppendBinary(b []byte) []byte {
	b = append(b, recordFormat)
	b = binary.AppendUvarint(b, r.Replicate)
	b = binary.AppendUvarint(b, uint64(r.Dim))
	b = binary.AppendUvarint(b, r.Population)
	b = binary.AppendUvarint(b, uint64(len(r.Top)))
	for _, p := range r.Top {
		b = appendF64(b, p.Radius)
		for _, x := range p.Dir {
			b = appendF64(b, x)
		}
	}
	// Histogram: length, then the run of bins from the first to the last nonzero one.
	b = binary.AppendUvarint(b, uint64(len(r.Hist)))
	first, last := 0, -1
	for i, c := range r.Hist {
		if c != 0 {
			if last < 0 {
				first = i
			}
			last = i
		}
	}
	b = binary.AppendUvarint(b, uint64(first))
	b = binary.AppendUvarint(b, uint64(last-first+1))
	for i := first; i <= last; i++ {
		b = binary.AppendUvarint(b, r.Hist[i])
	}
	b = binary.AppendUvarint(b, uint64(len(r.Checks)))
	for _, c := range r.Checks {
		b = appendF64(b, c.Time)
		b = binary.AppendUvarint(b, c.Population)
		b = appendF64(b, c.Z)
		b = appendF64(b, c.W)
		b = binary.AppendUvarint(b, uint64(len(c.ZDir)))
		for _, z := range c.ZDir {
			b = appendF64(b, z)
		}
	}
	return b
}

// ErrCorruptRecord is returned for bytes that are not a valid record encoding.
var ErrCorruptRecord = errors.New("corrupt replicate record")

// DecodeRecord reads one record encoding from b and returns the rest of b.
func DecodeRecord(b []byte) (Record, []byte, error) {
	var rec Record
	rest, err := DecodeRecordInto(&rec, b)
	if err != nil {
		return Record{}, nil, err
	}
	return rec, rest, nil
}

// DecodeRecordInto is DecodeRecord into *rec, reusing the storage of rec's slices (its
// points' directions, histogram and checkpoints) where it is large enough: for callers
// that decode many records one after another. Whatever rec held is overwritten; on error
// its contents are unspecified.
func DecodeRecordInto(rec *Record, b []byte) ([]byte, error) {
	if len(b) == 0 || b[0] != recordFormat {
		return nil, fmt.Errorf("%w: unknown format", ErrCorruptRecord)
	}
	r := wire.NewReader(b[1:], ErrCorruptRecord)
	rec.Replicate = r.Uvarint(math.MaxUint64)
	rec.Dim = int(r.Uvarint(64))
	rec.Population = r.Uvarint(math.MaxUint64)
	nTop := r.Uvarint(MaxTopK)
	if r.Err == nil && rec.Dim < 1 {
		r.Fail()
	}
	var dirs []float64 // fresh storage for directions, when the old cannot be reused
	if r.Err == nil && uint64(cap(rec.Top)) < nTop {
		// Capped by what the remaining bytes can hold, so a corrupt count cannot make it large.
		n := min(nTop, uint64(len(r.B))/uint64(8*(rec.Dim+1))+1)
		rec.Top = make([]Point, 0, n)
	}
	rec.Top = rec.Top[:0]
	for i := uint64(0); i < nTop && r.Err == nil; i++ {
		var dir []float64
		if len(rec.Top) < cap(rec.Top) {
			if old := rec.Top[:len(rec.Top)+1][len(rec.Top)].Dir; cap(old) >= rec.Dim {
				dir = old[:rec.Dim]
			}
		}
		if dir == nil {
			if len(dirs)+rec.Dim > cap(dirs) {
				n := min(nTop-i, uint64(len(r.B))/uint64(8*(rec.Dim+1))+1)
				dirs = make([]float64, 0, n*uint64(rec.Dim))
			}
			dirs = dirs[:len(dirs)+rec.Dim]
			dir = dirs[len(dirs)-rec.Dim : len(dirs) : len(dirs)]
		}
		p := Point{Radius: r.F64(), Dir: dir}
		for j := range p.Dir {
			p.Dir[j] = r.F64()
		}
		rec.Top = append(rec.Top, p)
	}
	nb := r.Uvarint(MaxBins + 1)
	first := r.Uvarint(nb)
	run := r.Uvarint(nb - first)
	if r.Err == nil {
		if uint64(cap(rec.Hist)) >= nb {
			rec.Hist = rec.Hist[:nb]
			clear(rec.Hist)
		} else {
			rec.Hist = make([]uint64, nb)
		}
		for i := first; i < first+run && r.Err == nil; i++ {
			rec.Hist[i] = r.Uvarint(math.MaxUint64)
		}
	}
	nc := r.Uvarint(MaxCheckpoints)
	checks := rec.Checks[:0]
	for i := uint64(0); i < nc && r.Err == nil; i++ {
		var zdir []float64
		if len(checks) < cap(checks) {
			zdir = checks[:len(checks)+1][len(checks)].ZDir[:0]
		}
		c := CheckpointStats{Time: r.F64(), Population: r.Uvarint(math.MaxUint64), Z: r.F64(), W: r.F64()}
		nd := r.Uvarint(MaxDirections)
		if r.Err == nil && nd > 0 && uint64(cap(zdir)) < nd {
			zdir = make([]float64, 0, min(nd, uint64(len(r.B))/8+1))
		}
		for j := uint64(0); j < nd && r.Err == nil; j++ {
			zdir = append(zdir, r.F64())
		}
		if nd > 0 {
			c.ZDir = zdir
		}
		checks = append(checks, c)
	}
	rec.Checks = checks
	if nc == 0 {
		rec.Checks = nil
	}
	if r.Err != nil {
		return nil, r.Err
	}
	if len(rec.Top) == 0 {
		return nil, fmt.Errorf("%w: no particles", ErrCorruptRecord)
	}
	return r.B, nil
}
