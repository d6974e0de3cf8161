// Package results holds what a sweep produces: per-cell sketches that merge exactly, the
// bbolt store they live in (one file per sweep; its schema is written down in store.go),
// merging of stores from several runs, the audit that re-simulates stored replicates, and
// export to CSV, JSON and Parquet.
//
// A Sketch summarises a set of replicates of one cell with integer counts on fixed grids
// and exact sums (engine/exactsum), so merging task sketches in any order and grouping
// gives byte-identical results. Each sketch remembers the replicate ranges it holds, per
// seed, so a range can never be counted twice.
package results

import (
	"encoding/binary"
	"fmt"
	"math"
	"math/bits"
	"slices"
	"sort"

	"bbmx/engine"
	"bbmx/engine/exactsum"
	"bbmx/engine/wire"
)

// The fine grid for R*_T - m_T: bins of ShiftBin on [ShiftLo, ShiftHi), plus an underflow
// and an overflow bin. Quantiles are resolved to the bin width.
const (
	ShiftLo  = -20.0
	ShiftHi  = 20.0
	ShiftBin = 0.01
	nShift   = 4000 // (ShiftHi - ShiftLo) / ShiftBin
)

// Range is a half-open range of replicate numbers run with one seed.
type Range struct {
	Seed     uint64
	From, To uint64
}

// u128 is an unsigned 128-bit sum (for sums of squared populations).
type u128 struct{ hi, lo uint64 }

func (a *u128) add(x u128) {
	var c uint64
	a.lo, c = bits.Add64(a.lo, x.lo, 0)
	a.hi, _ = bits.Add64(a.hi, x.hi, c)
}

func square(n uint64) u128 { hi, lo := bits.Mul64(n, n); return u128{hi, lo} }

// CheckSketch sums one checkpoint's observables over replicates.
type CheckSketch struct {
	Time         float64
	Population   uint64
	Z, Z2, W, W2 exactsum.Acc
	NonPositiveZ uint64 // replicates with Z_s <= 0
}

// Sketch summarises the replicates of one cell.
type Sketch struct {
	Ranges     []Range         // sorted, disjoint
	N          uint64          // replicates held
	Shift      [4]exactsum.Acc // sums of x, x^2, x^3, x^4 for x = R*_T - m_T
	ShiftHist  []uint64        // nShift + 2 bins: underflow, grid, overflow
	Intensity  []uint64        // summed extremal histograms of R - m_T
	Population uint64          // sum of N_T
	Pop2       u128            // sum of N_T^2
	Checks     []CheckSketch
}

// NewSketch returns an empty sketch for a cell.
func NewSketch(c engine.Cell) *Sketch {
	c = c.WithDefaults()
	s := &Sketch{ShiftHist: make([]uint64, nShift+2), Intensity: make([]uint64, c.Bins())}
	for _, t := range c.Observe.Checkpoints {
		s.Checks = append(s.Checks, CheckSketch{Time: t})
	}
	return s
}

// ShiftBinIndex is the fine-grid bin of x = R*_T - m_T.
func ShiftBinIndex(x float64) int {
	switch {
	case x < ShiftLo:
		return 0
	case x >= ShiftHi:
		return nShift + 1
	}
	return 1 + min(int((x-ShiftLo)/ShiftBin), nShift-1)
}

// AddRecords adds the records of replicates [from, to) run with seed; recs must be those
// replicates in order. On error the sketch is unchanged.
func (s *Sketch) AddRecords(c engine.Cell, seed, from uint64, recs []engine.Record) error {
	c = c.WithDefaults()
	for i := range recs {
		rec := &recs[i]
		if rec.Replicate != from+uint64(i) {
			return fmt.Errorf("record %d is replicate %d, want %d", i, rec.Replicate, from+uint64(i))
		}
		if len(rec.Hist) != len(s.Intensity) || len(rec.Checks) != len(s.Checks) {
			return fmt.Errorf("replicate %d was recorded with different settings", rec.Replicate)
		}
		if len(rec.Top) == 0 {
			return fmt.Errorf("replicate %d has no particles", rec.Replicate)
		}
		if err := checkFinite(rec); err != nil {
			return err
		}
	}
	r := Range{Seed: seed, From: from, To: from + uint64(len(recs))}
	if err := s.addRange(r); err != nil {
		return err
	}
	centre := c.Model.Centring(c.Horizon)
	for i := range recs {
		rec := &recs[i]
		x := rec.MaxRadius() - centre
		p := x
		for k := range s.Shift {
			s.Shift[k].Add(p)
			p *= x
		}
		s.ShiftHist[ShiftBinIndex(x)]++
		for j, v := range rec.Hist {
			s.Intensity[j] += v
		}
		s.Population += rec.Population
		s.Pop2.add(square(rec.Population))
		for j := range s.Checks {
			cs, rc := &s.Checks[j], &rec.Checks[j]
			cs.Population += rc.Population
			cs.Z.Add(rc.Z)
			cs.Z2.Add(rc.Z * rc.Z)
			cs.W.Add(rc.W)
			cs.W2.Add(rc.W * rc.W)
			if rc.Z <= 0 {
				cs.NonPositiveZ++
			}
		}
		s.N++
	}
	return nil
}

