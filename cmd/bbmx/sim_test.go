package main

import (
	"bytes"
	"encoding/json"
	"os"
	"strings"
	"testing"
)

func runCLI(t *testing.T, args ...string) (int, string, string) {
	t.Helper()
	var out, errb bytes.Buffer
	code := runMain(args, &out, &errb)
	return code, out.String(), errb.String()
}

func simJSON(t *testing.T, args ...string) map[string]any {
	t.Helper()
	code, out, errs := runCLI(t, append([]string{"sim", "--json"}, args...)...)
	if code != 0 {
		t.Fatalf("sim %v: exit %d: %s", args, code, errs)
	}
	var m map[string]any
	if err := json.Unmarshal([]byte(out), &m); err != nil {
		t.Fatalf("sim --json output is not JSON: %v\n%s", err, out)
	}
	return m
}

func TestSimJSONFields(t *testing.T) {
	m := simJSON(t, "--dim", "3", "--horizon", "3", "--replicates", "50", "--seed", "9")
	for _, k := range []string{"dim", "horizon", "replicates", "seed", "mean_population", "mean_max_radius", "sd_max_radius", "centring", "records_sha256"} {
		if _, ok := m[k]; !ok {
			t.Errorf("summary lacks %q", k)
		}
	}
	// m_3(3) = sqrt2*3 - 1/(2 sqrt2) log 3 (SPEC §2 formula; derived value 3.854...).
	if c := m["centring"].(float64); c < 3.85 || c > 3.86 {
		t.Errorf("centring %v, want about 3.854", c)
	}
}

// Bit-identity across thread counts and the split path (SPEC §4).
func TestSimDigestIdentical(t *testing.T) {
	base := []string{"--dim", "2", "--horizon", "4", "--replicates", "30", "--seed", "5", "--checkpoints", "1,2,4"}
	want := simJSON(t, append(base, "--threads", "1")...)["records_sha256"]
	for _, extra := range [][]string{{"--threads", "2"}, {"--threads", "8"}, {"--split-at", "1.5", "--threads", "3"}, {"--split-at", "3"}} {
		if got := simJSON(t, append(base, extra...)...)["records_sha256"]; got != want {
			t.Errorf("%v: digest %v, want %v", extra, got, want)
		}
	}
	if other := simJSON(t, "--dim", "2", "--horizon", "4", "--replicates", "30", "--seed", "6", "--checkpoints", "1,2,4")["records_sha256"]; other == want {
		t.Error("a different seed gave the same digest")
	}
}

func TestSimBadInput(t *testing.T) {
	cases := []struct {
		args []string
		want string
	}{
		{[]string{"--dim", "0", "--horizon", "3"}, "dimension"},
		{[]string{"--horizon", "0"}, "horizon"},
		{[]string{"--horizon", "-1"}, "horizon"},
		{[]string{"--horizon", "3", "--children", "1"}, "children"},
		{[]string{"--horizon", "3", "--sigma", "0"}, "sigma"},
		{[]string{"--horizon", "3", "--sigma", "-2"}, "sigma"},
		{[]string{"--horizon", "3", "--sigma", "1e100"}, "sigma 1e+100 is outside the supported"},
		{[]string{"--horizon", "3", "--beta", "1e-300"}, "beta 1e-300 is outside the supported"},
		{[]string{"--horizon", "3", "--replicates", "-4"}, "replicates"},
		{[]string{"--horizon", "3", "--threads", "0"}, "threads"},
		{[]string{"--horizon", "3", "--frobnicate"}, "frobnicate"},
		{[]string{"--horizon", "3", "--checkpoints", "1,5"}, "checkpoint 5"},
		{[]string{"--horizon", "3", "--checkpoints", "2,1"}, "increase"},
		{[]string{"--horizon", "3", "--checkpoints", "1,x"}, "x"},
		{[]string{"--horizon", "45", "--replicates", "1000"}, "refusing"},
		{[]string{"--horizon", "3", "--split-at", "3"}, "split-at"},
	}
	for _, c := range cases {
		code, _, errs := runCLI(t, append([]string{"sim"}, c.args...)...)
		if code != 2 {
			t.Errorf("%v: exit %d, want 2", c.args, code)
		}
		if !strings.Contains(errs, c.want) || strings.Count(strings.TrimSpace(errs), "\n") != 0 {
			t.Errorf("%v: error %q should be one line naming %q", c.args, errs, c.want)
		}
	}
}

func TestSimOutWritesRecords(t *testing.T) {
	path := t.TempDir() + "/recs.jsonl"
	simJSON(t, "--horizon", "2", "--replicates", "7", "--out", path)
	data := readFile(t, path)
	if n := strings.Count(data, "\n"); n != 7 {
		t.Fatalf("%d lines, want 7", n)
	}
}

func readFile(t *testing.T, path string) string {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}
