package fit

import (
	"math"
	"testing"
)

// Rayleigh test: valid under uniformity in d = 2, 3, 5 (rejections at 5%), and
// powerful against a drift (p tiny for a clear preferred direction).
func TestRayleighNull(t *testing.T) {
	for _, d := range []int{2, 3, 5} {
		var rej int
		for r := range reps {
			res, err := Rayleigh(unitVectors(uint64(13000+100*d+r), 100, d, 0))
			if err != nil {
				t.Fatal(err)
			}
			if res.P < 0.05 {
				rej++
			}
		}
		checkRejections(t, "Rayleigh d="+string(rune('0'+d)), rej)
	}
	res, err := Rayleigh(unitVectors(1, 200, 3, 1))
	if err != nil || res.P > 1e-6 {
		t.Errorf("drifted directions: p = %v, %v", res.P, err)
	}
}

// For d = 2 the χ²_2 tail is e^{-s/2} (derived, exponential law).
func TestRayleighTwoDimensional(t *testing.T) {
	u := [][]float64{{1, 0}, {0, 1}, {math.Sqrt(0.5), math.Sqrt(0.5)}}
	res, err := Rayleigh(u)
	if err != nil {
		t.Fatal(err)
	}
	mx, my := (1+math.Sqrt(0.5))/3, (1+math.Sqrt(0.5))/3
	s := 2 * 3 * (mx*mx + my*my)
	if !relNear(res.Stat, s, 1e-14) || !relNear(res.P, math.Exp(-s/2), 1e-12) {
		t.Errorf("got %+v, want stat %v p %v", res, s, math.Exp(-s/2))
	}
	_, err = Rayleigh([][]float64{{1}})
	wantErr(t, err, "dimension >= 2, got 1")
	_, err = Rayleigh([][]float64{{1, 1}})
	wantErr(t, err, "direction 0 has length 1.414")
}

// Angles of uniform planar directions are uniform on [0, 2π): KS null rate.
func TestAnglesUniform(t *testing.T) {
	var rej int
	for r := range reps {
		a, err := Angles(unitVectors(uint64(14000+r), 60, 2, 0))
		if err != nil {
			t.Fatal(err)
		}
		res, err := KSUniform(a, 0, 2*math.Pi)
		if err != nil {
			t.Fatal(err)
		}
		if res.P < 0.05 {
			rej++
		}
	}
	checkRejections(t, "angles KS", rej)
	a, _ := Angles([][]float64{{0, -1}, {-1, 0}})
	if !relNear(a[0], 1.5*math.Pi, 1e-15) || !relNear(a[1], math.Pi, 1e-15) {
		t.Errorf("angles %v", a)
	}
}

// Exact binomial values (derived): 10 trials, 0 plus signs: p = 2/1024;
// 1 plus sign: 2·11/1024; 4: 2·386/1024 (1+10+45+120+210 = 386); 5: 1.
func TestSignTest(t *testing.T) {
	for _, c := range []struct {
		k int
		p float64
	}{{0, 2.0 / 1024}, {10, 2.0 / 1024}, {1, 22.0 / 1024}, {5, 1}, {4, 772.0 / 1024}} {
		r, err := SignTest(c.k, 10)
		if err != nil || !relNear(r.P, c.p, 1e-12) {
			t.Errorf("k=%d: %v, want %v (%v)", c.k, r.P, c.p, err)
		}
	}
	_, err := SignTest(11, 10)
	wantErr(t, err, "count 11 out of 10")
}
