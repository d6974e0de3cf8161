package results

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"syscall"
	"testing"

	"bbmx/engine"
)

// BenchmarkMergeStores merges two stores holding BBMX_BENCH_RECORDS records in total
// (default 100000; the size is 1000000) and reports store bytes per record of the
// output and of the inputs. Making the inputs takes most of the time (minutes for 1M); with
// BBMX_BENCH_DIR set they are kept in that folder and reused by later runs.
func BenchmarkMergeStores(b *testing.B) {
	n := 100000
	if s := os.Getenv("BBMX_BENCH_RECORDS"); s != "" {
		n, _ = strconv.Atoi(s)
	}
	dir, inDir := b.TempDir(), b.TempDir()
	if d := os.Getenv("BBMX_BENCH_DIR"); d != "" {
		inDir = d
	}
	c := engine.Cell{Model: engine.DefaultModel(), Horizon: 2, Observe: engine.Observe{Checkpoints: []float64{1}}}.WithDefaults()
	var inputs []string
	var inBytes int64
	for half := 0; half < 2; half++ {
		p := filepath.Join(inDir, fmt.Sprintf("merge-input-%d-of-%d.db", half, n))
		inputs = append(inputs, p)
		if fi, err := os.Stat(p); err == nil {
			inBytes += fi.Size()
			continue
		}
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
		fi, _ := os.Stat(p)
		inBytes += fi.Size()
	}
	cpu := func() float64 {
		var ru syscall.Rusage
		syscall.Getrusage(syscall.RUSAGE_SELF, &ru)
		return float64(ru.Utime.Nano()+ru.Stime.Nano()) / 1e9
	}
	b.ResetTimer()
	cpu0 := cpu()
	for i := 0; i < b.N; i++ {
		out := filepath.Join(dir, "out"+strconv.Itoa(i)+".db")
		if err := MergeStores(out, inputs); err != nil {
			b.Fatal(err)
		}
		if i == 0 {
			fi, _ := os.Stat(out)
			b.ReportMetric(float64(fi.Size())/float64(n), "bytes/record")
			b.ReportMetric(float64(inBytes)/float64(n), "input-bytes/record")
		}
	}
	// CPU seconds (user + system, all threads) per merge: less sensitive than the wall
	// time to other jobs on a shared machine.
	b.ReportMetric((cpu()-cpu0)/float64(b.N), "cpu-s/op")
	b.ReportMetric(float64(n), "records")
}
