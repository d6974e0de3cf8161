package engine

import (
	"bytes"
	"testing"
)

// FuzzDecodeRecord: arbitrary bytes never crash the decoder, and whatever decodes
// re-encodes to the bytes it was read from (the encoding is canonical).
func FuzzDecodeRecord(f *testing.F) {
	c := Cell{Model: DefaultModel(), Horizon: 3, Observe: Observe{Checkpoints: []float64{1, 3}}}
	for rep := uint64(0); rep < 3; rep++ {
		r, err := Simulate(c, 7, rep)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(r.AppendBinary(nil))
	}
	f.Add([]byte{1, 0, 1, 0, 0})
	var reused Record // decoded into by every input, must match a fresh decode
	f.Fuzz(func(t *testing.T, b []byte) {
		rec, rest, err := DecodeRecord(b)
		rest2, err2 := DecodeRecordInto(&reused, b)
		if (err == nil) != (err2 == nil) {
			t.Fatalf("DecodeRecord error %v, DecodeRecordInto error %v", err, err2)
		}
		if err != nil {
			return
		}
		if len(rest2) != len(rest) || !bytes.Equal(reused.AppendBinary(nil), rec.AppendBinary(nil)) {
			t.Fatalf("decoding into a used record differs from a fresh decode")
		}
		used := b[:len(b)-len(rest)]
		if got := rec.AppendBinary(nil); !bytes.Equal(got, used) {
			// Non-canonical but valid inputs (e.g. over-long varints) may decode; they must
			// still decode again to the same record.
			rec2, _, err := DecodeRecord(got)
			if err != nil || !bytes.Equal(rec2.AppendBinary(nil), got) {
				t.Fatalf("re-encoding is not stable")
			}
		}
	})
}
