package fit

import (
	"testing"
)

// The bootstrap is a pure function of its seed, and its percentile interval
// for the mean of Exp(1) samples of 100 covers 1 at the coverage-check rate.
func TestBootstrap(t *testing.T) {
	x := exponentials(1, 100, 1)
	orig := append([]float64(nil), x...)
	a, err := Bootstrap(x, mean, 300, 0.95, 42)
	if err != nil {
		t.Fatal(err)
	}
	b, _ := Bootstrap(x, mean, 300, 0.95, 42)
	c, _ := Bootstrap(x, mean, 300, 0.95, 43)
	if a != b {
		t.Errorf("same seed, different results: %+v vs %+v", a, b)
	}
	if a == c {
		t.Errorf("different seeds gave identical results %+v", a)
	}
	for i := range x {
		if x[i] != orig[i] {
			t.Fatal("bootstrap modified its input")
		}
	}
	var hits int
	for r := range reps {
		iv, err := Bootstrap(exponentials(uint64(15000+r), 100, 1), mean, 400, 0.95, uint64(r))
		if err != nil {
			t.Fatal(err)
		}
		if iv.Lo <= 1 && 1 <= iv.Hi {
			hits++
		}
	}
	checkCoverage(t, "bootstrap mean of Exp(1)", hits)

	_, err = Bootstrap(x, mean, 5, 0.95, 1)
	wantErr(t, err, "got 5")
	_, err = Bootstrap(x, mean, 100, 95, 1)
	wantErr(t, err, "level 95")
}
