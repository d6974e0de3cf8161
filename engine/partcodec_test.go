package engine

import (
	"bytes"
	"errors"
	"testing"
)

// A split replicate whose parts travel through their encoding must still merge to
// exactly the unsplit record (the invariant the coordinator relies on).
func TestPartEncodingRoundTrip(t *testing.T) {
	c := Cell{Model: Model{Dim: 3, Sigma: 1, Beta: 1, Children: 2}, Horizon: 5,
		Observe: Observe{Checkpoints: []float64{1, 3}}}.WithDefaults()
	const seed, rep, s0 = 11, 4, 2.0
	whole, err := Simulate(c, seed, rep)
	if err != nil {
		t.Fatal(err)
	}
	roots, err := CountRoots(c, seed, rep, s0)
	if err != nil {
		t.Fatal(err)
	}
	if roots < 3 {
		t.Fatalf("want at least 3 roots at s0 for this test, got %d", roots)
	}
	cuts := []uint64{0, 1, 2, roots}
	var acc, first *Part
	var firstEnc []byte
	for i := 0; i+1 < len(cuts); i++ {
		p, err := SimulatePart(c, seed, rep, s0, cuts[i], cuts[i+1])
		if err != nil {
			t.Fatal(err)
		}
		enc := p.AppendBinary(nil)
		q, err := DecodePart(c, enc)
		if err != nil {
			t.Fatalf("part %d: %v", i, err)
		}
		if !bytes.Equal(q.AppendBinary(nil), enc) {
			t.Fatalf("part %d: encoding does not round-trip", i)
		}
		if acc == nil {
			first, firstEnc = q, enc
			acc = q.Clone()
		} else if err := acc.Merge(q); err != nil {
			t.Fatal(err)
		}
	}
	// Merging into the clone left the first part as it was decoded.
	if !bytes.Equal(first.AppendBinary(nil), firstEnc) {
		t.Fatal("a merge into a clone changed the original part")
	}
	got, err := acc.Record(c)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got.AppendBinary(nil), whole.AppendBinary(nil)) {
		t.Fatal("decoded parts do not merge to the unsplit record")
	}
}

func TestDecodePartRejectsDamage(t *testing.T) {
	c := Cell{Model: Model{Dim: 2, Sigma: 1, Beta: 1, Children: 2}, Horizon: 4,
		Observe: Observe{Checkpoints: []float64{1}}}.WithDefaults()
	p, err := SimulatePart(c, 3, 0, 1.5, 0, 1)
	if err != nil {
		t.Fatal(err)
	}
	enc := p.AppendBinary(nil)
	for n := 0; n < len(enc); n += 1 + len(enc)/50 {
		if _, err := DecodePart(c, enc[:n]); !errors.Is(err, ErrCorruptRecord) {
			t.Fatalf("truncated to %d bytes: want ErrCorruptRecord, got %v", n, err)
		}
	}
	// The same part spelled another way (an overlong varint) is refused: results are
	// identified by a digest of their bytes.
	overlong := append([]byte{enc[0], enc[1] | 0x80, 0}, enc[2:]...) // replicate 3 in two bytes
	if _, err := DecodePart(c, overlong); !errors.Is(err, ErrCorruptRecord) {
		t.Fatalf("overlong replicate varint: want ErrCorruptRecord, got %v", err)
	}
	other := c
	other.Observe.Checkpoints = nil
	if _, err := DecodePart(other.WithDefaults(), enc); err == nil {
		t.Fatal("a part decoded against a cell with other checkpoints")
	}
	// Flipping one bit in the top items (from byte 30 on) must be caught: a radius or a
	// position changes, so the radius is no longer the length of its position.
	damaged := false
	for k := 30; k < len(enc) && !damaged; k++ {
		b2 := bytes.Clone(enc)
		b2[k] ^= 0x40
		if _, err := DecodePart(c, b2); err != nil {
			damaged = true
		}
	}
	if !damaged {
		t.Fatal("no single-byte corruption was detected")
	}
}

// Parts whose counts would wrap around 2^64 when merged (possible only from a corrupt
// or forged part) are refused, and the receiver is left as it was. Deterministic.
func TestMergeRefusesWrappingCounts(t *testing.T) {
	c := Cell{Model: Model{Dim: 2, Sigma: 1, Beta: 1, Children: 2}, Horizon: 4,
		Observe: Observe{Checkpoints: []float64{1, 3}}}.WithDefaults()
	roots, err := CountRoots(c, 5, 0, 3)
	if err != nil || roots < 2 {
		t.Fatalf("%d roots (%v)", roots, err)
	}
	for _, field := range []string{"population", "histogram", "checkpoint"} {
		p, err := SimulatePart(c, 5, 0, 3, 0, 1)
		if err != nil {
			t.Fatal(err)
		}
		q, err := SimulatePart(c, 5, 0, 3, 1, roots)
		if err != nil {
			t.Fatal(err)
		}
		switch field {
		case "population":
			q.pop = -p.pop
		case "histogram":
			i := len(p.hist) - 1
			p.hist[i]++
			q.hist[i] = -p.hist[i]
		case "checkpoint":
			p.checks[0].n++
			q.checks[0].n = -p.checks[0].n
		}
		before := p.Clone()
		if err := p.Merge(q); err == nil {
			t.Fatalf("%s: merging wrapping counts succeeded", field)
		}
		if p.pop != before.pop || p.To != before.To {
			t.Fatalf("%s: the refused merge changed the receiver", field)
		}
	}
}
