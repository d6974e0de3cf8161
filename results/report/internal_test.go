package report

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"

	"bbmx/engine"
	"bbmx/results"
	"bbmx/results/fit"
)

// gumbelSample draws n values of a Gumbel(mu, beta) by inversion.
func gumbelSample(rng *rand.Rand, n int, mu, beta float64) []float64 {
	xs := make([]float64, n)
	for i := range xs {
		xs[i] = mu - beta*math.Log(-math.Log(rng.Float64()))
	}
	return xs
}

// sketchOf bins xs into a sketch of a d = 1 cell (only the fields the fits read).
func sketchOf(t *testing.T, xs []float64) *results.Sketch {
	t.Helper()
	c := engine.Cell{Model: engine.Model{Dim: 1, Sigma: 1, Beta: 1, Children: 2}, Horizon: 1}
	sk := results.NewSketch(c)
	for _, x := range xs {
		p := x
		for k := range sk.Shift {
			sk.Shift[k].Add(p)
			p *= x
		}
		sk.ShiftHist[results.ShiftBinIndex(x)]++
		sk.N++
	}
	return sk
}

// The sketch-only moments and binned quantiles recover a Gumbel's mean, standard
// deviation and quantiles. Theory: Gumbel mean mu + gamma beta, variance pi^2 beta^2/6
// (NIST/SEMATECH e-Handbook of Statistical Methods, Extreme Value Type I distribution);
// p-quantile mu - beta log(-log p) (the same handbook page). 200 fixed-seed samples of
// 400; a 95% interval misses 5% of the time, so the number of misses is Binomial(200,
// 0.05) under correct coverage; we accept 2..20, which fails with probability about
// 0.2% when the coverage is right (derived, binomial tail).
func TestSketchEstimatesCoverage(t *testing.T) {
	const mu, beta, n, trials = 0.4, 0.7, 400, 200
	want := fit.Gumbel{Mu: mu, Beta: beta}
	rng := rand.New(rand.NewPCG(1, 2))
	z := distuv.UnitNormal.Quantile(0.975)
	miss := map[string]int{}
	for i := 0; i < trials; i++ {
		xs := gumbelSample(rng, n, mu, beta)
		sk := sketchOf(t, xs)
		mean, sd, seMean, seSD := sk.ShiftMoments()
		if math.Abs(mean-want.Mean()) > z*seMean {
			miss["mean"]++
		}
		if math.Abs(sd-want.StdDev()) > z*seSD {
			miss["sd"]++
		}
		for _, p := range []float64{0.1, 0.5, 0.9} {
			v, lo, hi, err := histQuantile(sk.ShiftHist, p, z)
			if err != nil {
				t.Fatal(err)
			}
			q := want.Quantile(p)
			if !(lo <= v && v <= hi) {
				t.Fatalf("quantile %v: estimate %v outside its interval [%v, %v]", p, v, lo, hi)
			}
			if q < lo || q > hi {
				miss[map[float64]string{0.1: "q10", 0.5: "q50", 0.9: "q90"}[p]]++
			}
		}
	}
	for _, k := range []string{"mean", "sd", "q10", "q50", "q90"} {
		t.Logf("%s: %d of %d intervals miss", k, miss[k], trials)
		if miss[k] < 2 || miss[k] > 20 {
			t.Errorf("%s: %d of %d 95%% intervals miss the truth (want 2..20)", k, miss[k], trials)
		}
	}
}

// Gumbel moments of the sketch sums match the handbook formulas on a large sample:
// mean mu + gamma beta and sd pi beta / sqrt 6 (NIST/SEMATECH e-Handbook, Extreme Value
// Type I). Fixed seed; the tolerance is 4 standard errors (false-alarm rate below 1e-4
// per check, derived from the normal tail).
func TestSketchMomentsGumbelHandbook(t *testing.T) {
	const mu, beta = -1.2, 0.7071067811865476
	xs := gumbelSample(rand.New(rand.NewPCG(3, 4)), 100000, mu, beta)
	mean, sd, seMean, seSD := sketchOf(t, xs).ShiftMoments()
	wantMean := mu + 0.5772156649015329*beta // Euler-Mascheroni constant, from memory (matches fit.EulerGamma)
	wantSD := math.Pi * beta / math.Sqrt(6)
	if math.Abs(mean-wantMean) > 4*seMean {
		t.Errorf("mean %v, handbook %v (SE %v)", mean, wantMean, seMean)
	}
	if math.Abs(sd-wantSD) > 4*seSD {
		t.Errorf("sd %v, handbook %v (SE %v)", sd, wantSD, seSD)
	}
}

