package coordinator

import (
	"bytes"
	"testing"

	"bbmx/engine"
	pb "bbmx/proto/bbmx/v1"
)

// FuzzValidateResult feeds arbitrary bytes as a range task's records: validation must
// never panic, and whatever it accepts must be records of the task's replicates whose
// canonical encoding is exactly what was sent.
//
//	go test -run XXX -fuzz FuzzValidateResult -fuzztime 60s ./coordinator/
func FuzzValidateResult(f *testing.F) {
	sw := mustSweep(f, testSweep)
	st := newStore(f, sw)
	co, err := Open(st, sw, Options{PerTask: 2})
	if err != nil {
		f.Fatal(err)
	}
	f.Cleanup(co.Close)
	var task *task
	for _, t := range co.byID {
		if t.from == 0 && t.cell.spec.Cell.Model.Dim == 2 {
			task = t
			break
		}
	}
	good := computeTask(f, co.taskMsg(task))
	f.Add(good.Records[0], good.Records[1])
	f.Add(good.Records[1], good.Records[0])
	f.Add(good.Records[0][:10], []byte{})
	f.Fuzz(func(t *testing.T, a, b []byte) {
		req := &pb.SubmitRequest{TaskId: task.id, Records: [][]byte{a, b}}
		cr, err := co.validate(task, statePending, req)
		if err != nil {
			return
		}
		for i, rec := range cr.result.Records {
			if rec.Replicate != task.from+uint64(i) {
				t.Fatalf("accepted record %d is replicate %d", i, rec.Replicate)
			}
			if !bytes.Equal(rec.AppendBinary(nil), req.Records[i]) {
				t.Fatalf("accepted record %d is not in canonical form", i)
			}
		}
	})
}

// FuzzDecodePart: decoding arbitrary bytes as a subtree part never panics, and an
// accepted part re-encodes to the same bytes.
func FuzzDecodePart(f *testing.F) {
	c := engine.Cell{Model: engine.Model{Dim: 2, Sigma: 1, Beta: 1, Children: 2}, Horizon: 3,
		Observe: engine.Observe{Checkpoints: []float64{1}}}.WithDefaults()
	p, err := engine.SimulatePart(c, 1, 0, 1.5, 0, 1)
	if err != nil {
		f.Fatal(err)
	}
	f.Add(p.AppendBinary(nil))
	f.Fuzz(func(t *testing.T, b []byte) {
		q, err := engine.DecodePart(c, b)
		if err != nil {
			return
		}
		if !bytes.Equal(q.AppendBinary(nil), b) {
			t.Fatal("accepted part is not in canonical form")
		}
	})
}
