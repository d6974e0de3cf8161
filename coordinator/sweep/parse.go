package sweep

import (
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"slices"
	"sort"
	"strings"

	"github.com/BurntSushi/toml"

	"bbmx/engine"
)

// Bounds that keep a sweep file from asking for something absurd.
const (
	MaxCells         = 1024           // dims × horizons
	MaxReplicates    = 1_000_000_000  // per cell
	MaxTaskSeconds   = 86400          // one day
	MinTaskSeconds   = 1              //
	MaxFileBytes     = 1 << 20        // a sweep file is a few hundred bytes
	MaxNameBytes     = 200            //
	DefaultTaskSecs  = 60             //
	maxListElements  = MaxCells       // any list longer than this cannot make a valid sweep
	canonicalVersion = "bbmx-sweep/1" // the "format" field of the canonical form
)

// Error is a problem with one key of a sweep file: "FILE:LINE: key KEY: MESSAGE".
// Line is 0 when the key has no line (a missing key whose table is missing too, or a
// canonical form read back from a store); Key is empty for TOML syntax errors.
type Error struct {
	File string
	Line int
	Key  string
	Msg  string
}

func (e *Error) Error() string {
	var b strings.Builder
	b.WriteString(e.File)
	if e.Line > 0 {
		fmt.Fprintf(&b, ":%d", e.Line)
	}
	b.WriteString(": ")
	if e.Key != "" {
		fmt.Fprintf(&b, "key %s: ", e.Key)
	}
	b.WriteString(e.Msg)
	return b.String()
}

// fieldError is an error about the key at path (array elements as "a[2]").
type fieldError struct {
	path string
	msg  string
}

func (e *fieldError) Error() string { return e.path + ": " + e.msg }

func errAt(path, format string, a ...any) *fieldError {
	return &fieldError{path: path, msg: fmt.Sprintf(format, a...)}
}

// Load reads and parses a sweep file.
func Load(path string) (*Sweep, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	data, err := io.ReadAll(io.LimitReader(f, MaxFileBytes+1))
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	return Parse(data, path)
}

// Parse parses and checks a sweep file; name is used in error messages. The sweep it
// returns is in canonical form: lists sorted, defaults filled (lambda 0 becomes
// theta/2), overrides sorted by cell and those equal to the default dropped.
func Parse(data []byte, name string) (*Sweep, error) {
	if len(data) > MaxFileBytes {
		return nil, &Error{File: name, Msg: fmt.Sprintf("the file is larger than %d bytes; a sweep file is a few lines", MaxFileBytes)}
	}
	var doc map[string]any
	if _, err := toml.Decode(string(data), &doc); err != nil {
		var pe toml.ParseError
		if errors.As(err, &pe) {
			return nil, &Error{File: name, Line: pe.Position.Line, Msg: "TOML syntax: " + pe.Message}
		}
		return nil, &Error{File: name, Msg: "TOML: " + err.Error()}
	}
	lines := keyLines(string(data))
	locate := func(fe *fieldError) error {
		return &Error{File: name, Line: lines.lineOf(fe.path), Key: displayKey(fe.path), Msg: fe.msg}
	}
	if fe := checkKeys(doc, lines); fe != nil {
		return nil, locate(fe)
	}
	s, fe := fromDoc(doc)
	if fe != nil {
		return nil, locate(fe)
	}
	written := slices.Clone(s.Overrides) // normalize sorts them and drops no-ops
	if fe := s.normalize(); fe != nil {
		return nil, locate(fe)
	}
	if fe := s.checkTasks(func(d int, t float64) int {
		return slices.IndexFunc(written, func(o Override) bool { return o.Dim == d && o.Horizon == t })
	}); fe != nil {
		return nil, locate(fe)
	}
	if fe := s.checkSplit(); fe != nil {
		return nil, locate(fe)
	}
	return s, nil
}

// schema lists the keys each table accepts, with a short description for errors.
var schema = map[string][]string{
	"":              {"name", "seed", "task_seconds", "keep_records", "split_at", "model", "grid", "observe"},
	"model":         {"sigma", "beta", "children"},
	"grid":          {"dims", "horizons", "replicates", "override"},
	"grid.override": {"dim", "horizon", "replicates"},
	"observe":       {"top_k", "window", "bin_width", "checkpoints", "directions", "lambda"},
}

