package results

import (
	"bytes"
	"path/filepath"
	"strings"
	"testing"

	bolt "go.etcd.io/bbolt"

	"bbmx/engine"
)

// markOldStream makes the store at path look like one written before stores recorded
// their random-stream version (meta/stream absent, so stream 1).
func markOldStream(t *testing.T, path string) {
	t.Helper()
	db, err := bolt.Open(path, 0o644, nil)
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	if err := db.Update(func(tx *bolt.Tx) error { return tx.Bucket(bucketMeta).Delete([]byte("stream")) }); err != nil {
		t.Fatal(err)
	}
}

// A store simulated by another engine stream is still read, but not audited or merged
// with this engine's stores; two old stores merge and the output keeps their stream.
func TestStoreStreamVersion(t *testing.T) {
	if engine.StreamVersion == 1 {
		t.Skip("the engine is at stream 1: an absent meta/stream is this engine's")
	}
	dir := t.TempDir()
	old, cur, old2 := filepath.Join(dir, "old.db"), filepath.Join(dir, "cur.db"), filepath.Join(dir, "old2.db")
	storeWith(t, old, 3, 0, 5)
	storeWith(t, old2, 4, 0, 5)
	storeWith(t, cur, 5, 0, 5)
	markOldStream(t, old)
	markOldStream(t, old2)

	st, err := Open(old, true)
	if err != nil {
		t.Fatalf("an old-stream store must open for reading: %v", err)
	}
	if v, err := st.Stream(); err != nil || v != 1 {
		t.Fatalf("stream of an old store: %d, %v", v, err)
	}
	if _, sk, err := st.CellSketch("cell"); err != nil || sk.N != 5 {
		t.Fatalf("reading an old store: %v", err)
	}
	if err := st.CheckStream(); err == nil || !strings.Contains(err.Error(), "random stream 1") {
		t.Fatalf("CheckStream on an old store: %v", err)
	}
	if _, err := st.Audit(3, 1); err == nil {
		t.Fatal("an old-stream store was audited with this engine")
	}
	st.Close()

	before := sketchBytes(t, old)
	if err := MergeStores(filepath.Join(dir, "mixed.db"), []string{cur, old}); err == nil ||
		!strings.Contains(err.Error(), "random stream") {
		t.Fatalf("stores of two streams merged: %v", err)
	}
	if !bytes.Equal(sketchBytes(t, old), before) {
		t.Fatal("a refused merge changed an input")
	}
	out := filepath.Join(dir, "olds.db")
	if err := MergeStores(out, []string{old, old2}); err != nil {
		t.Fatal(err)
	}
	st, err = Open(out, true)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	if v, _ := st.Stream(); v != 1 {
		t.Fatalf("merge of stream-1 stores wrote stream %d", v)
	}
	st2, err := Open(cur, true)
	if err != nil {
		t.Fatal(err)
	}
	defer st2.Close()
	if err := st2.CheckStream(); err != nil {
		t.Fatalf("a store this engine made: %v", err)
	}
}

// Every result of a batch is checked against its cell's settings, not only the first of
// each cell: a batch mixing two settings under one cell id is refused whole.
func TestCommitChecksEveryResultsSettings(t *testing.T) {
	c := testCell()
	other := c
	other.Observe.TopK = 5
	st, err := Create(filepath.Join(t.TempDir(), "s.db"), []byte("spec"))
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	err = st.Commit([]TaskResult{
		{CellID: "cell", Cell: c, Seed: 1, From: 0, Records: records(t, c, 1, 0, 3)},
		{CellID: "cell", Cell: other, Seed: 1, From: 3, Records: records(t, other, 1, 3, 6)},
	}, nil)
	if err == nil || !strings.Contains(err.Error(), "settings differ") {
		t.Fatalf("a batch mixing settings under one cell id: %v", err)
	}
	if ids, _ := st.Cells(); len(ids) != 0 {
		t.Fatalf("a refused batch left cells %v", ids)
	}
}
