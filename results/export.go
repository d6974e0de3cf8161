package results

import (
	"bufio"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strconv"

	"github.com/parquet-go/parquet-go"

	"bbmx/engine"
)

// RecordRow is the flat, per-replicate form written by Export (one row per replicate).
// Column names are the same in CSV, JSON and Parquet.
type RecordRow struct {
	Cell       string    `json:"cell" parquet:"cell"`
	Dim        int64     `json:"dim" parquet:"dim"`
	Horizon    float64   `json:"horizon" parquet:"horizon"`
	Seed       uint64    `json:"seed" parquet:"seed"`
	Replicate  uint64    `json:"replicate" parquet:"replicate"`
	Population uint64    `json:"population" parquet:"population"`
	MaxRadius  float64   `json:"max_radius" parquet:"max_radius"`
	Shifted    float64   `json:"max_radius_minus_centring" parquet:"max_radius_minus_centring"`
	MaxDir     []float64 `json:"max_direction" parquet:"max_direction,list"`
	TopRadii   []float64 `json:"top_radii" parquet:"top_radii,list"`
	CheckTimes []float64 `json:"checkpoint_times" parquet:"checkpoint_times,list"`
	CheckN     []uint64  `json:"checkpoint_population" parquet:"checkpoint_population,list"`
	CheckZ     []float64 `json:"checkpoint_z" parquet:"checkpoint_z,list"`
	CheckW     []float64 `json:"checkpoint_w" parquet:"checkpoint_w,list"`
}

// Rows returns every stored record of every cell as rows, in (cell, seed, replicate) order.
func (s *Store) Rows() ([]RecordRow, error) {
	var rows []RecordRow
	err := s.EachRow(func(r *RecordRow) error {
		rows = append(rows, *r)
		return nil
	})
	return rows, err
}

// EachRow calls fn with every stored record of every cell as a row, in (cell, seed,
// replicate) order, one at a time: exports of millions of replicates stream through
// it instead of holding every row. The row and its lists are fn's to keep.
func (s *Store) EachRow(fn func(*RecordRow) error) error {
	ids, err := s.Cells()
	if err != nil {
		return err
	}
	for _, id := range ids {
		c, _, err := s.CellSketch(id)
		if err != nil {
			return err
		}
		centre := c.Model.Centring(c.Horizon)
		err = s.Records(id, func(seed uint64, r engine.Record) error {
			row := RecordRow{Cell: id, Dim: int64(c.Model.Dim), Horizon: c.Horizon, Seed: seed, Replicate: r.Replicate,
				Population: r.Population, MaxRadius: r.MaxRadius(), Shifted: r.MaxRadius() - centre, MaxDir: r.Top[0].Dir}
			for _, p := range r.Top {
				row.TopRadii = append(row.TopRadii, p.Radius)
			}
			for _, ck := range r.Checks {
				row.CheckTimes = append(row.CheckTimes, ck.Time)
				row.CheckN = append(row.CheckN, ck.Population)
				row.CheckZ = append(row.CheckZ, ck.Z)
				row.CheckW = append(row.CheckW, ck.W)
			}
			return fn(&row)
		})
		if err != nil {
			return err
		}
	}
	return nil
}

// rowWriter writes records rows to one export format, a row at a time: put each row,
// then end.
type rowWriter struct {
	put func(*RecordRow) error
	end func() error
}

// parquetRowGroup is the rows per Parquet row group: the writer holds one group in
// memory (a few hundred bytes a row), and readers read a group at a time.
const parquetRowGroup = 1 << 16

// newRowWriter starts an export of records rows in format to w.
func newRowWriter(format string, w io.Writer) (rowWriter, error) {
	switch format {
	case "parquet":
		pw := parquet.NewGenericWriter[RecordRow](w, parquet.MaxRowsPerRowGroup(parquetRowGroup))
		batch := make([]RecordRow, 0, 256)
		flush := func() error {
			_, err := pw.Write(batch)
			batch = batch[:0]
			return err
		}
		return rowWriter{
			put: func(r *RecordRow) error {
				if batch = append(batch, *r); len(batch) == cap(batch) {
					return flush()
				}
				return nil
			},
			end: func() error {
				if err := flush(); err != nil {
					return err
				}
				return pw.Close()
			},
		}, nil
	case "json":
		enc := json.NewEncoder(w)
		return rowWriter{put: func(r *RecordRow) error { return enc.Encode(r) }, end: func() error { return nil }}, nil
	case "csv":
		cw := csv.NewWriter(w)
		cw.Write([]string{"cell", "dim", "horizon", "seed", "replicate", "population", "max_radius", "max_radius_minus_centring", "max_direction", "top_radii", "checkpoint_times", "checkpoint_population", "checkpoint_z", "checkpoint_w"})
		f := func(x float64) string { return strconv.FormatFloat(x, 'g', -1, 64) }
		u := func(x uint64) string { return strconv.FormatUint(x, 10) }
		return rowWriter{
			put: func(r *RecordRow) error {
				return cw.Write([]string{r.Cell, strconv.FormatInt(r.Dim, 10), f(r.Horizon), u(r.Seed), u(r.Replicate), u(r.Population),
					f(r.MaxRadius), f(r.Shifted), joinFloats(r.MaxDir), joinFloats(r.TopRadii), joinFloats(r.CheckTimes), joinUints(r.CheckN), joinFloats(r.CheckZ), joinFloats(r.CheckW)})
			},
			end: func() error {
				cw.Flush()
				return cw.Error()
			},
		}, nil
	}
	return rowWriter{}, unknownRecordFormat(format)
}

