package results

import (
	"path/filepath"
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
