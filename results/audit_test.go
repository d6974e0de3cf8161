package results

import (
	"math"
	"path/filepath"
	"strings"
	"testing"

	bolt "go.etcd.io/bbolt"

	"bbmx/engine"
)

func TestAuditCatchesTamperedRecord(t *testing.T) {
	path := filepath.Join(t.TempDir(), "a.db")
	storeWith(t, path, 2, 0, 20)
	st, err := Open(path, false)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	rep, err := st.Audit(100, 1)
	if err != nil || rep.Checked != 20 || len(rep.Mismatches) != 0 {
		t.Fatalf("clean store: %+v %v", rep, err)
	}
	// Tamper: replace replicate 7's record with a copy whose maximal radius is nudged.
	err = st.db.Update(func(tx *bolt.Tx) error {
		rb := tx.Bucket(bucketCells).Bucket([]byte("cell")).Bucket(keyRecords)
		k := recordKey(2, 7)
		rec, _, err := engine.DecodeRecord(rb.Get(k))
		if err != nil {
			return err
		}
		rec.Top[0].Radius += 1e-12
		return rb.Put(k, rec.AppendBinary(nil))
	})
	if err != nil {
		t.Fatal(err)
	}
	rep, err = st.Audit(100, 1)
	if err != nil || len(rep.Mismatches) != 1 || rep.Mismatches[0].Rep != 7 {
		t.Fatalf("tampered record not caught: %+v %v", rep, err)
	}
}

// Damaged records are reported as mismatches and the audit goes on: one that does not
// decode and one holding NaN used to stop the audit with an error, so the rest of the
// store went unchecked.
func TestAuditReportsDamagedRecords(t *testing.T) {
	path := filepath.Join(t.TempDir(), "a.db")
	storeWith(t, path, 2, 0, 20)
	tamperRecord(t, path, 2, 7, func(rec *engine.Record) { rec.Top[0].Radius = math.NaN() })
	db, err := bolt.Open(path, 0o644, nil)
	if err != nil {
		t.Fatal(err)
	}
	err = db.Update(func(tx *bolt.Tx) error {
		return tx.Bucket(bucketCells).Bucket([]byte("cell")).Bucket(keyRecords).Put(recordKey(2, 12), []byte("not a record"))
	})
	db.Close()
	if err != nil {
		t.Fatal(err)
	}
	st, err := Open(path, true)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	rep, err := st.Audit(100, 1)
	if err != nil || rep.Checked != 20 || len(rep.Mismatches) != 2 || rep.Mismatches[0].Rep != 7 || rep.Mismatches[1].Rep != 12 {
		t.Fatalf("damaged records: %+v %v", rep, err)
	}
}

// A store that keeps no records gives an error, not a passed audit of 0 replicates.
func TestAuditWithoutRecords(t *testing.T) {
	c := testCell()
	st, err := Create(filepath.Join(t.TempDir(), "s.db"), []byte("spec"))
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	if err := st.Commit([]TaskResult{{CellID: "cell", Cell: c, Seed: 1, Records: records(t, c, 1, 0, 4)}}, nil); err != nil {
		t.Fatal(err)
	}
	rep, err := st.Audit(10, 1)
	if err == nil || !strings.Contains(err.Error(), "no per-replicate records") || len(rep.NoRecords) != 1 {
		t.Fatalf("audit of a store without records: %+v %v", rep, err)
	}
}
