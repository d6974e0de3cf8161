// Package exactsum adds float64 values exactly, so that a sum does not depend on the
// order of its terms or on how they were grouped.
//
// Why: a replicate of the simulation may be split into subtrees computed on different
// machines, and per-cell sketches are merged from tasks in whatever order they finish.
// Ordinary floating-point addition is not associative, so the merged sums would depend on
// the split and the order. An Acc holds the sum as a fixed-point integer wide enough for
// every finite double (a "long accumulator"), so every grouping gives the same bits.
//
// Invariant: the value held is sum_i limb[i] * 2^(32 i - 1074). Limbs hold signed carries
// between normalisations; Normalise brings every limb but the last into [0, 2^32).
package exactsum

import (
	"encoding/binary"
	"errors"
	"math"
	"math/big"
	"math/bits"
)

const (
	limbBits = 32
	bias     = 1074 // 2^-1074 is the smallest positive subnormal double
	// nLimbs covers bit positions 0 .. 2112 (>= 1074 + 1024 + 53) plus a top limb that
	// carries the sign and any overflow past 2^1024.
	nLimbs = 68
	// Each Add puts less than 2^32 into a limb, so 2^30 additions cannot overflow int64.
	normaliseEvery = 1 << 30
)

// Acc is an exact sum of float64 values. The zero value is an empty sum.
type Acc struct {
	limb      [nLimbs]int64
	pending   uint32 // additions since the last normalisation
	nonFinite uint8  // bit 0: NaN, bit 1: +Inf, bit 2: -Inf seen
}

// Add adds x exactly. A NaN or infinite x poisons the sum (Float64 then returns NaN or ±Inf).
func (a *Acc) Add(x float64) {
	if x == 0 {
		return
	}
	bits := math.Float64bits(x)
	exp := int((bits >> 52) & 0x7ff)
	mant := bits & (1<<52 - 1)
	if exp == 0x7ff {
		switch {
		case mant != 0:
			a.nonFinite |= 1
		case x > 0:
			a.nonFinite |= 2
		default:
			a.nonFinite |= 4
		}
		return
	}
	if exp == 0 {
		exp = 1 // subnormal
	} else {
		mant |= 1 << 52
	}
	pos := exp - 1 // bit position of mant's lowest bit: value = mant * 2^(exp-1075)
	i := pos / limbBits
	sh := uint(pos % limbBits)
	// mant << sh spans at most 85 bits: three 32-bit chunks.
	lo := mant << sh
	var hi uint64
	if sh > 0 {
		hi = mant >> (64 - sh)
	}
	c0 := int64(lo & 0xffffffff)
	c1 := int64(lo >> 32)
	c2 := int64(hi)
	if bits>>63 != 0 {
		c0, c1, c2 = -c0, -c1, -c2
	}
	a.limb[i] += c0
	a.limb[i+1] += c1
	a.limb[i+2] += c2
	a.pending++
	if a.pending >= normaliseEvery {
		a.Normalise()
	}
}

// Merge adds the sum held by b into a.
func (a *Acc) Merge(b *Acc) {
	a.Normalise()
	bb := *b
	bb.Normalise()
	for i := range a.limb {
		a.limb[i] += bb.limb[i]
	}
	a.nonFinite |= bb.nonFinite
	a.Normalise()
}

// Normalise propagates carries so that every limb but the last lies in [0, 2^32).
// The represented value is unchanged; after it the limbs are a canonical form.
func (a *Acc) Normalise() {
	var carry int64
	for i := 0; i < nLimbs-1; i++ {
		v := a.limb[i] + carry
		carry = v >> limbBits // arithmetic shift: floor division
		a.limb[i] = v & 0xffffffff
	}
	a.limb[nLimbs-1] += carry
	a.pending = 0
}

// IsZero reports whether the exact sum is zero (and no non-finite value was added).
func (a *Acc) IsZero() bool {
	if a.nonFinite != 0 {
		return false
	}
	c := *a
	c.Normalise()
	for _, l := range c.limb {
		if l != 0 {
			return false
		}
	}
	return true
}

