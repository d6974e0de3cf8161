package results

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	bolt "go.etcd.io/bbolt"

	"bbmx/engine"
)

func storeWith(t testing.TB, path string, seed, from, to uint64) {
	t.Helper()
	c := testCell()
	st, err := Create(path, []byte("merge test"))
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	if err := st.Commit([]TaskResult{{CellID: "cell", Cell: c, Seed: seed, From: from, Records: records(t, c, seed, from, to), KeepRecords: true}}, nil); err != nil {
		t.Fatal(err)
	}
}

func sketchBytes(t *testing.T, path string) []byte {
	t.Helper()
	st, err := Open(path, true)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	_, sk, err := st.CellSketch("cell")
	if err != nil {
		t.Fatal(err)
	}
	return sk.AppendBinary(nil)
}

func contentDigest(t *testing.T, path string) [32]byte {
	t.Helper()
	st, err := Open(path, true)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	d, err := st.ContentDigest()
	if err != nil {
		t.Fatal(err)
	}
	return d
}

func TestMergeUnionsOverlapsAndOrder(t *testing.T) {
	dir := t.TempDir()
	a, b, c, whole := filepath.Join(dir, "a.db"), filepath.Join(dir, "b.db"), filepath.Join(dir, "c.db"), filepath.Join(dir, "whole.db")
	storeWith(t, a, 3, 0, 30)
	storeWith(t, b, 3, 20, 50) // overlaps a on [20,30): identical records
	storeWith(t, c, 4, 0, 10)  // another seed: independent replicates
	storeWith(t, whole, 3, 0, 50)
	aInfo, _ := os.Stat(a)
	m1, m2 := filepath.Join(dir, "m1.db"), filepath.Join(dir, "m2.db")
	if err := MergeStores(m1, []string{a, b, c}); err != nil {
		t.Fatal(err)
	}
	if err := MergeStores(m2, []string{c, b, a}); err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(sketchBytes(t, m1), sketchBytes(t, m2)) {
		t.Fatal("merge depends on the order of inputs")
	}
	// seed 3 part of the merge equals the store made in one go
	only := filepath.Join(dir, "only3.db")
	if err := MergeStores(only, []string{b, a}); err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(sketchBytes(t, only), sketchBytes(t, whole)) {
		t.Fatal("merged halves differ from the whole")
	}
	// and so does everything else the store holds: cell settings, sketch, every record
	if dOnly, dWhole := contentDigest(t, only), contentDigest(t, whole); dOnly != dWhole {
		t.Fatalf("merged halves hold other content than the whole: %x vs %x", dOnly, dWhole)
	}
	if after, _ := os.Stat(a); after.ModTime() != aInfo.ModTime() || after.Size() != aInfo.Size() {
		t.Fatal("an input was modified")
	}
	st, _ := Open(m1, true)
	prov, err := st.Provenance()
	st.Close()
	if err != nil || len(prov) != 3 {
		t.Fatalf("provenance %v %v", prov, err)
	}
}

