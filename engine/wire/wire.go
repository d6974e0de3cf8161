// Package wire reads the project's binary encodings (replicate records, subtree parts,
// cell sketches): unsigned varints with an upper limit, little-endian float64s and exact
// sums. A Reader stops at the first error and returns zeros after it, so a decoder can
// read a whole layout and check for an error once, where it matters.
package wire

import (
	"encoding/binary"
	"math"

	"bbmx/engine/exactsum"
)

// Reader reads from B. Err is the first error met (the corrupt value the Reader was made
// with); every read after it returns zero and leaves B as it is.
type Reader struct {
	B       []byte
	Err     error
	corrupt error
}

// NewReader reads b, reporting any malformed input as corrupt.
func NewReader(b []byte, corrupt error) *Reader { return &Reader{B: b, corrupt: corrupt} }

// Fail records corrupt as the error, unless there is one already.
func (r *Reader) Fail() {
	if r.Err == nil {
		r.Err = r.corrupt
	}
}

// Uvarint reads an unsigned varint no greater than limit.
func (r *Reader) Uvarint(limit uint64) uint64 {
	if r.Err != nil {
		return 0
	}
	v, k := binary.Uvarint(r.B)
	if k <= 0 || v > limit {
		r.Fail()
		return 0
	}
	r.B = r.B[k:]
	return v
}

// F64 reads a float64 as 8 little-endian bytes of its IEEE 754 bits.
func (r *Reader) F64() float64 {
	if r.Err != nil {
		return 0
	}
	if len(r.B) < 8 {
		r.Fail()
		return 0
	}
	v := math.Float64frombits(binary.LittleEndian.Uint64(r.B))
	r.B = r.B[8:]
	return v
}

// Acc reads an exact sum written by exactsum.Acc.AppendBinary into a.
func (r *Reader) Acc(a *exactsum.Acc) {
	if r.Err != nil {
		return
	}
	rest, err := a.Decode(r.B)
	if err != nil {
		r.Fail()
		return
	}
	r.B = rest
}
