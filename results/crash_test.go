package results

import (
	"context"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"testing"
	"time"

	"bbmx/engine"
)

// crashWriter is run in a child process: it commits tasks of 5 replicates until killed.
func crashWriter(path string) {
	c := testCell()
	st, err := Open(path, false)
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(3)
	}
	_, sk, err := st.CellSketch("cell")
	from := uint64(0)
	if err == nil {
		from = sk.Ranges[0].To
	}
	for ; ; from += 5 {
		recs, err := engine.Batch{Cell: c, Seed: 1, From: from, To: from + 5, Threads: 1}.Run(context.Background())
		if err == nil {
			err = st.Commit([]TaskResult{{CellID: "cell", Cell: c, Seed: 1, From: from, Records: recs, KeepRecords: true}}, nil)
		}
		if err != nil {
			fmt.Fprintln(os.Stderr, err)
			os.Exit(4)
		}
	}
}

func TestMain(m *testing.M) {
	if p := os.Getenv("BBMX_CRASH_WRITER"); p != "" {
		crashWriter(p)
	}
	os.Exit(m.Run())
}

// A writer killed with SIGKILL at arbitrary moments, many times, always leaves a store that
// opens and whose sketch agrees with its records (every write is one transaction).
func TestStoreSurvivesKill9(t *testing.T) {
	if testing.Short() {
		t.Skip("spawns processes")
	}
	path := filepath.Join(t.TempDir(), "crash.db")
	st, err := Create(path, []byte("crash test"))
	if err != nil {
		t.Fatal(err)
	}
	st.Close()
	for round := 0; round < 12; round++ {
		cmd := exec.Command(os.Args[0], "-test.run=^$")
		cmd.Env = append(os.Environ(), "BBMX_CRASH_WRITER="+path)
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		time.Sleep(time.Duration(30+round*17%50) * time.Millisecond)
		cmd.Process.Kill()
		cmd.Wait()

		st, err := Open(path, true)
		if err != nil {
			t.Fatalf("round %d: store does not open after kill -9: %v", round, err)
		}
		var n uint64
		err = st.Records("cell", func(seed uint64, r engine.Record) error { n++; return nil })
		if err == nil {
			_, sk, err2 := st.CellSketch("cell")
			if err2 != nil {
				t.Fatalf("round %d: %v", round, err2)
			}
			if sk.N != n || len(sk.Ranges) != 1 || sk.Ranges[0].To != n {
				t.Fatalf("round %d: sketch holds %d replicates %v, records %d", round, sk.N, sk.Ranges, n)
			}
			t.Logf("round %d: %s replicates consistent", round, strconv.FormatUint(n, 10))
		}
		st.Close()
	}
}
