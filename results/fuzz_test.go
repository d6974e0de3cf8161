package results

import (
	"bytes"
	"testing"
)

// FuzzDecodeSketch: a cell sketch read from a damaged store never crashes the decoder,
// and whatever decodes re-encodes to bytes that decode to the same sketch.
//
//	go test -run XXX -fuzz FuzzDecodeSketch -fuzztime 60s ./results/
func FuzzDecodeSketch(f *testing.F) {
	c := testCell()
	s := NewSketch(c)
	if err := s.AddRecords(c, 4, 0, records(f, c, 4, 0, 20)); err != nil {
		f.Fatal(err)
	}
	f.Add(s.AppendBinary(nil))
	f.Add(NewSketch(c).AppendBinary(nil))
	f.Fuzz(func(t *testing.T, b []byte) {
		s, err := DecodeSketch(b)
		if err != nil {
			return
		}
		enc := s.AppendBinary(nil)
		s2, err := DecodeSketch(enc)
		if err != nil {
			t.Fatalf("a decoded sketch re-encodes to bytes that do not decode: %v", err)
		}
		if !bytes.Equal(s2.AppendBinary(nil), enc) {
			t.Fatal("re-encoding a decoded sketch is not stable")
		}
	})
}