// The grouped KS statistic is at most the ungrouped one, and its p-value under the true
// law is rarely small: 200 fixed-seed samples, at most 3 with p < 0.01 (under the null
// the grouped p-value is conservative, so misses are Binomial(200, <= 0.01): P(>3) < 15%
// at the boundary and far less in practice; derived). Against a shifted law it rejects.
func TestGroupedKS(t *testing.T) {
	g := fit.Gumbel{Mu: 0, Beta: 0.7}
	rng := rand.New(rand.NewPCG(5, 6))
	small := 0
	for i := 0; i < 200; i++ {
		xs := gumbelSample(rng, 500, g.Mu, g.Beta)
		sk := sketchOf(t, xs)
		gk := groupedKS(sk.ShiftHist, g.CDF)
		full, err := fit.KSOneSample(xs, g.CDF)
		if err != nil {
			t.Fatal(err)
		}
		if gk.D > full.D+1e-12 {
			t.Fatalf("grouped D %v exceeds the ungrouped %v", gk.D, full.D)
		}
		if gk.P < 0.01 {
			small++
		}
	}
	if small > 3 {
		t.Errorf("%d of 200 grouped KS p-values below 0.01 under the true law", small)
	}
	xs := gumbelSample(rng, 2000, 0.3, 0.7)
	if gk := groupedKS(sketchOf(t, xs).ShiftHist, g.CDF); gk.P > 1e-6 {
		t.Errorf("a law shifted by 0.3 is not rejected: D=%v p=%v", gk.D, gk.P)
	}
}

// The Wilson interval covers a known share at close to its level: 2000 fixed-seed
// binomial draws of n = 300, p = 0.2; the miss count of a 95% interval lies in 70..130
// unless the coverage is off (P(outside) about 1e-4 when the coverage is 95%; derived,
// normal approximation to the binomial).
func TestWilsonCoverage(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 8))
	z := distuv.UnitNormal.Quantile(0.975)
	miss := 0
	for i := 0; i < 2000; i++ {
		k := 0
		for j := 0; j < 300; j++ {
			if rng.Float64() < 0.2 {
				k++
			}
		}
		lo, hi := wilson(k, 300, z)
		if 0.2 < lo || 0.2 > hi {
			miss++
		}
	}
	if miss < 70 || miss > 130 {
		t.Errorf("Wilson 95%% interval missed %d of 2000", miss)
	}
}

// anglePIT is exact on densities it represents exactly: a constant gives the uniform
// transform a/(2 pi), and a piecewise-linear hat gives the closed-form integral (derived).
func TestAnglePIT(t *testing.T) {
	flat := []float64{2, 2, 2, 2, 2, 2, 2, 2}
	for _, a := range []float64{0, 0.3, 1, 3, 5.5, 2*math.Pi - 1e-9} {
		v, ok := anglePIT(flat, a)
		if !ok || math.Abs(v-a/(2*math.Pi)) > 1e-12 {
			t.Errorf("flat: PIT(%v) = %v, want %v", a, v, a/(2*math.Pi))
		}
	}
	// Mass only on the segment [0, h] rising from 0 to 1 and [h, 2h] falling back
	// (f = 1 at grid angle h, negative values elsewhere are clipped to 0). With n = 4,
	// h = pi/2: the mass is h; the CDF at angle t <= h is t^2/(2h)/h.
	hat := []float64{-3, 1, -1, -2}
	h := math.Pi / 2
	for _, tt := range []float64{0.2, 0.9, h} {
		v, _ := anglePIT(hat, tt)
		if want := tt * tt / (2 * h) / h; math.Abs(v-want) > 1e-12 {
			t.Errorf("hat: PIT(%v) = %v, want %v", tt, v, want)
		}
	}
	if v, _ := anglePIT(hat, 3*h); v != 1 {
		t.Errorf("hat: PIT beyond the mass = %v, want 1", v)
	}
	if _, ok := anglePIT([]float64{-1, -2, 0}, 1); ok {
		t.Error("zero mass must be reported")
	}
}

