package wire

import (
	"encoding/binary"
	"errors"
	"math"
	"testing"

	"bbmx/engine/exactsum"
)

var errBad = errors.New("bad input")

func TestReaderReadsWhatWasWritten(t *testing.T) {
	var a exactsum.Acc
	a.Add(0.1)
	a.Add(1e300)
	b := binary.AppendUvarint(nil, 300)
	b = binary.LittleEndian.AppendUint64(b, math.Float64bits(-2.5))
	b = a.AppendBinary(b)
	r := NewReader(b, errBad)
	var got exactsum.Acc
	if v := r.Uvarint(300); v != 300 {
		t.Fatalf("uvarint %d", v)
	}
	if f := r.F64(); f != -2.5 {
		t.Fatalf("f64 %v", f)
	}
	r.Acc(&got)
	if r.Err != nil || len(r.B) != 0 || got.Float64() != a.Float64() {
		t.Fatalf("acc %v, err %v, %d bytes left", got.Float64(), r.Err, len(r.B))
	}
}

// The first error sticks: a value over its limit, then reads that would succeed.
func TestReaderStopsAtFirstError(t *testing.T) {
	b := binary.AppendUvarint(nil, 301)
	b = binary.AppendUvarint(b, 5)
	r := NewReader(b, errBad)
	if v := r.Uvarint(300); v != 0 || !errors.Is(r.Err, errBad) {
		t.Fatalf("over the limit: %d, %v", v, r.Err)
	}
	if v := r.Uvarint(10); v != 0 || len(r.B) != len(b) {
		t.Fatalf("read %d after an error, %d bytes left", v, len(r.B))
	}
	if f := NewReader([]byte{1, 2, 3}, errBad); f.F64() != 0 || f.Err != errBad {
		t.Fatal("a truncated float64 was read")
	}
	var a exactsum.Acc
	f := NewReader([]byte{9}, errBad)
	if f.Acc(&a); f.Err != errBad {
		t.Fatal("a malformed exact sum was read")
	}
}
