package results

import (
	"bytes"
	"context"
	"math/rand/v2"
	"strings"
	"testing"

	"bbmx/engine"
)

func testCell() engine.Cell {
	return engine.Cell{Model: engine.DefaultModel(), Horizon: 3, Observe: engine.Observe{Checkpoints: []float64{1, 2}}}.WithDefaults()
}

func records(t testing.TB, c engine.Cell, seed, from, to uint64) []engine.Record {
	t.Helper()
	recs, err := engine.Batch{Cell: c, Seed: seed, From: from, To: to}.Run(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	return recs
}

// Merging task sketches in any order and grouping gives byte-identical sketches
// (property test over random partitions; the invariant is exact, no false alarms).
func TestSketchMergeOrderIndependent(t *testing.T) {
	c := testCell()
	recs := records(t, c, 4, 0, 300)
	whole := NewSketch(c)
	if err := whole.AddRecords(c, 4, 0, recs); err != nil {
		t.Fatal(err)
	}
	want := whole.AppendBinary(nil)
	r := rand.New(rand.NewPCG(8, 9))
	for trial := 0; trial < 30; trial++ {
		// cut [0,300) into random tasks
		var parts []*Sketch
		for lo := 0; lo < 300; {
			hi := min(300, lo+1+r.IntN(40))
			s := NewSketch(c)
			if err := s.AddRecords(c, 4, uint64(lo), recs[lo:hi]); err != nil {
				t.Fatal(err)
			}
			parts = append(parts, s)
			lo = hi
		}
		r.Shuffle(len(parts), func(i, j int) { parts[i], parts[j] = parts[j], parts[i] })
		// merge in a random tree shape
		for len(parts) > 1 {
			i := r.IntN(len(parts) - 1)
			if err := parts[i].Merge(parts[i+1]); err != nil {
				t.Fatal(err)
			}
			parts = append(parts[:i+1], parts[i+2:]...)
		}
		if got := parts[0].AppendBinary(nil); !bytes.Equal(got, want) {
			t.Fatalf("trial %d: merged sketch differs from the whole", trial)
		}
	}
	if len(whole.Ranges) != 1 || whole.Ranges[0] != (Range{4, 0, 300}) {
		t.Fatalf("ranges %v", whole.Ranges)
	}
}

func TestSketchRefusesOverlap(t *testing.T) {
	c := testCell()
	a, b := NewSketch(c), NewSketch(c)
	if err := a.AddRecords(c, 1, 0, records(t, c, 1, 0, 10)); err != nil {
		t.Fatal(err)
	}
	if err := b.AddRecords(c, 1, 5, records(t, c, 1, 5, 15)); err != nil {
		t.Fatal(err)
	}
	before := a.AppendBinary(nil)
	err := a.Merge(b)
	if err == nil || !strings.Contains(err.Error(), "overlap") {
		t.Fatalf("overlap not refused: %v", err)
	}
	if !bytes.Equal(before, a.AppendBinary(nil)) {
		t.Fatal("a refused merge changed the sketch")
	}
	// The same replicate numbers under another seed are independent replicates: allowed.
	d := NewSketch(c)
	if err := d.AddRecords(c, 2, 0, records(t, c, 2, 0, 10)); err != nil {
		t.Fatal(err)
	}
	if err := a.Merge(d); err != nil || a.N != 20 {
		t.Fatalf("different seeds should merge: %v (N=%d)", err, a.N)
	}
}

func TestSketchMeanMatchesRecords(t *testing.T) {
	c := testCell()
	recs := records(t, c, 3, 0, 100)
	s := NewSketch(c)
	if err := s.AddRecords(c, 3, 0, recs); err != nil {
		t.Fatal(err)
	}
	var sum float64
	for _, r := range recs {
		sum += r.MaxRadius() - c.Model.Centring(c.Horizon)
	}
	m, se := s.MeanShift()
	if d := m - sum/100; d > 1e-12 || d < -1e-12 || !(se > 0) {
		t.Fatalf("mean %v vs %v, se %v", m, sum/100, se)
	}
	var hist uint64
	for _, h := range s.ShiftHist {
		hist += h
	}
	if hist != 100 {
		t.Fatalf("histogram holds %d, want 100", hist)
	}
}

func TestSketchEncodingRoundTrip(t *testing.T) {
	c := testCell()
	s := NewSketch(c)
	if err := s.AddRecords(c, 6, 10, records(t, c, 6, 10, 60)); err != nil {
		t.Fatal(err)
	}
	enc := s.AppendBinary(nil)
	back, err := DecodeSketch(enc)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(back.AppendBinary(nil), enc) {
		t.Fatal("round trip changed the sketch")
	}
	for _, cut := range []int{0, 1, len(enc) / 2, len(enc) - 1} {
		if _, err := DecodeSketch(enc[:cut]); err == nil {
			t.Errorf("truncated sketch (%d of %d bytes) accepted", cut, len(enc))
		}
	}
}
