package sweep

import (
	"bytes"
	"crypto/sha256"
	"encoding/json"
	"fmt"
	"math"
)

// The canonical form is JSON with a fixed field order (the order of the structs below),
// every default filled in, lists sorted, overrides sorted by cell with no-op ones
// dropped, and numbers in their shortest round-trip form (encoding/json's formatting of
// float64: strconv's shortest digits, exponent form below 1e-6 and from 1e21). It has no
// insignificant whitespace. Two files that differ only in key order, comments, spacing,
// or 4 versus 4.0 have the same canonical bytes and so the same hash.
//
// The "format" field names this layout. A change to it that alters any byte of an
// existing sweep's canonical form needs a new format name, so that stores keep their
// identity across versions.

type canonicalForm struct {
	Format      string           `json:"format"`
	Name        string           `json:"name"`
	Seed        uint64           `json:"seed"`
	Model       canonicalModel   `json:"model"`
	Grid        canonicalGrid    `json:"grid"`
	Observe     canonicalObserve `json:"observe"`
	TaskSeconds jsonFloat        `json:"task_seconds"`
	SplitAt     jsonFloat        `json:"split_at"`
	KeepRecords bool             `json:"keep_records"`
}

type canonicalModel struct {
	Sigma    jsonFloat `json:"sigma"`
	Beta     jsonFloat `json:"beta"`
	Children int       `json:"children"`
}

type canonicalGrid struct {
	Dims       []int               `json:"dims"`
	Horizons   []jsonFloat         `json:"horizons"`
	Replicates uint64              `json:"replicates"`
	Overrides  []canonicalOverride `json:"overrides"`
}

type canonicalOverride struct {
	Dim        int       `json:"dim"`
	Horizon    jsonFloat `json:"horizon"`
	Replicates uint64    `json:"replicates"`
}

type canonicalObserve struct {
	TopK        int         `json:"top_k"`
	Window      jsonFloat   `json:"window"`
	BinWidth    jsonFloat   `json:"bin_width"`
	Checkpoints []jsonFloat `json:"checkpoints"`
	Directions  int         `json:"directions"`
	Lambda      jsonFloat   `json:"lambda"`
}

// jsonFloat is a float64 that encodes a non-finite value (possible only in a sweep
// built by hand, never in one from Parse or Decode) as null instead of failing, so that
// Canonical cannot fail; Decode refuses null.
type jsonFloat float64

func (f jsonFloat) MarshalJSON() ([]byte, error) {
	x := float64(f)
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return []byte("null"), nil
	}
	return json.Marshal(x)
}

func (f *jsonFloat) UnmarshalJSON(b []byte) error {
	var x *float64
	if err := json.Unmarshal(b, &x); err != nil {
		return err
	}
	if x == nil {
		return fmt.Errorf("a number is required, got null")
	}
	*f = jsonFloat(*x)
	return nil
}

func floats(xs []float64) []jsonFloat {
	out := make([]jsonFloat, len(xs))
	for i, x := range xs {
		out[i] = jsonFloat(x)
	}
	return out
}

func unfloats(xs []jsonFloat) []float64 {
	out := make([]float64, len(xs))
	for i, x := range xs {
		out[i] = float64(x)
	}
	return out
}

