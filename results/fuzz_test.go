package results

import (
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"testing"

	"bbmx/engine"
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

// FuzzDamagedStore: a store file with any bytes overwritten (patch, at off) opens with an
// error, or passes Verify, or fails it; whichever, reading it and committing to it after
// a passed Verify give errors, never a crash of the process. Each input patches a copy
// of a small store of 60 records. testdata/fuzz/FuzzDamagedStore holds the inputs it
// found: 9c281d0d9e13b5c9 makes a page of a nested bucket lead back to itself, which
// sent bbolt's cursor down without end until the process ran out of memory (now
// walkTree's error).
//
//	go test -run XXX -fuzz FuzzDamagedStore -fuzztime 60s ./results/
func FuzzDamagedStore(f *testing.F) {
	dir := f.TempDir()
	_, data := goodStore(f, dir)
	for _, pg := range []uint32{0, 1, 2, 3, 4, 8} {
		f.Add(pg*4096, []byte{0xA5, 0xA5, 0xA5, 0xA5, 0xA5, 0xA5, 0xA5, 0xA5})
		f.Add(pg*4096+12, []byte{0xff, 0xff, 0xff, 0x7f})
	}
	c := testCell()
	n := 0
	f.Fuzz(func(t *testing.T, off uint32, patch []byte) {
		bad := append([]byte(nil), data...)
		copy(bad[int(off)%len(bad):], patch)
		n++
		path := filepath.Join(dir, fmt.Sprintf("bad-%d.db", n)) // bbolt may keep a lock after a panic
		if err := os.WriteFile(path, bad, 0o644); err != nil {
			t.Fatal(err)
		}
		defer os.Remove(path)
		st, err := Open(path, false)
		if err != nil {
			return
		}
		defer st.Close()
		if st.Verify() != nil {
			return
		}
		st.CellSketch("cell")
		st.Records("cell", func(uint64, engine.Record) error { return nil })
		st.ContentDigest()
		st.Commit([]TaskResult{{CellID: "cell", Cell: c, Seed: 2, From: 0, Records: records(t, c, 2, 0, 3), KeepRecords: true}}, nil)
	})
}