// checkKeys reports the unknown key that comes first in the file.
func checkKeys(doc map[string]any, lines lineTable) *fieldError {
	var unknown []*fieldError
	var walk func(table string, path string, m map[string]any)
	walk = func(table, path string, m map[string]any) {
		known := schema[table]
		for k, v := range m {
			p := joinKey(path, k)
			if !slices.Contains(known, k) {
				msg := fmt.Sprintf("unknown key %q", k)
				if table == "" {
					msg += fmt.Sprintf(" (a sweep file has: %s)", strings.Join(known, ", "))
				} else {
					msg += fmt.Sprintf(" (the [%s] table has: %s)", table, strings.Join(known, ", "))
				}
				unknown = append(unknown, &fieldError{path: p, msg: msg})
				continue
			}
			sub := k
			if table != "" {
				sub = table + "." + k
			}
			if _, isTable := schema[sub]; !isTable {
				continue
			}
			switch t := v.(type) {
			case map[string]any:
				walk(sub, p, t)
			case []map[string]any:
				for i, e := range t {
					walk(sub, indexKey(p, i), e)
				}
			case []any:
				for i, e := range t {
					if em, ok := e.(map[string]any); ok {
						walk(sub, indexKey(p, i), em)
					}
				}
			}
		}
	}
	walk("", "", doc)
	if len(unknown) == 0 {
		return nil
	}
	sort.Slice(unknown, func(i, j int) bool {
		li, lj := lines.lineOf(unknown[i].path), lines.lineOf(unknown[j].path)
		if li != lj {
			return li < lj
		}
		return unknown[i].path < unknown[j].path
	})
	return unknown[0]
}

// defaults returns a sweep with every optional setting at its default.
func defaults() *Sweep {
	o := engine.DefaultObserve()
	return &Sweep{Sigma: 1, Beta: 1, Children: 2, Observe: o, TaskSeconds: DefaultTaskSecs, KeepRecords: true}
}

// fromDoc converts a decoded document into a sweep, checking types and presence.
func fromDoc(doc map[string]any) (*Sweep, *fieldError) {
	s := defaults()
	r := reader{}
	if _, ok := doc["seed"]; !ok {
		return nil, errAt("seed", "is required: the sweep seed, a non-negative integer (replicate r of a cell depends only on seed, cell and r)")
	}
	n := r.integer("seed", doc["seed"])
	if r.err == nil && n < 0 {
		return nil, errAt("seed", "must be a non-negative integer, got %d", n)
	}
	s.Seed = uint64(n)
	tables := map[string]map[string]any{"": doc, "model": r.table("model", doc["model"]), "observe": r.table("observe", doc["observe"])}
	// The optional scalar settings, each read into its field when present.
	for _, f := range []struct {
		table, key string
		dst        any
	}{
		{"", "name", &s.Name},
		{"", "task_seconds", &s.TaskSeconds},
		{"", "keep_records", &s.KeepRecords},
		{"", "split_at", &s.SplitAt},
		{"model", "sigma", &s.Sigma},
		{"model", "beta", &s.Beta},
		{"model", "children", &s.Children},
		{"observe", "top_k", &s.Observe.TopK},
		{"observe", "window", &s.Observe.Window},
		{"observe", "bin_width", &s.Observe.BinWidth},
		{"observe", "directions", &s.Observe.Directions},
		{"observe", "lambda", &s.Observe.Lambda},
	} {
		if v, ok := tables[f.table][f.key]; ok {
			r.into(joinKey(f.table, f.key), v, f.dst)
		}
	}
	if v, ok := tables["observe"]["checkpoints"]; ok {
		s.Observe.Checkpoints = []float64{}
		for i, c := range r.list("observe.checkpoints", v) {
			s.Observe.Checkpoints = append(s.Observe.Checkpoints, r.number(indexKey("observe.checkpoints", i), c))
		}
	}
	if r.err != nil {
		return nil, r.err
	}
	grid, ok := doc["grid"]
	if !ok {
		return nil, errAt("grid", "is required: a [grid] table with dims, horizons and replicates")
	}
	g := r.table("grid", grid)
	if r.err != nil {
		return nil, r.err
	}
	for _, k := range []string{"dims", "horizons", "replicates"} {
		if _, ok := g[k]; !ok {
			return nil, errAt(joinKey("grid", k), "is required in [grid]")
		}
	}
	for i, v := range r.list("grid.dims", g["dims"]) {
		s.Dims = append(s.Dims, r.smallInt(indexKey("grid.dims", i), v))
	}
	for i, v := range r.list("grid.horizons", g["horizons"]) {
		s.Horizons = append(s.Horizons, r.number(indexKey("grid.horizons", i), v))
	}
	s.Replicates = r.count("grid.replicates", g["replicates"])
	if v, ok := g["override"]; ok {
		for i, e := range r.tables("grid.override", v) {
			p := indexKey("grid.override", i)
			for _, k := range schema["grid.override"] {
				if _, ok := e[k]; !ok && r.err == nil {
					r.err = errAt(joinKey(p, k), "is required in each [[grid.override]] (dim, horizon, replicates)")
				}
			}
			if r.err != nil {
				break
			}
			s.Overrides = append(s.Overrides, Override{
				Dim:        r.smallInt(joinKey(p, "dim"), e["dim"]),
				Horizon:    r.number(joinKey(p, "horizon"), e["horizon"]),
				Replicates: r.count(joinKey(p, "replicates"), e["replicates"]),
			})
		}
	}
	if r.err != nil {
		return nil, r.err
	}
	return s, nil
}