// checkFinite returns an error naming the first NaN or infinite number in rec. The
// engine never records one, so it means a damaged record; let in, it would index no
// histogram bin, poison exact sums and make JSON exports fail.
func checkFinite(rec *engine.Record) error {
	bad := func(x float64) bool { return math.IsNaN(x) || math.IsInf(x, 0) }
	for i, p := range rec.Top {
		if bad(p.Radius) || slices.ContainsFunc(p.Dir, bad) {
			return fmt.Errorf("replicate %d: particle %d of the top list has a non-finite radius or direction", rec.Replicate, i)
		}
	}
	for j, ck := range rec.Checks {
		if bad(ck.Time) || bad(ck.Z) || bad(ck.W) || slices.ContainsFunc(ck.ZDir, bad) {
			return fmt.Errorf("replicate %d: checkpoint %d holds a non-finite value", rec.Replicate, j)
		}
	}
	return nil
}

// addRange inserts r into the sorted, disjoint range list, joining neighbours.
func (s *Sketch) addRange(r Range) error {
	if r.To <= r.From {
		return fmt.Errorf("empty replicate range [%d,%d)", r.From, r.To)
	}
	for _, q := range s.Ranges {
		if q.Seed == r.Seed && r.From < q.To && q.From < r.To {
			return fmt.Errorf("replicates [%d,%d) of seed %d overlap [%d,%d) already held", r.From, r.To, r.Seed, q.From, q.To)
		}
	}
	s.Ranges = append(s.Ranges, r)
	sort.Slice(s.Ranges, func(i, j int) bool {
		a, b := s.Ranges[i], s.Ranges[j]
		if a.Seed != b.Seed {
			return a.Seed < b.Seed
		}
		return a.From < b.From
	})
	out := s.Ranges[:1]
	for _, q := range s.Ranges[1:] {
		last := &out[len(out)-1]
		if q.Seed == last.Seed && q.From == last.To {
			last.To = q.To
			continue
		}
		out = append(out, q)
	}
	s.Ranges = out
	return nil
}

// Merge adds o into s. The replicate ranges must be disjoint; the result does not depend
// on the order or grouping of merges.
func (s *Sketch) Merge(o *Sketch) error {
	if len(o.ShiftHist) != len(s.ShiftHist) || len(o.Intensity) != len(s.Intensity) || len(o.Checks) != len(s.Checks) {
		return fmt.Errorf("sketches of different settings cannot merge")
	}
	for j := range s.Checks {
		if s.Checks[j].Time != o.Checks[j].Time {
			return fmt.Errorf("sketches have different checkpoints (%v vs %v)", s.Checks[j].Time, o.Checks[j].Time)
		}
	}
	saved := append([]Range(nil), s.Ranges...)
	for _, r := range o.Ranges {
		if err := s.addRange(r); err != nil {
			s.Ranges = saved
			return err
		}
	}
	s.N += o.N
	for k := range s.Shift {
		s.Shift[k].Merge(&o.Shift[k])
	}
	for j := range s.ShiftHist {
		s.ShiftHist[j] += o.ShiftHist[j]
	}
	for j := range s.Intensity {
		s.Intensity[j] += o.Intensity[j]
	}
	s.Population += o.Population
	s.Pop2.add(o.Pop2)
	for j := range s.Checks {
		a, b := &s.Checks[j], &o.Checks[j]
		a.Population += b.Population
		a.Z.Merge(&b.Z)
		a.Z2.Merge(&b.Z2)
		a.W.Merge(&b.W)
		a.W2.Merge(&b.W2)
		a.NonPositiveZ += b.NonPositiveZ
	}
	return nil
}

// MeanShift returns the mean of R*_T - m_T and its standard error; the error is 0 for a
// single replicate (summaries and exports need a number there: JSON has no NaN).
func (s *Sketch) MeanShift() (mean, se float64) {
	mean, _, se, _ = s.ShiftMoments()
	if s.N == 1 {
		se = 0
	}
	return mean, se
}

// ShiftMoments returns the mean and sd of R*_T - m_T from the sketch's exact power sums,
// with their standard errors s/sqrt n and sqrt((m4 - m2^2)/(4 m2 n)) (delta method);
// NaN for what the replicates cannot give (no replicate, or one for the sd).
func (s *Sketch) ShiftMoments() (mean, sd, seMean, seSD float64) {
	nan := math.NaN()
	if s.N == 0 {
		return nan, nan, nan, nan
	}
	n := float64(s.N)
	mean = s.Shift[0].Float64() / n
	if s.N == 1 {
		return mean, nan, nan, nan
	}
	s2, s3, s4 := s.Shift[1].Float64()/n, s.Shift[2].Float64()/n, s.Shift[3].Float64()/n
	// products rounded before they are added, so no build fuses them (results are
	// compared across machines; see engine's TestNoFusedMultiplyAdd)
	mm := float64(mean * mean)
	m2 := max(s2-mm, 0)
	m4 := s4 - float64(4*mean*s3) + float64(6*mm*s2) - float64(3*mm*mm)
	sd = math.Sqrt(float64(m2*n) / (n - 1))
	seMean = sd / math.Sqrt(n)
	if m2 > 0 {
		seSD = math.Sqrt(max(m4-float64(m2*m2), 0) / (4 * m2 * n))
	}
	return mean, sd, seMean, seSD
}