func unknownRecordFormat(format string) error {
	return fmt.Errorf("unknown export format %q (csv, json or parquet)", format)
}

// ExportRecords writes the store's per-replicate records to path as "csv", "json"
// (JSON lines) or "parquet", streaming them (memory does not grow with the store). In
// CSV, list columns are written as semicolon-separated numbers.
func (s *Store) ExportRecords(path, format string) error {
	if format != "csv" && format != "json" && format != "parquet" {
		return unknownRecordFormat(format) // before anything is written
	}
	if err := s.checkExportTarget(path); err != nil {
		return err
	}
	return replaceFile(path, func(w io.Writer) error {
		rw, err := newRowWriter(format, w)
		if err != nil {
			return err
		}
		if err := s.EachRow(rw.put); err != nil {
			return err
		}
		return rw.end()
	})
}

// checkExportTarget refuses to write an export over the store being read or over any
// other bbolt database: a mistyped --out would otherwise destroy a sweep's results.
func (s *Store) checkExportTarget(path string) error {
	fi, err := os.Stat(path)
	if err != nil {
		return nil // nothing there to lose (or an error that creating the file reports)
	}
	if own, err := os.Stat(s.path); err == nil && os.SameFile(fi, own) {
		return fmt.Errorf("%s is the store being exported: choose another output file", path)
	}
	if fi.Mode().IsRegular() && hasDatabaseHeader(path) {
		return fmt.Errorf("%s is a database file, not an earlier export: refusing to overwrite it", path)
	}
	return nil
}

// replaceFile writes a file through write under a temporary name beside path and renames
// it over path only when complete, so a failed export leaves whatever was at path intact.
func replaceFile(path string, write func(w io.Writer) error) error {
	f, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".*.partial")
	if err != nil {
		return fmt.Errorf("export to %s: %w", path, err)
	}
	bw := bufio.NewWriter(f)
	err = write(bw)
	if err == nil {
		err = bw.Flush()
	}
	if err == nil {
		err = f.Chmod(0o644)
	}
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = os.Rename(f.Name(), path)
	}
	if err != nil {
		os.Remove(f.Name())
		return fmt.Errorf("export to %s: %w", path, err)
	}
	return nil
}

// joinList writes a list column for CSV: the numbers separated by semicolons.
func joinList[T any](xs []T, appendOne func(b []byte, x T) []byte) string {
	b := []byte{}
	for i, x := range xs {
		if i > 0 {
			b = append(b, ';')
		}
		b = appendOne(b, x)
	}
	return string(b)
}

func joinFloats(xs []float64) string {
	return joinList(xs, func(b []byte, x float64) []byte { return strconv.AppendFloat(b, x, 'g', -1, 64) })
}

func joinUints(xs []uint64) string {
	return joinList(xs, func(b []byte, x uint64) []byte { return strconv.AppendUint(b, x, 10) })
}

// CellRow is the per-cell summary written by ExportCells.
type CellRow struct {
	Cell           string  `json:"cell"`
	Dim            int     `json:"dim"`
	Horizon        float64 `json:"horizon"`
	Replicates     uint64  `json:"replicates"`
	Centring       float64 `json:"centring"`
	MeanShift      float64 `json:"mean_max_radius_minus_centring"`
	SEMeanShift    float64 `json:"se_mean_max_radius_minus_centring"`
	MeanPopulation float64 `json:"mean_population"`
}

// ExportCells writes one summary row per cell as "csv" or "json" (a JSON array).
func (s *Store) ExportCells(path, format string) error {
	ids, err := s.Cells()
	if err != nil {
		return err
	}
	rows := []CellRow{} // an empty store exports [], not null
	for _, id := range ids {
		c, sk, err := s.CellSketch(id)
		if err != nil {
			return err
		}
		m, se := sk.MeanShift()
		rows = append(rows, CellRow{Cell: id, Dim: c.Model.Dim, Horizon: c.Horizon, Replicates: sk.N, Centring: c.Model.Centring(c.Horizon),
			MeanShift: m, SEMeanShift: se, MeanPopulation: float64(sk.Population) / float64(max(sk.N, 1))})
	}
	var data []byte
	switch format {
	case "json":
		data, err = json.MarshalIndent(rows, "", "  ")
		data = append(data, '\n')
	case "csv":
		var b []byte
		b = append(b, "cell,dim,horizon,replicates,centring,mean_max_radius_minus_centring,se_mean_max_radius_minus_centring,mean_population\n"...)
		f := func(x float64) string { return strconv.FormatFloat(x, 'g', -1, 64) }
		for _, r := range rows {
			b = fmt.Appendf(b, "%s,%d,%s,%d,%s,%s,%s,%s\n", r.Cell, r.Dim, f(r.Horizon), r.Replicates, f(r.Centring), f(r.MeanShift), f(r.SEMeanShift), f(r.MeanPopulation))
		}
		data = b
	default:
		return fmt.Errorf("cell summaries export as csv or json, not %q", format)
	}
	if err != nil {
		return err
	}
	if err := s.checkExportTarget(path); err != nil {
		return err
	}
	return replaceFile(path, func(w io.Writer) error { _, err := w.Write(data); return err })
}
