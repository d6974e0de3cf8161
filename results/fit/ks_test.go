package fit

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// Classical asymptotic critical values of √n D: 1.2238 (10%), 1.3581 (5%),
// 1.6276 (1%) (from memory; standard Kolmogorov–Smirnov tables). Rounded to
// four digits, so the tolerance is 2e-4 on the level.
func TestKolmogorovSFCritical(t *testing.T) {
	for _, c := range [][2]float64{{1.2238, 0.10}, {1.3581, 0.05}, {1.6276, 0.01}} {
		if p := KolmogorovSF(c[0]); math.Abs(p-c[1]) > 2e-4 {
			t.Errorf("Q(%v) = %v, want %v", c[0], p, c[1])
		}
	}
	// The two series agree where they meet (derived).
	x := 1.0
	var s float64
	for k := 1; k <= 20; k++ {
		u := float64(2*k - 1)
		s += math.Exp(-u * u * math.Pi * math.Pi / (8 * x * x))
	}
	if d := math.Abs(KolmogorovSF(1) - (1 - math.Sqrt(2*math.Pi)/x*s)); d > 1e-14 {
		t.Errorf("series mismatch %v at x = 1", d)
	}
}

// Exact small cases (derived): D_1 = max(U, 1-U), so P(D_1 >= d) = 2(1-d) for
// 1/2 <= d <= 1; and D_n >= 1/(2n) always.
func TestKolmogorovExactSmall(t *testing.T) {
	for _, d := range []float64{0.5, 0.6, 0.75, 0.99} {
		if p := KolmogorovExactSF(1, d); math.Abs(p-2*(1-d)) > 1e-14 {
			t.Errorf("n=1 d=%v: %v, want %v", d, p, 2*(1-d))
		}
	}
	if p := KolmogorovExactSF(20, 0.02); p != 1 {
		t.Errorf("P(D_20 >= 0.02) = %v, want 1", p)
	}
	if p := KolmogorovExactSF(20, 1); p != 0 {
		t.Errorf("P(D_20 >= 1) = %v, want 0", p)
	}
}

// The matrix method and the doubled one-sided tail agree near the switch
// n d² = 4 to the size of the neglected two-crossing probability, about
// e^{-6 n d²}/2 ≈ 2e-11 relative (derived); checked to 1e-9. At n d² = 2.2 they
// differ by about e^{-13.2}/2 ≈ 1e-6 relative (derived); checked to lie in
// (1e-7, 1e-5), which shows the doubled tail is not exact there.
func TestKolmogorovBranchesAgree(t *testing.T) {
	for _, n := range []int{200, 1000, 5000} {
		d := math.Sqrt(4 / float64(n))
		a := 1 - kolmogorovMTW(n, d)
		b := 2 * SmirnovSF(n, d)
		if !relNear(a, b, 1e-9) {
			t.Errorf("n=%d d=%v: matrix %v, doubled one-sided %v", n, d, a, b)
		}
		d = math.Sqrt(2.2 / float64(n))
		a = 1 - kolmogorovMTW(n, d)
		b = 2 * SmirnovSF(n, d)
		if r := (b - a) / a; !(r > 1e-7 && r < 1e-5) {
			t.Errorf("n=%d d=%v: doubled one-sided exceeds the matrix value by %v relative, want about 1e-6", n, d, r)
		}
	}
}

// Under the null the one-sample p-value is uniform (valid test): rejection
// count at 5% over 200 normal samples of 40.
func TestKSOneSampleNull(t *testing.T) {
	var rej int
	for r := range reps {
		res, err := KSOneSample(normals(uint64(9000+r), 40, 0, 1), distuv.UnitNormal.CDF)
		if err != nil {
			t.Fatal(err)
		}
		if res.Method != "exact" {
			t.Fatalf("method %q", res.Method)
		}
		if res.P < 0.05 {
			rej++
		}
	}
	checkRejections(t, "KS one-sample", rej)
}

// The exact two-sample p-value against brute-force enumeration of all
// C(9,4) = 126 interleavings of samples of 4 and 5 (derived).
func TestKSTwoSampleEnumeration(t *testing.T) {
	const n1, n2 = 4, 5
	// Every subset of positions 0..8 of size 4 is one interleaving; sample one
	// by rank.
	var ds []float64
	for mask := 0; mask < 1<<(n1+n2); mask++ {
		if popcount(mask) != n1 {
			continue
		}
		var x, y []float64
		for i := 0; i < n1+n2; i++ {
			if mask>>i&1 == 1 {
				x = append(x, float64(i))
			} else {
				y = append(y, float64(i))
			}
		}
		r, err := KSTwoSample(x, y)
		if err != nil {
			t.Fatal(err)
		}
		ds = append(ds, r.D)
	}
	if len(ds) != 126 {
		t.Fatalf("%d interleavings", len(ds))
	}
	for _, d := range ds {
		var k int
		for _, e := range ds {
			if e >= d-1e-12 {
				k++
			}
		}
		want := float64(k) / 126
		x, y := sampleWithD(d, ds)
		r, _ := KSTwoSample(x, y)
		if math.Abs(r.P-want) > 1e-13 {
			t.Errorf("D = %v: p = %v, enumeration %v", d, r.P, want)
		}
	}
}

func popcount(m int) int {
	var c int
	for ; m > 0; m >>= 1 {
		c += m & 1
	}
	return c
}

// sampleWithD returns the first interleaving of 4 and 5 points with statistic d.
func sampleWithD(d float64, _ []float64) (x, y []float64) {
	for mask := 0; mask < 1<<9; mask++ {
		if popcount(mask) != 4 {
			continue
		}
		x, y = x[:0], y[:0]
		for i := 0; i < 9; i++ {
			if mask>>i&1 == 1 {
				x = append(x, float64(i))
			} else {
				y = append(y, float64(i))
			}
		}
		if r, _ := KSTwoSample(x, y); r.D == d {
			return x, y
		}
	}
	return nil, nil
}

// Two-sample null calibration, samples of 30 and 45.
func TestKSTwoSampleNull(t *testing.T) {
	var rej int
	for r := range reps {
		res, err := KSTwoSample(normals(uint64(9500+r), 30, 0, 1), normals(uint64(9800+r), 45, 0, 1))
		if err != nil {
			t.Fatal(err)
		}
		if res.P < 0.05 {
			rej++
		}
	}
	checkRejections(t, "KS two-sample", rej)
}

func TestKSBadInput(t *testing.T) {
	_, err := KSOneSample(nil, distuv.UnitNormal.CDF)
	wantErr(t, err, "0 points")
	_, err = KSOneSample([]float64{1}, func(float64) float64 { return 2 })
	wantErr(t, err, "gives 2", "x = 1")
	_, err = KSUniform([]float64{1}, 1, 0)
	wantErr(t, err, "[1, 0]")
	_, err = KSTwoSample([]float64{1}, []float64{math.Inf(1)})
	wantErr(t, err, "second sample[0]", "+Inf")
}