// Canonical returns the sweep's canonical JSON. It is meant for sweeps from Parse or
// Decode, which are already in canonical form (sorted, defaults filled).
func (s *Sweep) Canonical() []byte {
	c := canonicalForm{
		Format:      canonicalVersion,
		Name:        s.Name,
		Seed:        s.Seed,
		Model:       canonicalModel{Sigma: jsonFloat(s.Sigma), Beta: jsonFloat(s.Beta), Children: s.Children},
		TaskSeconds: jsonFloat(s.TaskSeconds),
		SplitAt:     jsonFloat(s.SplitAt),
		KeepRecords: s.KeepRecords,
		Grid: canonicalGrid{
			Dims:       append([]int{}, s.Dims...),
			Horizons:   floats(s.Horizons),
			Replicates: s.Replicates,
			Overrides:  []canonicalOverride{},
		},
		Observe: canonicalObserve{
			TopK:        s.Observe.TopK,
			Window:      jsonFloat(s.Observe.Window),
			BinWidth:    jsonFloat(s.Observe.BinWidth),
			Checkpoints: floats(s.Observe.Checkpoints),
			Directions:  s.Observe.Directions,
			Lambda:      jsonFloat(s.Observe.Lambda),
		},
	}
	for _, o := range s.Overrides {
		c.Grid.Overrides = append(c.Grid.Overrides, canonicalOverride{Dim: o.Dim, Horizon: jsonFloat(o.Horizon), Replicates: o.Replicates})
	}
	var b bytes.Buffer
	enc := json.NewEncoder(&b)
	enc.SetEscapeHTML(false)
	if err := enc.Encode(c); err != nil {
		// Unreachable: every field has a total encoding.
		panic("sweep: canonical encoding: " + err.Error())
	}
	return bytes.TrimSuffix(b.Bytes(), []byte("\n"))
}

// Hash is the sweep's identity: the SHA-256 of its canonical form.
func (s *Sweep) Hash() [32]byte { return sha256.Sum256(s.Canonical()) }

// canonicalName is the "file" named in errors about a canonical form.
const canonicalName = "canonical sweep"

// Decode reads a canonical form back (as stored in a result store). It checks the sweep
// exactly as Parse does and refuses bytes that are not the canonical form of the sweep
// they describe, so Hash of the result equals the SHA-256 of the bytes given.
func Decode(canonical []byte) (*Sweep, error) {
	var c canonicalForm
	dec := json.NewDecoder(bytes.NewReader(canonical))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&c); err != nil {
		return nil, &Error{File: canonicalName, Msg: fmt.Sprintf("not a canonical sweep: %v", err)}
	}
	if dec.More() {
		return nil, &Error{File: canonicalName, Msg: "not a canonical sweep: data after the JSON object"}
	}
	if c.Format != canonicalVersion {
		return nil, &Error{File: canonicalName, Key: "format", Msg: fmt.Sprintf("unknown format %q (this version reads %q)", c.Format, canonicalVersion)}
	}
	s := &Sweep{
		Name: c.Name, Seed: c.Seed,
		Sigma: float64(c.Model.Sigma), Beta: float64(c.Model.Beta), Children: c.Model.Children,
		Dims: c.Grid.Dims, Horizons: unfloats(c.Grid.Horizons), Replicates: c.Grid.Replicates,
		TaskSeconds: float64(c.TaskSeconds), SplitAt: float64(c.SplitAt), KeepRecords: c.KeepRecords,
	}
	s.Observe.TopK = c.Observe.TopK
	s.Observe.Window = float64(c.Observe.Window)
	s.Observe.BinWidth = float64(c.Observe.BinWidth)
	s.Observe.Checkpoints = unfloats(c.Observe.Checkpoints)
	s.Observe.Directions = c.Observe.Directions
	s.Observe.Lambda = float64(c.Observe.Lambda)
	for _, o := range c.Grid.Overrides {
		s.Overrides = append(s.Overrides, Override{Dim: o.Dim, Horizon: float64(o.Horizon), Replicates: o.Replicates})
	}
	if len(s.Dims) > maxListElements || len(s.Horizons) > maxListElements || len(s.Overrides) > MaxCells {
		return nil, &Error{File: canonicalName, Key: "grid", Msg: "lists longer than the grid's bound"}
	}
	if fe := s.normalize(); fe != nil {
		return nil, &Error{File: canonicalName, Key: displayKey(fe.path), Msg: fe.msg}
	}
	if !bytes.Equal(s.Canonical(), canonical) {
		return nil, &Error{File: canonicalName, Msg: "valid sweep, but the bytes are not its canonical form (a store's spec must be stored exactly as Canonical wrote it)"}
	}
	return s, nil
}
