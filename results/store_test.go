package results

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"

	bolt "go.etcd.io/bbolt"

	"bbmx/engine"
)

func TestStoreCommitAndReadBack(t *testing.T) {
	c := testCell()
	path := filepath.Join(t.TempDir(), "sweep.db")
	st, err := Create(path, []byte("spec v1"))
	if err != nil {
		t.Fatal(err)
	}
	recs := records(t, c, 5, 0, 40)
	batch := []TaskResult{
		{CellID: "d2-T3", Cell: c, Seed: 5, From: 0, Records: recs[:25], KeepRecords: true},
		{CellID: "d2-T3", Cell: c, Seed: 5, From: 25, Records: recs[25:], KeepRecords: true},
	}
	if err := st.Commit(batch, nil); err != nil {
		t.Fatal(err)
	}
	// A task committed twice is refused and changes nothing.
	if err := st.Commit(batch[1:], nil); err == nil || !strings.Contains(err.Error(), "overlap") {
		t.Fatalf("duplicate task accepted: %v", err)
	}
	st.Close()

	st, err = Open(path, true)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	spec, _, err := st.Spec()
	if err != nil || string(spec) != "spec v1" {
		t.Fatalf("spec %q %v", spec, err)
	}
	_, sk, err := st.CellSketch("d2-T3")
	if err != nil {
		t.Fatal(err)
	}
	whole := NewSketch(c)
	whole.AddRecords(c, 5, 0, recs)
	if !bytes.Equal(sk.AppendBinary(nil), whole.AppendBinary(nil)) {
		t.Fatal("stored sketch differs from the sketch of all records")
	}
	var got []engine.Record
	if err := st.Records("d2-T3", func(seed uint64, r engine.Record) error { got = append(got, r); return nil }); err != nil {
		t.Fatal(err)
	}
	if engine.RecordsDigest(got) != engine.RecordsDigest(recs) {
		t.Fatal("stored records differ")
	}
}

func TestStoreRefusesForeignAndCorruptFiles(t *testing.T) {
	dir := t.TempDir()
	text := filepath.Join(dir, "notes.txt")
	os.WriteFile(text, []byte("not a database at all, just some words\n"), 0o644)
	if _, err := Open(text, true); err == nil || !strings.Contains(err.Error(), "not a readable bbmx store") {
		t.Errorf("text file: %v", err)
	}
	other := filepath.Join(dir, "other.db")
	db, _ := bolt.Open(other, 0o644, nil)
	db.Update(func(tx *bolt.Tx) error { _, err := tx.CreateBucket([]byte("x")); return err })
	db.Close()
	if _, err := Open(other, true); err == nil || !strings.Contains(err.Error(), "not a bbmx store") {
		t.Errorf("foreign bbolt file: %v", err)
	}
	// A folder is named as one (it was reported as a store "too short (4096 bytes)").
	if _, err := Open(dir, false); err == nil || !strings.Contains(err.Error(), "is a folder") {
		t.Errorf("folder: %v", err)
	}
	if _, _, err := OpenOrCreate(dir, []byte("s")); err == nil || !strings.Contains(err.Error(), "is a folder") {
		t.Errorf("OpenOrCreate on a folder: %v", err)
	}
	if _, err := Open(filepath.Join(dir, "missing.db"), true); err == nil {
		t.Error("missing file opened")
	}
	// A truncated store is refused with an error, not a crash.
	good := filepath.Join(dir, "good.db")
	st, err := Create(good, []byte("s"))
	if err != nil {
		t.Fatal(err)
	}
	st.Close()
	data, _ := os.ReadFile(good)
	trunc := filepath.Join(dir, "trunc.db")
	os.WriteFile(trunc, data[:len(data)/3], 0o644)
	if _, err := Open(trunc, true); err == nil || !strings.Contains(err.Error(), "truncated") {
		t.Errorf("truncated store: %v", err)
	}
	if _, err := Create(good, nil); err == nil {
		t.Error("Create overwrote an existing store")
	}
}

// OpenOrCreate makes the store and its folder when nothing is there, opens what is
// there otherwise (keeping its spec), and refuses a file that is not a store, leaving it
// as it was.
func TestOpenOrCreate(t *testing.T) {
	path := filepath.Join(t.TempDir(), "new", "folder", "sweep.db")
	st, created, err := OpenOrCreate(path, []byte("spec v1"))
	if err != nil || !created {
		t.Fatalf("first call: created %v, error %v", created, err)
	}
	st.Close()
	st, created, err = OpenOrCreate(path, []byte("spec v2"))
	if err != nil || created {
		t.Fatalf("second call: created %v, error %v", created, err)
	}
	if spec, _, err := st.Spec(); err != nil || string(spec) != "spec v1" {
		t.Fatalf("spec %q (%v), want the first one kept", spec, err)
	}
	st.Close()
	other := filepath.Join(t.TempDir(), "notes.db")
	if err := os.WriteFile(other, []byte("not a store"), 0o644); err != nil {
		t.Fatal(err)
	}
	if _, _, err := OpenOrCreate(other, []byte("spec")); err == nil {
		t.Fatal("a file that is not a store was opened")
	}
	if b, _ := os.ReadFile(other); string(b) != "not a store" {
		t.Fatalf("the foreign file was changed to %q", b)
	}
}
