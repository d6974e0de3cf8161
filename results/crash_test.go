package results

import (
	"context"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
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
	if out := os.Getenv("BBMX_CRASH_MERGE_OUT"); out != "" {
		if err := MergeStores(out, filepath.SplitList(os.Getenv("BBMX_CRASH_MERGE_IN"))); err != nil {
			fmt.Fprintln(os.Stderr, err)
			os.Exit(4)
		}
		os.Exit(0)
	}
	os.Exit(m.Run())
}

// A merge killed with SIGKILL at arbitrary moments never leaves a store at its output
// path (it is built under a temporary name and renamed when complete) and never touches
// its inputs; the next merge to the same path succeeds and equals an uninterrupted one.
func TestMergeSurvivesKill9(t *testing.T) {
	if testing.Short() {
		t.Skip("spawns processes")
	}
	dir := t.TempDir()
	c := testCell()
	var inputs []string
	for i := 0; i < 2; i++ {
		p := filepath.Join(dir, fmt.Sprintf("in%d.db", i))
		st, err := Create(p, []byte("merge crash test"))
		if err != nil {
			t.Fatal(err)
		}
		recs, err := engine.Batch{Cell: c, Seed: uint64(1 + i), To: 3000, Threads: 2}.Run(context.Background())
		if err != nil {
			t.Fatal(err)
		}
		if err := st.Commit([]TaskResult{{CellID: "cell", Cell: c, Seed: uint64(1 + i), Records: recs, KeepRecords: true}}, nil); err != nil {
			t.Fatal(err)
		}
		st.Close()
		inputs = append(inputs, p)
	}
	digestOf := func(p string) [32]byte {
		st, err := Open(p, true)
		if err != nil {
			t.Fatalf("%s: %v", p, err)
		}
		defer st.Close()
		d, err := st.ContentDigest()
		if err != nil {
			t.Fatal(err)
		}
		return d
	}
	before := []([32]byte){digestOf(inputs[0]), digestOf(inputs[1])}
	want := filepath.Join(dir, "want.db")
	if err := MergeStores(want, inputs); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "out.db")
	for round := 0; round < 8; round++ {
		os.Remove(out)
		cmd := exec.Command(os.Args[0], "-test.run=^$")
		cmd.Env = append(os.Environ(), "BBMX_CRASH_MERGE_OUT="+out, "BBMX_CRASH_MERGE_IN="+strings.Join(inputs, string(filepath.ListSeparator)))
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		time.Sleep(time.Duration(5+round*23%90) * time.Millisecond)
		cmd.Process.Kill()
		cmd.Wait()
		if _, err := os.Stat(out); err == nil {
			// The merge finished before the kill: the output must be complete.
			if digestOf(out) != digestOf(want) {
				t.Fatalf("round %d: a finished merge differs from the uninterrupted one", round)
			}
			t.Logf("round %d: merge had finished", round)
		}
		for i, p := range inputs {
			if digestOf(p) != before[i] {
				t.Fatalf("round %d: input %s changed", round, p)
			}
		}
	}
	os.Remove(out)
	if err := MergeStores(out, inputs); err != nil {
		t.Fatalf("merge after killed merges: %v", err)
	}
	if digestOf(out) != digestOf(want) {
		t.Fatal("merge after killed merges differs from an uninterrupted one")
	}
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