// The many-to-one mass over the whole line is E[N_T] = e^{gT} (a bin of every radius),
// and secondMomentN matches E[N_t(N_t-1)] = 2e^{2t} - 2e^t of binary branching at rate 1
// (Yule process, handbook fact quoted in SPEC §3) plus E[N_t] = e^t.
func TestFirstAndSecondMoments(t *testing.T) {
	m := engine.Model{Dim: 3, Sigma: 1, Beta: 1, Children: 2}
	for _, T := range []float64{0.5, 2, 6} {
		all := radialMass(m, T, -m.Centring(T)-1, math.Inf(1))
		if math.Abs(all/math.Exp(T)-1) > 1e-12 {
			t.Errorf("T=%v: total mass %v, want e^T = %v", T, all, math.Exp(T))
		}
		split := radialMass(m, T, -m.Centring(T)-1, 0.3) + radialMass(m, T, 0.3, math.Inf(1))
		if math.Abs(split-all) > 1e-9*all {
			t.Errorf("T=%v: bins do not add up: %v vs %v", T, split, all)
		}
		want := 2*math.Exp(2*T) - 2*math.Exp(T) + math.Exp(T)
		if got := secondMomentN(m, T); math.Abs(got-want) > 1e-12*want {
			t.Errorf("T=%v: E[N^2] = %v, want %v", T, got, want)
		}
	}
	// One particle with no branching in the limit T -> 0: the chi-square tail of |B_T|
	// (gonum distuv, SPEC §3 many-to-one row): P(|B_T| > r) = P(chi^2_d > r^2/T).
	T := 1e-9
	m1 := engine.Model{Dim: 2, Sigma: 1, Beta: 1, Children: 2}
	r := 2e-5
	got := radialMass(m1, T, r-m1.Centring(T), math.Inf(1))
	want := math.Exp(T) * distuv.ChiSquared{K: 2}.Survival(r*r/T)
	if math.Abs(got-want) > 1e-9 {
		t.Errorf("small T: %v, want %v", got, want)
	}
}

func testBuilder(t *testing.T) *builder {
	t.Helper()
	opt, err := Options{Seed: 3}.withDefaults()
	if err != nil {
		t.Fatal(err)
	}
	return &builder{opt: opt, rep: &Report{}}
}

// The centring fit across horizons recovers a = v and b = (d-4)/(2 theta) when
// R*_T - m_T is exactly a fixed Gumbel at every horizon (synthetic: then the median and
// mean of R*_T are v T + b log T + const). 100 fixed-seed trials of six horizons with
// 300 values each; a 95% interval misses 5% of the time, so more than 15 misses of 100
// has probability about 1e-4 when the intervals are right (derived, binomial tail).
func TestCentringRecovery(t *testing.T) {
	m := engine.Model{Dim: 2, Sigma: 1, Beta: 1, Children: 2}
	rng := rand.New(rand.NewPCG(9, 10))
	miss := map[string]int{}
	for trial := 0; trial < 100; trial++ {
		var cs []*cellData
		b := testBuilder(t)
		for _, T := range []float64{2, 4, 8, 16, 32, 64} {
			xs := gumbelSample(rng, 300, 0.3, 0.7)
			c := &cellData{cell: engine.Cell{Model: m, Horizon: T}, sk: sketchOf(t, xs)}
			for _, x := range xs {
				c.reps = append(c.reps, replicate{x: x})
			}
			// the median as builder.cell estimates it from records
			q, err := fit.Quantile(xs, 0.5, b.opt.Level)
			if err != nil {
				t.Fatal(err)
			}
			c.median, c.medianSE = q.Value, q.SE
			cs = append(cs, c)
		}
		if _, ok := b.fitCentring(cs); !ok {
			t.Fatalf("no fit: %v", b.rep.Skipped)
		}
		for _, r := range b.rep.Rows {
			r.judge(b.opt.Level)
			if r.Verdict == Differs {
				miss[r.Quantity]++
			}
		}
		if trial == 0 && len(b.rep.Rows) != 8 {
			t.Fatalf("%d rows, want a, b, c, e for the median and the mean", len(b.rep.Rows))
		}
	}
	for _, q := range []string{"a (median of R*_T)", "b (median of R*_T)", "a (mean of R*_T)", "b (mean of R*_T)"} {
		t.Logf("%s: %d of 100 intervals miss the theory", q, miss[q])
		if miss[q] > 15 {
			t.Errorf("%s: %d of 100 intervals miss the theory", q, miss[q])
		}
	}
}

