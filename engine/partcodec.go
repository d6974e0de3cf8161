package engine

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"math"

	"bbmx/engine/exactsum"
	"bbmx/engine/wire"
)

// Part encoding: a canonical byte form of a Part, so a subtree task computed on one
// machine can be sent to the coordinator and merged there with the replicate's other
// parts. Layout (after a format byte): replicate, split time, roots, from, to,
// population, the top-K items (radius and position), the histogram, and per checkpoint
// the count and the exact sums.
const partFormat = 1

// AppendBinary appends the canonical encoding of p.
func (p *Part) AppendBinary(b []byte) []byte {
	b = append(b, partFormat)
	b = binary.AppendUvarint(b, p.Replicate)
	b = appendF64(b, p.SplitAt)
	b = binary.AppendUvarint(b, p.Roots)
	b = binary.AppendUvarint(b, p.From)
	b = binary.AppendUvarint(b, p.To)
	b = binary.AppendUvarint(b, p.pop)
	items := p.top.sorted()
	b = binary.AppendUvarint(b, uint64(len(items)))
	for _, it := range items {
		b = appendF64(b, it.r)
		for _, x := range it.pos {
			b = appendF64(b, x)
		}
	}
	b = binary.AppendUvarint(b, uint64(len(p.hist)))
	for _, h := range p.hist {
		b = binary.AppendUvarint(b, h)
	}
	b = binary.AppendUvarint(b, uint64(len(p.checks)))
	for i := range p.checks {
		pc := &p.checks[i]
		b = binary.AppendUvarint(b, pc.n)
		b = pc.z.AppendBinary(b)
		b = pc.w.AppendBinary(b)
		b = binary.AppendUvarint(b, uint64(len(pc.zdir)))
		for j := range pc.zdir {
			b = pc.zdir[j].AppendBinary(b)
		}
	}
	return b
}

// DecodePart reads a part encoding made for cell c (defaults applied) and checks it
// against the cell's settings: sizes, finiteness and ranges. Anything else is an error
// wrapping ErrCorruptRecord.
func DecodePart(c Cell, b []byte) (*Part, error) {
	c = c.WithDefaults()
	bad := func(what string) (*Part, error) { return nil, fmt.Errorf("%w: part %s", ErrCorruptRecord, what) }
	if len(b) == 0 || b[0] != partFormat {
		return bad("has an unknown format")
	}
	r := wire.NewReader(b[1:], ErrCorruptRecord)
	p := &Part{Replicate: r.Uvarint(math.MaxUint64), SplitAt: r.F64(), Roots: r.Uvarint(math.MaxUint64)}
	p.From = r.Uvarint(p.Roots)
	p.To = r.Uvarint(p.Roots)
	p.pop = r.Uvarint(math.MaxUint64)
	if r.Err != nil {
		return bad("is truncated")
	}
	if !(p.SplitAt >= 0) || p.SplitAt >= c.Horizon || p.From >= p.To {
		return bad("has an impossible split time or subtree range")
	}
	d := c.Model.Dim
	nTop := r.Uvarint(uint64(c.Observe.TopK))
	p.top = topK{k: c.Observe.TopK}
	for i := uint64(0); i < nTop && r.Err == nil; i++ {
		rad := r.F64()
		pos := make([]float64, d)
		var sq float64
		for j := range pos {
			pos[j] = r.F64()
			sq += float64(pos[j] * pos[j])
		}
		if r.Err == nil && (!(rad >= 0) || math.IsInf(rad, 0) || math.IsInf(sq, 0) || math.IsNaN(sq) ||
			math.Abs(math.Sqrt(sq)-rad) > 1e-9*(1+rad)) {
			return bad("has a top radius that is not the length of its position")
		}
		p.top.offer(rad, pos)
	}
	if r.Err == nil && uint64(len(p.top.items)) != nTop {
		return bad("repeats a top item")
	}
	if nb := r.Uvarint(MaxBins + 1); r.Err == nil && int(nb) != c.Bins() {
		return bad("has a histogram of another size")
	}
	p.hist = make([]uint64, c.Bins())
	for i := range p.hist {
		p.hist[i] = r.Uvarint(math.MaxUint64)
	}
	nc := r.Uvarint(MaxCheckpoints)
	if r.Err == nil && int(nc) != len(c.Observe.Checkpoints) {
		return bad("has another number of checkpoints")
	}
	p.checks = make([]partCheck, nc)
	for i := range p.checks {
		pc := &p.checks[i]
		pc.n = r.Uvarint(math.MaxUint64)
		r.Acc(&pc.z)
		r.Acc(&pc.w)
		nd := r.Uvarint(MaxDirections)
		if r.Err == nil && int(nd) != c.NumDirections() {
			return bad("has another direction grid")
		}
		if r.Err != nil {
			break
		}
		pc.zdir = make([]exactsum.Acc, nd)
		for j := range pc.zdir {
			r.Acc(&pc.zdir[j])
		}
	}
	if r.Err != nil {
		return bad("is truncated or malformed")
	}
	if len(r.B) != 0 {
		return bad("has trailing bytes")
	}
	// One result, one encoding: the coordinator identifies results by a digest of the
	// bytes and keeps parts as sent, so an equivalent spelling (an overlong varint, top
	// items out of order, padded exact sums) is refused rather than normalised.
	if !bytes.Equal(p.AppendBinary(make([]byte, 0, len(b))), b) {
		return bad("is not in canonical form")
	}
	return p, nil
}

// Clone returns a deep copy of p (Merge changes its receiver; the coordinator merges
// copies so the parts it keeps stay as received).
func (p *Part) Clone() *Part {
	q := *p
	q.top.items = make([]topItem, len(p.top.items))
	for i, it := range p.top.items {
		q.top.items[i] = topItem{r: it.r, pos: append([]float64(nil), it.pos...)}
	}
	q.hist = append([]uint64(nil), p.hist...)
	q.checks = make([]partCheck, len(p.checks))
	for i, pc := range p.checks {
		q.checks[i] = pc
		q.checks[i].zdir = append([]exactsum.Acc(nil), pc.zdir...)
	}
	return &q
}
