package engine

import (
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

// ulps is the distance between two finite floats of the same sign in units in the last
// place (0 if equal).
func ulps(a, b float64) uint64 {
	if a == b {
		return 0
	}
	if math.Signbit(a) != math.Signbit(b) {
		return math.MaxUint64
	}
	x, y := math.Float64bits(math.Abs(a)), math.Float64bits(math.Abs(b))
	if x > y {
		return x - y
	}
	return y - x
}

// TestPortableMath: the engine's portable elementary functions agree with the math
// package to within two ulps for exp, log, sin and cos (each is within about one ulp of
// the true value, so they may differ by two: at x = 20.493927793861168 the math
// package's Exp is 1.1 ulp off and pexp 0.9, by a 50-digit computation, derived), over
// their whole ranges and the special values; the series for (1 - e^{-y})/y within 4 ulps of -Expm1(-y)/y; the log-gamma
// table within 1e-14 of math.Lgamma. Deterministic inputs.
func TestPortableMath(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	check := func(name string, x, got, want float64, tol uint64) {
		t.Helper()
		if d := ulps(got, want); d > tol {
			t.Fatalf("%s(%v) = %v, math package %v (%d ulps apart)", name, x, got, want, d)
		}
	}
	for _, x := range []float64{0, -0.0, 1e-300, -1e-300, 1e-10, 1, -1, 0.5, 700, -745, 710, -746, math.Inf(1), math.Inf(-1)} {
		if got, want := pexp(x), math.Exp(x); !(got == want || ulps(got, want) <= 2) {
			t.Fatalf("pexp(%v) = %v, math.Exp %v", x, got, want)
		}
	}
	// e^709.7 = 1.65e308 is finite; math.Exp on amd64 returns +Inf there
	if y := pexp(709.7); math.IsInf(y, 0) || y < 1.65e308 || y > 1.66e308 {
		t.Fatalf("pexp(709.7) = %v", y)
	}
	if !math.IsNaN(pexp(math.NaN())) || !math.IsNaN(plog(math.NaN())) || !math.IsNaN(plog(-1)) || !math.IsInf(plog(0), -1) {
		t.Fatal("special values of pexp or plog")
	}
	for i := 0; i < 200000; i++ {
		x := -745 + 1445*r.Float64()
		if i%2 == 0 {
			x = 20 * r.NormFloat64()
		}
		check("pexp", x, pexp(x), math.Exp(x), 2)
		// log over every binade of normal numbers (subnormals below)
		y := math.Ldexp(0.5+r.Float64(), r.IntN(2044)-1020)
		if y > 0 && !math.IsInf(y, 0) {
			check("plog", y, plog(y), math.Log(y), 2)
		}
		y = 1 + 1e-3*r.NormFloat64()
		check("plog", y, plog(y), math.Log(y), 2)
		a := 1e4 * r.Float64()
		if i%3 == 0 {
			a = 8 * r.Float64()
		}
		s, c := psincos(a)
		check("sin", a, s, math.Sin(a), 2)
		check("cos", a, c, math.Cos(a), 2)
		z := 3 * r.Float64()
		if i%2 == 0 {
			z = math.Ldexp(r.Float64(), -r.IntN(60))
		}
		want := 1.0
		if z > 0 {
			want = -math.Expm1(-z) / z
		}
		check("oneMinusExpOver", z, oneMinusExpOver(z), want, 4)
	}
	// Subnormals, against log(x 2^100) - 100 log 2 on normal numbers (math.Log on amd64
	// is off there: it gives -709.09 for 3.5e-312, whose log is -717.15).
	for i := 0; i < 1000; i++ {
		x := math.Ldexp(0.5+r.Float64(), -1030-r.IntN(40))
		want := math.Log(math.Ldexp(x, 100)) - 100*math.Ln2
		if math.Abs(plog(x)-want) > 1e-13*math.Abs(want) {
			t.Fatalf("plog(%v) = %v, want %v", x, plog(x), want)
		}
	}
	for d := 1; d < len(lgammaHalf); d++ {
		want, _ := math.Lgamma(float64(d) / 2)
		if math.Abs(lgammaHalf[d]-want) > 1e-14*math.Max(1, math.Abs(want)) {
			t.Errorf("lgammaHalf[%d] = %v, math.Lgamma %v", d, lgammaHalf[d], want)
		}
	}
}

// TestRecordPathsUsePortableMath: no file of the engine that computes records calls the
// math package's elementary functions, whose last bit depends on the machine (see
// fmath.go); law/ (the reference solver) and the cost estimates are not records.
func TestRecordPathsUsePortableMath(t *testing.T) {
	banned := regexp.MustCompile(`math\.(Exp|Exp2|Expm1|Log|Log1p|Log2|Log10|Pow|Sin|Cos|Tan|Sincos|Atan|Atan2|Asin|Acos|Sinh|Cosh|Tanh|Lgamma|Gamma|Erf|Erfc|Cbrt|Hypot)\(`)
	allowed := map[string]bool{"fmath.go": true}
	files, err := filepath.Glob("*.go")
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range files {
		if strings.HasSuffix(f, "_test.go") || allowed[f] {
			continue
		}
		b, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		for i, line := range strings.Split(string(b), "\n") {
			if m := banned.FindString(line); m != "" && !strings.HasPrefix(strings.TrimSpace(line), "//") {
				t.Errorf("%s:%d calls %s: use the portable functions of fmath.go", f, i+1, strings.TrimSuffix(m, "("))
			}
		}
	}
}
