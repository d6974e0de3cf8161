package results

import (
	"encoding/binary"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	bolt "go.etcd.io/bbolt"

	"bbmx/engine"
)

// A store damaged anywhere (a few bytes flipped at the start of each page in turn: page
// ids, flags, counts, element offsets) gives errors or its content, never a crash: bbolt
// panics on such pages or reads outside its map, which killed the process on open, on
// reading a cell or its records, on the content digest, the audit and the merge.
// Deterministic: the same bytes are flipped on every run.
func TestDamagedStoreIsAnError(t *testing.T) {
	dir := t.TempDir()
	_, data := goodStore(t, dir)
	const page = 4096
	errs := 0
	for pg := 2; pg < len(data)/page; pg++ {
		for _, off := range []int{0, 8, 10, 12, 16, 20} {
			bad := flipped(data, pg*page+off)
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

// Verify reports a store damaged anywhere that matters (the bytes of TestDamagedStoreIsAnError
// flipped at each page in turn), or the store it passes reads whole; it never crashes or
// hangs. A page whose overflow count (the header's bytes 12 to 15) is wrong reads as
// before, yet a commit that rewrites the page frees that many pages, billions here:
// Verify must catch it, and does by counting pages. An undamaged store passes.
func TestVerifyFindsDamage(t *testing.T) {
	dir := t.TempDir()
	good, data := goodStore(t, dir)
	st, err := Open(good, false)
	if err != nil {
		t.Fatal(err)
	}
	if err := st.Verify(); err != nil {
		t.Fatalf("undamaged store: %v", err)
	}
	leaves := map[int]bool{} // pages in use as leaves (free ones keep stale headers)
	st.db.View(func(tx *bolt.Tx) error {
		for id := 2; ; id++ {
			p, err := tx.Page(id)
			if p == nil || err != nil {
				return err
			}
			leaves[id] = p.Type == "leaf"
		}
	})
	st.Close()
	const page = 4096
	found, overflowCaught := 0, false
	for pg := 2; pg < len(data)/page; pg++ {
		leaf := leaves[pg]
		for _, off := range []int{0, 8, 10, 12, 16, 20} {
			bad := flipped(data, pg*page+off)
			// A file of its own each time: bbolt keeps the lock of a file it
			// panicked while opening.
			path := filepath.Join(dir, fmt.Sprintf("verify-%d-%d.db", pg, off))
			if err := os.WriteFile(path, bad, 0o644); err != nil {
				t.Fatal(err)
			}
			st, err := Open(path, false)
			if err != nil {
				found++
				continue
			}
			verr := st.Verify()
			if verr != nil {
				found++
				if !strings.Contains(verr.Error(), path) {
					t.Errorf("page %d byte %d: the error does not name the file: %v", pg, off, verr)
				}
				if leaf && off == 12 {
					overflowCaught = true
				}
			} else {
				// Passed: then everything in it reads.
				if _, _, err := st.CellSketch("cell"); err != nil {
					t.Errorf("page %d byte %d: Verify passed, but the sketch: %v", pg, off, err)
				}
				if err := st.Records("cell", func(uint64, engine.Record) error { return nil }); err != nil {
					t.Errorf("page %d byte %d: Verify passed, but the records: %v", pg, off, err)
				}
				if leaf && off == 12 {
					t.Errorf("page %d: a leaf page's overflow count damaged, and Verify passed", pg)
				}
			}
			st.Close()
		}
	}
	if found == 0 || !overflowCaught {
		t.Fatalf("damage found %d times, a damaged overflow count caught: %v", found, overflowCaught)
	}
	// A value whose length runs past the end of the file (the first element of a leaf
	// page holding plain values, its length set to 2^24): only reading the value
	// shows it, which Verify must do.
	lengthCaught := false
	for pg := 2; pg < len(data)/page && !lengthCaught; pg++ {
		e := pg*page + 16 // the first leaf element: flags, pos, ksize, vsize (4 bytes each)
		if !leaves[pg] || binary.LittleEndian.Uint32(data[e:]) != 0 {
			continue
		}
		bad := append([]byte(nil), data...)
		binary.LittleEndian.PutUint32(bad[e+12:], 1<<24)
		path := filepath.Join(dir, fmt.Sprintf("length-%d.db", pg))
		if err := os.WriteFile(path, bad, 0o644); err != nil {
			t.Fatal(err)
		}
		st, err := Open(path, false)
		if err != nil {
			t.Fatalf("page %d: a damaged value length should open: %v", pg, err)
		}
		if err := st.Verify(); err == nil {
			t.Errorf("page %d: a value running past the end of the file passed", pg)
		}
		st.Close()
		lengthCaught = true
	}
	if !lengthCaught {
		t.Fatal("no leaf page of plain values to damage")
	}
}

// A damaged header of the free-page list, which bbolt reads while opening a store for
// writing, is an error before bbolt maps the file, and the same path, restored from a
// copy, opens at once in the same process. Before, bbolt panicked inside its Open, and
// its lock stayed with the mapping lost in the panic: the second open waited and failed
// with "in use by another process".
func TestDamagedOpenReleasesTheFile(t *testing.T) {
	dir := t.TempDir()
	_, data := goodStore(t, dir)
	// The free-page list's page, from the newer meta page (pages 0 and 1; after the
	// 16-byte page header: magic, version, page size and flags, 4 bytes each, the root
	// bucket, 16, then the list's page id, the high-water page and the transaction id).
	const page = 4096
	freelist, newest := uint64(0), uint64(0)
	for m := range 2 {
		meta := data[m*page+16:]
		if txid := binary.LittleEndian.Uint64(meta[48:]); txid >= newest {
			freelist, newest = binary.LittleEndian.Uint64(meta[32:]), txid
		}
	}
	bad := flipped(data, int(freelist)*page+8) // its flags, count of free pages and overflow
	path := filepath.Join(dir, "restored.db")
	if err := os.WriteFile(path, bad, 0o644); err != nil {
		t.Fatal(err)
	}
	if _, err := Open(path, false); err == nil || !strings.Contains(err.Error(), "is damaged") {
		t.Fatalf("a damaged free-page list (page %d): %v", freelist, err)
	}
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
	st, err := Open(path, false)
	if err != nil {
		t.Fatalf("the restored store after a damaged open: %v", err)
	}
	st.Close()
}

// goodStore makes the undamaged store the damage tests start from (60 records of one
// cell) in dir, and returns its path and bytes.
func goodStore(t testing.TB, dir string) (string, []byte) {
	t.Helper()
	good := filepath.Join(dir, "good.db")
	storeWith(t, good, 1, 0, 60)
	data, err := os.ReadFile(good)
	if err != nil {
		t.Fatal(err)
	}
	return good, data
}

// flipped is a copy of data with the 8 bytes at at flipped (each XOR 0xA5).
func flipped(data []byte, at int) []byte {
	bad := append([]byte(nil), data...)
	for i := range 8 {
		bad[at+i] ^= 0xA5
	}
	return bad
}

// A free-page list that names a page in use is damage that Verify reports: bbolt trusts
// the list, and the next write would be given that page and overwrite what it holds. A
// list naming a page past the end of the file is reported as well. The store has free
// pages from a second commit; the first id on its list is replaced.
func TestFreeListNamingALivePage(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "two.db")
	c := testCell()
	st, err := Create(path, []byte("free list test"))
	if err != nil {
		t.Fatal(err)
	}
	for _, from := range []uint64{0, 40} {
		if err := st.Commit([]TaskResult{{CellID: "cell", Cell: c, Seed: 1, From: from, Records: records(t, c, 1, from, from+40), KeepRecords: true}}, nil); err != nil {
			t.Fatal(err)
		}
	}
	st.Close()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	// The newest meta page (layout as in TestDamagedOpenReleasesTheFile): the root
	// bucket's page, which is in use, and the free-page list's page.
	const page = 4096
	var root, list, hwm, newest uint64
	for m := range 2 {
		meta := data[m*page+16:]
		if txid := binary.LittleEndian.Uint64(meta[48:]); txid >= newest {
			root, list, hwm, newest = binary.LittleEndian.Uint64(meta[16:]), binary.LittleEndian.Uint64(meta[32:]), binary.LittleEndian.Uint64(meta[40:]), txid
		}
	}
	at := int(list)*page + 16 // the first id, after the page header (count < 0xFFFF)
	if n := binary.LittleEndian.Uint16(data[int(list)*page+10:]); n == 0 || n == 0xFFFF || root < 2 {
		t.Fatalf("no short free-page list to damage (%d ids; root page %d)", n, root)
	}
	for _, tc := range []struct {
		id   uint64
		want string
	}{{root, "which is in use"}, {hwm + 5, "outside the file"}} {
		bad := append([]byte(nil), data...)
		binary.LittleEndian.PutUint64(bad[at:], tc.id)
		p := filepath.Join(dir, fmt.Sprintf("bad%d.db", tc.id))
		if err := os.WriteFile(p, bad, 0o644); err != nil {
			t.Fatal(err)
		}
		st, err := Open(p, false)
		if err != nil {
			t.Fatalf("page %d on the free-page list: the store should open: %v", tc.id, err)
		}
		err = st.Verify()
		st.Close()
		if err == nil || !strings.Contains(err.Error(), tc.want) || !strings.Contains(err.Error(), "free-page list") {
			t.Errorf("page %d on the free-page list: Verify says %v", tc.id, err)
		}
	}
	// The undamaged store passes.
	st, err = Open(path, false)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	if err := st.Verify(); err != nil {
		t.Fatalf("the undamaged store: %v", err)
	}
}
