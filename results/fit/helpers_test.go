package fit

import (
	"math"
	"strings"
	"testing"
)

// z95 is the standard normal 0.975 quantile (from memory; any normal table).
const z95 = 1.959963984540054

// Coverage checks run reps = 200 independent fits and count how often the
// nominal 95% interval covers the truth. They pass when the count lies in
// [176, 198] (88%–99%). For a correctly calibrated interval the count is
// Binomial(200, 0.95), so the false-alarm rate is
// P(K <= 175) + P(K >= 199) = 4.3e-4 (derived, binomial tail).
const reps = 200

func checkCoverage(t *testing.T, what string, hits int) {
	t.Helper()
	if hits < 176 || hits > 198 {
		t.Errorf("%s: 95%% interval covered the truth in %d of %d fits, want 176..198", what, hits, reps)
	} else {
		t.Logf("%s: coverage %d/%d", what, hits, reps)
	}
}

// Null-calibration checks count rejections at level 5% over 200 fits under
// the null hypothesis and pass for 1..22 rejections. For a valid p-value the
// count is Binomial(200, 0.05), so the false-alarm rate is
// P(K = 0) + P(K >= 23) = 2.3e-4 (derived, binomial tail).
func checkRejections(t *testing.T, what string, rejected int) {
	t.Helper()
	if rejected < 1 || rejected > 22 {
		t.Errorf("%s: rejected the true null in %d of %d samples at 5%%, want 1..22", what, rejected, reps)
	} else {
		t.Logf("%s: %d/%d rejections at 5%%", what, rejected, reps)
	}
}

func covers(est, se, truth float64) bool { return math.Abs(est-truth) <= z95*se }

// wantErr checks that err is non-nil and mentions every fragment.
func wantErr(t *testing.T, err error, fragments ...string) {
	t.Helper()
	if err == nil {
		t.Errorf("want an error mentioning %q, got nil", fragments)
		return
	}
	for _, f := range fragments {
		if !strings.Contains(err.Error(), f) {
			t.Errorf("error %q does not mention %q", err, f)
		}
	}
	if strings.Contains(err.Error(), "\n") {
		t.Errorf("error %q is not one line", err)
	}
}

func relNear(got, want, tol float64) bool {
	return math.Abs(got-want) <= tol*math.Max(math.Abs(want), 1e-300)
}
