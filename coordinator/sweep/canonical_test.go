package sweep

import (
	"bytes"
	"crypto/sha256"
	"errors"
	"os"
	"strings"
	"testing"
)

// The same sweep as base, written differently: keys in another order, comments,
// integers for floats, unsorted lists, an array of inline tables, lambda given as
// its default theta/2, the default replicate count stated as an override, and
// defaults spelled out or left out. (TOML puts the root table's keys before any header.)
const baseRewritten = `# the same sweep, another hand
seed = 7
name = "test"

[observe]
lambda = 0.7071067811865476   # theta/2 in the standard model
checkpoints = [4, 1, 2]
directions = 16
top_k = 32

[grid]
replicates = 1_000
horizons = [8, 4, 6]
dims = [3, 1, 2]
override = [
  { horizon = 8, dim = 3, replicates = 200 },
  { dim = 1, horizon = 4, replicates = 1000 },   # equal to the default: no-op
]

[model]
children = 2
sigma = 1
beta = 1.0
`

func mustParse(t testing.TB, src, name string) *Sweep {
	t.Helper()
	s, err := Parse([]byte(src), name)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

func TestCanonicalInvariance(t *testing.T) {
	a := mustParse(t, base, "a.toml")
	b := mustParse(t, baseRewritten, "b.toml")
	if !bytes.Equal(a.Canonical(), b.Canonical()) {
		t.Fatalf("same sweep, different canonical forms:\n%s\n%s", a.Canonical(), b.Canonical())
	}
	if a.Hash() != b.Hash() {
		t.Fatal("same sweep, different hashes")
	}
	if a.Hash() != sha256.Sum256(a.Canonical()) {
		t.Fatal("Hash is not the SHA-256 of Canonical")
	}
	for _, change := range []struct{ prefix, repl string }{
		{"seed", "seed = 8"},
		{"sigma", "sigma = 1.5"},
		{"replicates", "replicates = 1001"},
		{"checkpoints", "checkpoints = [1.0, 2.0]"},
		{"keep_records", "keep_records = false"},
		{"name", `name = "other"`},
	} {
		c := mustParse(t, with(t, "", change.prefix, change.repl), "c.toml")
		if c.Hash() == a.Hash() {
			t.Errorf("changing %s kept the hash", change.prefix)
		}
	}
}

// The canonical form is stored in result stores, so its bytes are a format: this
// golden string pins them. A change here needs a new "format" name.
func TestCanonicalGolden(t *testing.T) {
	s := mustParse(t, "seed = 3\n[grid]\ndims = [2, 1]\nhorizons = [4.5, 1e-7, 2]\nreplicates = 10\n[observe]\ncheckpoints = [1]\n", "g.toml")
	want := `{"format":"bbmx-sweep/1","name":"","seed":3,"model":{"sigma":1,"beta":1,"children":2},` +
		`"grid":{"dims":[1,2],"horizons":[1e-7,2,4.5],"replicates":10,"overrides":[]},` +
		`"observe":{"top_k":32,"window":8,"bin_width":0.05,"checkpoints":[1],"directions":16,"lambda":0.7071067811865476},` +
		`"task_seconds":60,"split_at":0,"keep_records":true}`
	if got := string(s.Canonical()); got != want {
		t.Fatalf("canonical form\n got %s\nwant %s", got, want)
	}
}

func TestDecodeRoundTrip(t *testing.T) {
	srcs := map[string]string{"base": base, "rewritten": baseRewritten}
	for _, f := range []string{"quick.toml", "cluster.toml"} {
		b, err := os.ReadFile("../../examples/" + f)
		if err != nil {
			t.Fatal(err)
		}
		srcs[f] = string(b)
	}
	for name, src := range srcs {
		s := mustParse(t, src, name)
		c := s.Canonical()
		d, err := Decode(c)
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		if !bytes.Equal(d.Canonical(), c) || d.Hash() != s.Hash() {
			t.Fatalf("%s: round trip changed the canonical form", name)
		}
		if len(d.Cells()) != len(s.Cells()) || d.Estimate() != s.Estimate() {
			t.Fatalf("%s: decoded sweep differs", name)
		}
	}
}

func TestDecodeRefuses(t *testing.T) {
	good := string(mustParse(t, base, "b.toml").Canonical())
	cases := []struct{ name, data, want string }{
		{"not JSON", "seed = 7", "not a canonical sweep"},
		{"unknown field", strings.Replace(good, `"seed":7`, `"seed":7,"colour":1`, 1), "unknown field"},
		{"other format", strings.Replace(good, "bbmx-sweep/1", "bbmx-sweep/9", 1), "unknown format"},
		{"bad value", strings.Replace(good, `"sigma":1`, `"sigma":-1`, 1), "key model.sigma: sigma must be a positive"},
		{"null number", strings.Replace(good, `"window":8`, `"window":null`, 1), "null"},
		{"not canonical: spacing", strings.Replace(good, `"seed":7`, `"seed": 7`, 1), "not its canonical form"},
		{"not canonical: unsorted", strings.Replace(good, `[1,2,3]`, `[2,1,3]`, 1), "not its canonical form"},
		{"trailing data", good + "{}", "data after"},
	}
	for _, c := range cases {
		_, err := Decode([]byte(c.data))
		var e *Error
		if err == nil || !errors.As(err, &e) || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: got %v, want an *Error containing %q", c.name, err, c.want)
		}
	}
}

func TestExamples(t *testing.T) {
	q, err := Load("../../examples/quick.toml")
	if err != nil {
		t.Fatal(err)
	}
	if e := q.Estimate(); e.CPUSeconds >= 120 || e.Absurd {
		t.Fatalf("quick.toml is not quick: %+v", e)
	}
	c, err := Load("../../examples/cluster.toml")
	if err != nil {
		t.Fatal(err)
	}
	e := c.Estimate()
	if h := e.CPUSeconds / 3600; h < 1000 || h > 10000 || e.Absurd {
		t.Fatalf("cluster.toml should be thousands of CPU-hours and not absurd: %.0f h, %+v", h, e)
	}
	split := false
	for _, cs := range c.Cells() {
		split = split || c.Size(cs).Parts > 1
	}
	if !split {
		t.Fatal("cluster.toml was meant to exercise split replicates")
	}
}

// A name that is not UTF-8 cannot come from a TOML file, but can from a damaged store.
func TestDecodeRefusesBadName(t *testing.T) {
	good := string(mustParse(t, base, "b.toml").Canonical())
	if _, err := Decode([]byte(strings.Replace(good, `"name":"test"`, "\"name\":\"te\\u0007st\"", 1))); err == nil || !strings.Contains(err.Error(), "key name") {
		t.Fatalf("control character in name: %v", err)
	}
}