// The bootstrap interval of the tail slope covers the slope of an exactly exponential
// tail (Exp(theta) samples: the excesses over any threshold are Exp(theta) by the lack
// of memory, so the slope of log P(X > x) is -theta). 100 fixed-seed trials of 400
// values; more than 15 misses of 100 has probability about 1e-4 at 95% coverage
// (derived, binomial tail).
func TestTailSlopeCoverage(t *testing.T) {
	const rate = math.Sqrt2
	rng := rand.New(rand.NewPCG(11, 12))
	b := testBuilder(t)
	miss := 0
	for trial := 0; trial < 100; trial++ {
		xs := make([]float64, 400)
		for i := range xs {
			xs[i] = rng.ExpFloat64() / rate
		}
		tf, err := b.tailSlope(xs)
		if err != nil {
			t.Fatal(err)
		}
		if -rate < tf.iv.Lo || -rate > tf.iv.Hi {
			miss++
		}
	}
	t.Logf("tail slope: %d of 100 bootstrap intervals miss", miss)
	if miss > 15 {
		t.Errorf("tail slope: %d of 100 bootstrap intervals miss -theta", miss)
	}
}

// TestTopSumsMatchLists: the extremal-process sums accumulated as records are read give
// the means and standard errors that lists of every replicate's gaps and counts give
// through meanSE (up to rounding: Welford's update against two passes), and the same
// truncation counts, on random top-K lists of every length from 1 to K. Deterministic.
func TestTopSumsMatchLists(t *testing.T) {
	const K, n = 8, 500
	r := rand.New(rand.NewPCG(3, 4))
	var ts topSums
	var tops [][]float64
	for range n {
		top := make([]float64, 1+r.IntN(K))
		top[0] = 10 + r.NormFloat64()
		for k := 1; k < len(top); k++ {
			top[k] = top[k-1] - r.ExpFloat64()*0.3
		}
		ts.add(top, K)
		tops = append(tops, top)
	}
	near := func(a, b float64) bool { return math.Abs(a-b) <= 1e-12*math.Max(1, math.Abs(b)) }
	for k := 1; k < K; k++ {
		var xs []float64
		for _, top := range tops {
			if len(top) > k {
				xs = append(xs, top[k-1]-top[k])
			}
		}
		mean, se := meanSE(xs)
		nk := ts.gapN[k]
		gotSE := math.Sqrt(ts.gapM[k] / float64(nk-1) / float64(nk))
		if nk != len(xs) || !near(ts.gapMean[k], mean) || !near(gotSE, se) {
			t.Fatalf("gap %d: n %d mean %v se %v, lists give %d %v %v", k, nk, ts.gapMean[k], gotSE, len(xs), mean, se)
		}
	}
	for i, freq := range ts.within {
		x := 0.1 * float64(i)
		cnt := make([]float64, len(tops))
		trunc := 0
		for j, top := range tops {
			k := 0
			for k < len(top) && top[k] >= top[0]-x {
				k++
			}
			cnt[j] = float64(k)
			if k == K {
				trunc++
			}
		}
		mean, se := meanSE(cnt)
		gotMean, gotSE := countMeanSE(freq)
		if !near(gotMean, mean) || !near(gotSE, se) || freq[K] != uint64(trunc) {
			t.Fatalf("within %v: mean %v se %v truncated %d, lists give %v %v %d", x, gotMean, gotSE, freq[K], mean, se, trunc)
		}
	}
}