func TestMergeRefusesConflicts(t *testing.T) {
	dir := t.TempDir()
	a, b := filepath.Join(dir, "a.db"), filepath.Join(dir, "b.db")
	storeWith(t, a, 3, 0, 10)
	// b claims the same seed and replicates but holds other records (a tampered or
	// differently built run): simulate that with another seed's records relabelled.
	c := testCell()
	st, _ := Create(b, []byte("other"))
	recs := records(t, c, 99, 0, 10)
	if err := st.Commit([]TaskResult{{CellID: "cell", Cell: c, Seed: 3, From: 0, Records: recs, KeepRecords: true}}, nil); err != nil {
		t.Fatal(err)
	}
	st.Close()
	out := filepath.Join(dir, "out.db")
	err := MergeStores(out, []string{a, b})
	var me *MergeError
	if !errors.As(err, &me) || len(me.Conflicts) != 10 || me.Conflicts[0].CellID != "cell" {
		t.Fatalf("conflict not reported: %v", err)
	}
	if _, err := os.Stat(out); err == nil {
		t.Fatal("output written despite conflicts")
	}
	// different settings for the same cell id are refused
	c2 := c
	c2.Observe.TopK = 5
	d := filepath.Join(dir, "d.db")
	st, _ = Create(d, []byte("x"))
	st.Commit([]TaskResult{{CellID: "cell", Cell: c2, Seed: 7, From: 0, Records: records(t, c2, 7, 0, 3), KeepRecords: true}}, nil)
	st.Close()
	if err := MergeStores(filepath.Join(dir, "o2.db"), []string{a, d}); err == nil {
		t.Fatal("different settings merged")
	}
	// The refusal names the two inputs that differ, not the first input given.
	empty := filepath.Join(dir, "empty.db")
	st, _ = Create(empty, []byte("x"))
	st.Close()
	err = MergeStores(filepath.Join(dir, "o3.db"), []string{empty, a, d})
	if err == nil || !strings.Contains(err.Error(), "in "+a+" and "+d) {
		t.Fatalf("settings refusal: %v", err)
	}
}

// TestMergeSmallBatches: with write batches of a few records, the merge crosses many
// batch and run boundaries (and overlaps straddle them) and must still give the store
// made in one go, with exact provenance. Deterministic.
func TestMergeSmallBatches(t *testing.T) {
	saved := mergeBatchBytes
	mergeBatchBytes = 2000 // a few records per transaction
	defer func() { mergeBatchBytes = saved }()
	dir := t.TempDir()
	a, b, whole := filepath.Join(dir, "a.db"), filepath.Join(dir, "b.db"), filepath.Join(dir, "whole.db")
	storeWith(t, a, 3, 0, 30)
	storeWith(t, b, 3, 20, 50)
	storeWith(t, whole, 3, 0, 50)
	m := filepath.Join(dir, "m.db")
	if err := MergeStores(m, []string{b, a}); err != nil {
		t.Fatal(err)
	}
	if dm, dw := contentDigest(t, m), contentDigest(t, whole); dm != dw {
		t.Fatalf("merge in small batches differs from the whole: %x vs %x", dm, dw)
	}
	st, err := Open(m, true)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	prov, err := st.Provenance()
	if err != nil {
		t.Fatal(err)
	}
	// b is the first input, so the overlap [20,30) is attributed to it.
	want := map[string]map[string][]Range{a: {"cell": {{Seed: 3, From: 0, To: 20}}}, b: {"cell": {{Seed: 3, From: 20, To: 50}}}}
	if !reflect.DeepEqual(prov, want) {
		t.Fatalf("provenance %v, want %v", prov, want)
	}
}

// A store that kept the records of only some of its tasks (a sweep with keep_records =
// false that `bbmx sim --store` later added to) is refused by merge, which rebuilds each
// cell from its records: it used to write a cell with only the kept replicates.
func TestMergeRefusesReplicatesWithoutRecords(t *testing.T) {
	dir := t.TempDir()
	in, out := filepath.Join(dir, "in.db"), filepath.Join(dir, "out.db")
	c := testCell()
	st, err := Create(in, []byte("partly kept"))
	if err != nil {
		t.Fatal(err)
	}
	err = st.Commit([]TaskResult{
		{CellID: "cell", Cell: c, Seed: 1, From: 0, Records: records(t, c, 1, 0, 5), KeepRecords: true},
		{CellID: "cell", Cell: c, Seed: 1, From: 5, Records: records(t, c, 1, 5, 10)},
	}, nil)
	st.Close()
	if err != nil {
		t.Fatal(err)
	}
	err = MergeStores(out, []string{in})
	if err == nil || !strings.Contains(err.Error(), "holds 10 replicates but the records of only 5") {
		t.Fatalf("merge of a store with 5 of 10 records: %v", err)
	}
	if _, err := os.Stat(out); err == nil {
		t.Fatal("output written")
	}
}

