package sweep

import (
	"bytes"
	"os"
	"testing"
)

// FuzzParse: Parse never panics, and any sweep it accepts survives
// Canonical -> Decode -> Canonical byte for byte, with a consistent cost model.
//
//	go test -run XXX -fuzz FuzzParse -fuzztime 60s ./coordinator/sweep/
func FuzzParse(f *testing.F) {
	f.Add([]byte(base))
	f.Add([]byte(baseRewritten))
	for _, name := range []string{"quick.toml", "cluster.toml"} {
		if b, err := os.ReadFile("../../examples/" + name); err == nil {
			f.Add(b)
		}
	}
	f.Add([]byte("seed = 1\n[grid]\ndims = [1]\nhorizons = [2]\nreplicates = 3\noverride = [{dim = 1, horizon = 2, replicates = 4}]\n"))
	f.Add([]byte("seed = 1\nname = '''\n[grid]\n'''\ngrid.dims = [1]\ngrid.horizons = [1e-300]\ngrid.replicates = 3\n"))
	f.Add([]byte("seed = 1\n\"a.b\" = {c = [1, {d = 2}]}\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		keyLines(string(data)) // terminates on any text, not only valid TOML
		s, err := Parse(data, "fuzz.toml")
		if err != nil {
			return
		}
		c := s.Canonical()
		d, err := Decode(c)
		if err != nil {
			t.Fatalf("accepted sweep does not decode: %v\n%s", err, c)
		}
		if !bytes.Equal(d.Canonical(), c) {
			t.Fatalf("round trip changed the canonical form:\n%s\n%s", c, d.Canonical())
		}
		for _, cs := range s.Cells() {
			if err := cs.Cell.Validate(); err != nil {
				t.Fatalf("cell %s is invalid: %v", cs.ID, err)
			}
			z := s.Size(cs)
			if z.Parts < 1 || z.PerTask < 1 || (z.Parts > 1) != (z.SplitAt > 0) || z.SplitAt >= cs.Cell.Horizon {
				t.Fatalf("cell %s: sizing %+v", cs.ID, z)
			}
			if s.TaskCount(cs) < 1 {
				t.Fatalf("cell %s: no tasks", cs.ID)
			}
		}
		if e := s.Estimate(); !(e.Nodes >= 1) {
			t.Fatalf("estimate %+v", e)
		}
	})
}
