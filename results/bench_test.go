package results

import (
	"context"
	"os"
	"path/filepath"
	"strconv"
	"testing"

	"bbmx/engine"
)

// BenchmarkMergeStores merges two stores holding BBMX_BENCH_RECORDS records in total
// (default 100000; the size is 1000000) and reports store bytes per record.
func BenchmarkMergeStores(b *testing.B) {
	n := 100000
	if s := os.Getenv("BBMX_BENCH_RECORDS"); s != "" {
		n, _ = strconv.Atoi(s)
	}
	dir := b.TempDir()
	c := engine.Cell{Model: engine.DefaultModel(), Horizon: 2, Observe: engine.Observe{Checkpoints: []float64{1}}}.WithDefaults()
	var inputs []string
	for half := 0; half < 2; half++ {
		p := filepath.Join(dir, strconv.Itoa(half)+".db")
		st, err := Create(p, []byte("bench"))
		if err != nil {
			b.Fatal(err)
		}
		for lo := half * n / 2; lo < (half+1)*n/2; lo += 20000 {
			hi := min(lo+20000, (half+1)*n/2)
			recs, err := engine.Batch{Cell: c, Seed: 1, From: uint64(lo), To: uint64(hi)}.Run(context.Background())
			if err != nil {
				b.Fatal(err)
			}
			if err := st.Commit([]TaskResult{{CellID: "c", Cell: c, Seed: 1, From: uint64(lo), Records: recs, KeepRecords: true}}, nil); err != nil {
				b.Fatal(err)
			}
		}
		st.Close()
		inputs = append(inputs, p)
	}
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		out := filepath.Join(dir, "out"+strconv.Itoa(i)+".db")
		if err := MergeStores(out, inputs); err != nil {
			b.Fatal(err)
		}
		if i == 0 {
			fi, _ := os.Stat(out)
			b.ReportMetric(float64(fi.Size())/float64(n), "bytes/record")
		}
	}
	b.ReportMetric(float64(n), "records")
}