// The output is built under OUT.merging, and a file left there by a killed merge is
// removed first; an input of that name must not be: it used to be deleted, and the
// merge then went on without it.
func TestMergeKeepsAnInputNamedLikeItsTemporary(t *testing.T) {
	dir := t.TempDir()
	a, out := filepath.Join(dir, "a.db"), filepath.Join(dir, "out.db")
	in := out + ".merging"
	storeWith(t, a, 1, 0, 3)
	storeWith(t, in, 2, 0, 3)
	want := contentDigest(t, in)
	if err := MergeStores(out, []string{a, in}); err == nil || !strings.Contains(err.Error(), "rename that input") {
		t.Fatalf("merge whose temporary is an input: %v", err)
	}
	if got := contentDigest(t, in); got != want {
		t.Fatal("the input changed")
	}
	if _, err := os.Stat(out); err == nil {
		t.Fatal("output written")
	}
}

// tamperRecord rewrites one stored record of cell "cell" through change, as damage or a
// hand edit would.
func tamperRecord(t *testing.T, path string, seed, rep uint64, change func(rec *engine.Record)) {
	t.Helper()
	db, err := bolt.Open(path, 0o644, nil)
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	err = db.Update(func(tx *bolt.Tx) error {
		rb := tx.Bucket(bucketCells).Bucket([]byte("cell")).Bucket(keyRecords)
		k := recordKey(seed, rep)
		rec, _, err := engine.DecodeRecord(rb.Get(k))
		if err != nil {
			return err
		}
		change(&rec)
		return rb.Put(k, rec.AppendBinary(nil))
	})
	if err != nil {
		t.Fatal(err)
	}
}

// A stored record holding NaN or an infinity (which the engine never writes) is a clear
// error naming the cell and replicate wherever records are read: merge used to crash the
// process indexing a histogram bin with NaN, and JSON export failed with no word of
// where. A sketch refusing such records is left as it was.
func TestNonFiniteRecordIsAnError(t *testing.T) {
	dir := t.TempDir()
	for i, change := range []func(rec *engine.Record){
		func(rec *engine.Record) { rec.Top[0].Radius = math.NaN() },
		func(rec *engine.Record) { rec.Top[1].Dir[0] = math.Inf(1) },
		func(rec *engine.Record) { rec.Checks[1].W = math.Inf(-1) },
	} {
		in := filepath.Join(dir, fmt.Sprintf("in%d.db", i))
		storeWith(t, in, 3, 0, 6)
		tamperRecord(t, in, 3, 4, change)
		err := MergeStores(filepath.Join(dir, fmt.Sprintf("out%d.db", i)), []string{in})
		if err == nil || !strings.Contains(err.Error(), in) || !strings.Contains(err.Error(), "replicate 4") || !strings.Contains(err.Error(), "non-finite") {
			t.Errorf("case %d: merge: %v", i, err)
		}
		st, err := Open(in, true)
		if err != nil {
			t.Fatal(err)
		}
		err = st.ExportRecords(filepath.Join(dir, fmt.Sprintf("r%d.json", i)), "json")
		if err == nil || !strings.Contains(err.Error(), "cell cell") || !strings.Contains(err.Error(), "replicate 4") {
			t.Errorf("case %d: export: %v", i, err)
		}
		st.Close()
	}
	c := testCell()
	recs := records(t, c, 3, 0, 6)
	sk := NewSketch(c)
	if err := sk.AddRecords(c, 3, 0, recs[:2]); err != nil {
		t.Fatal(err)
	}
	before := sk.AppendBinary(nil)
	recs[4].Checks[0].Z = math.NaN()
	if err := sk.AddRecords(c, 3, 2, recs[2:]); err == nil {
		t.Fatal("a NaN Z was added")
	}
	if !bytes.Equal(sk.AppendBinary(nil), before) {
		t.Fatal("a refused batch changed the sketch")
	}
}