func appendSparse(b []byte, xs []uint64) []byte {
	b = binary.AppendUvarint(b, uint64(len(xs)))
	var nz uint64
	for _, x := range xs {
		if x != 0 {
			nz++
		}
	}
	b = binary.AppendUvarint(b, nz)
	for i, x := range xs {
		if x != 0 {
			b = binary.AppendUvarint(b, uint64(i))
			b = binary.AppendUvarint(b, x)
		}
	}
	return b
}

// AppendBinary appends the canonical encoding of s: equal sketches, equal bytes.
func (s *Sketch) AppendBinary(b []byte) []byte {
	b = append(b, 1) // sketch format
	b = binary.AppendUvarint(b, uint64(len(s.Ranges)))
	for _, r := range s.Ranges {
		b = binary.AppendUvarint(b, r.Seed)
		b = binary.AppendUvarint(b, r.From)
		b = binary.AppendUvarint(b, r.To)
	}
	b = binary.AppendUvarint(b, s.N)
	for k := range s.Shift {
		b = s.Shift[k].AppendBinary(b)
	}
	b = appendSparse(b, s.ShiftHist)
	b = appendSparse(b, s.Intensity)
	b = binary.AppendUvarint(b, s.Population)
	b = binary.AppendUvarint(b, s.Pop2.hi)
	b = binary.AppendUvarint(b, s.Pop2.lo)
	b = binary.AppendUvarint(b, uint64(len(s.Checks)))
	for j := range s.Checks {
		c := &s.Checks[j]
		b = binary.LittleEndian.AppendUint64(b, math.Float64bits(c.Time))
		b = binary.AppendUvarint(b, c.Population)
		for _, a := range []*exactsum.Acc{&c.Z, &c.Z2, &c.W, &c.W2} {
			b = a.AppendBinary(b)
		}
		b = binary.AppendUvarint(b, c.NonPositiveZ)
	}
	return b
}

// errCorruptSketch is returned for bytes that are not a sketch encoding.
var errCorruptSketch = fmt.Errorf("corrupt cell sketch")

// readSparse reads a sparse count vector: length, number of non-zero entries, then
// (index, count) pairs with increasing indices.
func readSparse(r *wire.Reader, limit uint64) []uint64 {
	n := r.Uvarint(limit)
	nz := r.Uvarint(n)
	if r.Err != nil {
		return nil
	}
	xs := make([]uint64, n)
	prev := -1
	for i := uint64(0); i < nz && r.Err == nil; i++ {
		j := r.Uvarint(n - 1)
		if r.Err == nil && int(j) <= prev {
			r.Fail()
		}
		prev = int(j)
		xs[j] = r.Uvarint(math.MaxUint64)
	}
	return xs
}

// DecodeSketch reads a sketch written by AppendBinary.
func DecodeSketch(b []byte) (*Sketch, error) {
	if len(b) == 0 || b[0] != 1 {
		return nil, fmt.Errorf("%w: unknown format", errCorruptSketch)
	}
	r := wire.NewReader(b[1:], errCorruptSketch)
	s := &Sketch{}
	nr := r.Uvarint(1 << 24)
	for i := uint64(0); i < nr && r.Err == nil; i++ {
		s.Ranges = append(s.Ranges, Range{Seed: r.Uvarint(math.MaxUint64), From: r.Uvarint(math.MaxUint64), To: r.Uvarint(math.MaxUint64)})
	}
	s.N = r.Uvarint(math.MaxUint64)
	for k := range s.Shift {
		r.Acc(&s.Shift[k])
	}
	s.ShiftHist = readSparse(r, nShift+2)
	s.Intensity = readSparse(r, engine.MaxBins+1)
	s.Population = r.Uvarint(math.MaxUint64)
	s.Pop2.hi = r.Uvarint(math.MaxUint64)
	s.Pop2.lo = r.Uvarint(math.MaxUint64)
	nc := r.Uvarint(engine.MaxCheckpoints)
	for j := uint64(0); j < nc && r.Err == nil; j++ {
		var c CheckSketch
		c.Time = r.F64()
		c.Population = r.Uvarint(math.MaxUint64)
		for _, a := range []*exactsum.Acc{&c.Z, &c.Z2, &c.W, &c.W2} {
			r.Acc(a)
		}
		c.NonPositiveZ = r.Uvarint(math.MaxUint64)
		s.Checks = append(s.Checks, c)
	}
	if r.Err == nil && (len(r.B) != 0 || len(s.ShiftHist) != nShift+2) {
		r.Fail()
	}
	if r.Err != nil {
		return nil, r.Err
	}
	return s, nil
}