// reader converts TOML values, keeping the first type error.
type reader struct{ err *fieldError }

func (r *reader) fail(path, format string, a ...any) {
	if r.err == nil {
		r.err = errAt(path, format, a...)
	}
}

// tomlType names a decoded value's TOML type for error messages.
func tomlType(v any) string {
	switch t := v.(type) {
	case int64:
		return fmt.Sprintf("integer %d", t)
	case float64:
		return fmt.Sprintf("float %v", t)
	case string:
		return fmt.Sprintf("string %q", t)
	case bool:
		return fmt.Sprintf("boolean %v", t)
	case map[string]any:
		return "a table"
	case []map[string]any:
		return "an array of tables"
	case []any:
		return "an array"
	}
	return fmt.Sprintf("a date or time (%v)", v)
}

// typed returns v as a T, or records that the key must hold a want.
func typed[T any](r *reader, path string, v any, want string) T {
	x, ok := v.(T)
	if !ok {
		r.fail(path, "must be %s, got %s", want, tomlType(v))
	}
	return x
}

func (r *reader) str(path string, v any) string { return typed[string](r, path, v, "a string") }

func (r *reader) boolean(path string, v any) bool { return typed[bool](r, path, v, "true or false") }

func (r *reader) integer(path string, v any) int64 { return typed[int64](r, path, v, "an integer") }

// number accepts a float or an integer (horizons = [4, 6] means 4.0 and 6.0).
func (r *reader) number(path string, v any) float64 {
	var x float64
	switch t := v.(type) {
	case float64:
		x = t
	case int64:
		x = float64(t)
	default:
		r.fail(path, "must be a number, got %s", tomlType(v))
		return 0
	}
	if math.IsNaN(x) || math.IsInf(x, 0) {
		r.fail(path, "must be a finite number, got %v", x)
	}
	return x
}

// into reads v into the field dst points to, by the field's type.
func (r *reader) into(path string, v any, dst any) {
	switch d := dst.(type) {
	case *string:
		*d = r.str(path, v)
	case *bool:
		*d = r.boolean(path, v)
	case *float64:
		*d = r.number(path, v)
	case *int:
		*d = r.smallInt(path, v)
	}
}

// smallInt reads an integer setting whose valid range is far inside int32; values
// outside it saturate so that the range check reports them.
func (r *reader) smallInt(path string, v any) int {
	n := r.integer(path, v)
	return int(max(min(n, math.MaxInt32), math.MinInt32))
}

// count reads a replicate count: an integer in [1, MaxReplicates].
func (r *reader) count(path string, v any) uint64 {
	n := r.integer(path, v)
	if r.err == nil && (n < 1 || n > MaxReplicates) {
		r.fail(path, "replicates must be between 1 and %d, got %d", MaxReplicates, n)
	}
	if n < 1 {
		return 0
	}
	return uint64(n)
}

func (r *reader) list(path string, v any) []any {
	l, ok := v.([]any)
	if !ok {
		r.fail(path, "must be an array, got %s", tomlType(v))
		return nil
	}
	if len(l) > maxListElements {
		r.fail(path, "has %d elements; at most %d make sense", len(l), maxListElements)
		return nil
	}
	return l
}

// table reads an optional table (nil: absent, an empty map).
func (r *reader) table(path string, v any) map[string]any {
	if v == nil {
		return map[string]any{}
	}
	m, ok := v.(map[string]any)
	if !ok {
		r.fail(path, "must be a table, got %s", tomlType(v))
		return map[string]any{}
	}
	return m
}

// tables reads an array of tables, written as [[...]] or as an array of inline tables.
func (r *reader) tables(path string, v any) []map[string]any {
	switch t := v.(type) {
	case []map[string]any:
		if len(t) > MaxCells {
			r.fail(path, "has %d entries; the grid has at most %d cells", len(t), MaxCells)
			return nil
		}
		return t
	case []any:
		out := make([]map[string]any, 0, len(t))
		for i, e := range t {
			m, ok := e.(map[string]any)
			if !ok {
				r.fail(indexKey(path, i), "must be a table (dim, horizon, replicates), got %s", tomlType(e))
				return nil
			}
			out = append(out, m)
		}
		return r.tables(path, out)
	}
	r.fail(path, "must be an array of tables ([[%s]]), got %s", displayKey(path), tomlType(v))
	return nil
}