// Float64 returns the exact sum rounded to the nearest float64 (ties to even).
func (a *Acc) Float64() float64 {
	switch {
	case a.nonFinite&1 != 0 || a.nonFinite&6 == 6:
		return math.NaN()
	case a.nonFinite&2 != 0:
		return math.Inf(1)
	case a.nonFinite&4 != 0:
		return math.Inf(-1)
	}
	c := *a
	c.Normalise()
	neg := c.limb[nLimbs-1] < 0
	if neg { // work with the magnitude
		for i := range c.limb {
			c.limb[i] = -c.limb[i]
		}
		c.Normalise()
	}
	h := nLimbs - 1
	for h >= 0 && c.limb[h] == 0 {
		h--
	}
	if h < 0 {
		return 0
	}
	// Only the top three limbs (at least 65 significant bits) and whether anything below
	// them is nonzero (a sticky bit) decide the rounding to 53 bits, so the conversion
	// costs the same for every sum.
	if h >= 4 && h < nLimbs-1 && c.limb[h] < 1<<limbBits {
		v := roundNormal(&c, h)
		if neg {
			v = -v
		}
		return v
	}
	lo := max(h-2, 0)
	m := new(big.Int).SetUint64(uint64(c.limb[h]))
	var limb big.Int
	for i := h - 1; i >= lo; i-- {
		m.Lsh(m, limbBits)
		m.Or(m, limb.SetUint64(uint64(c.limb[i])))
	}
	exp := lo*limbBits - bias
	for i := 0; i < lo; i++ {
		if c.limb[i] != 0 {
			m.Lsh(m, 1)
			m.SetBit(m, 0, 1)
			exp--
			break
		}
	}
	f := new(big.Float).SetPrec(uint(m.BitLen()) + 1).SetInt(m)
	f.SetMantExp(f, exp)
	v, _ := f.Float64()
	if neg {
		v = -v
	}
	return v
}

// roundNormal rounds the magnitude held in limbs 0..h (top limb h nonzero and below
// 2^32, 4 <= h < nLimbs-1, so the result is a normal number or +Inf) to the nearest
// float64, ties to even, with integer arithmetic only.
func roundNormal(c *Acc, h int) float64 {
	hi := uint64(c.limb[h])
	lo := uint64(c.limb[h-1])<<limbBits | uint64(c.limb[h-2])
	sticky := false
	for i := 0; i < h-2; i++ {
		if c.limb[i] != 0 {
			sticky = true
			break
		}
	}
	// The 96-bit value hi:lo has its leading bit at 64 + len(hi) - 1; keep 53 bits.
	s := uint(64 + bits.Len64(hi) - 53) // 12 <= s <= 43
	mant := hi<<(64-s) | lo>>s
	rem := lo & (1<<s - 1)
	half := uint64(1) << (s - 1)
	if rem > half || (rem == half && (sticky || mant&1 == 1)) {
		mant++
		if mant == 1<<53 {
			mant >>= 1
			s++
		}
	}
	return math.Ldexp(float64(mant), (h-2)*limbBits-bias+int(s))
}

// AppendBinary appends a canonical encoding of the sum: equal sums encode to equal bytes.
// Layout: flags byte, first nonzero limb index, count, then the limbs as zig-zag varints.
func (a *Acc) AppendBinary(b []byte) []byte {
	c := *a
	c.Normalise()
	first, last := -1, -1
	for i, l := range c.limb {
		if l != 0 {
			if first < 0 {
				first = i
			}
			last = i
		}
	}
	b = append(b, c.nonFinite)
	if first < 0 {
		return binary.AppendUvarint(b, 0)
	}
	b = binary.AppendUvarint(b, uint64(last-first+1))
	b = binary.AppendUvarint(b, uint64(first))
	for i := first; i <= last; i++ {
		b = binary.AppendVarint(b, c.limb[i])
	}
	return b
}

var errCorrupt = errors.New("exactsum: corrupt encoding")

// Decode reads an encoding written by AppendBinary and returns the rest of b.
func (a *Acc) Decode(b []byte) ([]byte, error) {
	*a = Acc{}
	if len(b) < 1 {
		return nil, errCorrupt
	}
	a.nonFinite = b[0]
	if a.nonFinite > 7 {
		return nil, errCorrupt
	}
	b = b[1:]
	n, k := binary.Uvarint(b)
	if k <= 0 || n > nLimbs {
		return nil, errCorrupt
	}
	b = b[k:]
	if n == 0 {
		return b, nil
	}
	first, k := binary.Uvarint(b)
	if k <= 0 || first+n > nLimbs {
		return nil, errCorrupt
	}
	b = b[k:]
	for i := first; i < first+n; i++ {
		v, k := binary.Varint(b)
		if k <= 0 {
			return nil, errCorrupt
		}
		if i < nLimbs-1 && (v < 0 || v > 0xffffffff) {
			return nil, errCorrupt
		}
		a.limb[i] = v
		b = b[k:]
	}
	return b, nil
}
