package results

import (
	"fmt"
	"os"
	"path/filepath"
	"testing"

	"bbmx/engine"
)

// A store damaged anywhere (a few bytes flipped at the start of each page in turn: page
// ids, flags, counts, element offsets) gives errors or its content, never a crash: bbolt
// panics on such pages or reads outside its map, which killed the process on open, on
// reading a cell or its records, on the content digest, the audit and the merge.
// Deterministic: the same bytes are flipped on every run.
func TestDamagedStoreIsAnError(t *testing.T) {
	dir := t.TempDir()
	good := filepath.Join(dir, "good.db")
	storeWith(t, good, 1, 0, 60)
	data, err := os.ReadFile(good)
	if err != nil {
		t.Fatal(err)
	}
	const page = 4096
	errs := 0
	for pg := 2; pg < len(data)/page; pg++ {
		for _, off := range []int{0, 8, 10, 12, 16, 20} {
			bad := append([]byte(nil), data...)
			for i := range 8 {
				bad[pg*page+off+i] ^= 0xA5
			}
			path := filepath.Join(dir, fmt.Sprintf("bad-%d-%d.db", pg, off))
			if err := os.WriteFile(path, bad, 0o644); err != nil {
				t.Fatal(err)
			}
			var last error
			note := func(err error) {
				if err != nil {
					last = err
				}
			}
			st, err := Open(path, false)
			note(err)
			if err == nil {
				_, _, err := st.CellSketch("cell")
				note(err)
				note(st.Records("cell", func(uint64, engine.Record) error { return nil }))
				_, err = st.ContentDigest()
				note(err)
				_, err = st.Audit(2, 1)
				note(err)
				st.Close()
				note(MergeStores(path+".out", []string{path}))
			}
			if last != nil {
				errs++
			}
			os.Remove(path)
			os.Remove(path + ".out")
		}
	}
	if errs == 0 {
		t.Fatal("no damage was detected at all: the test flips nothing that matters")
	}
}
