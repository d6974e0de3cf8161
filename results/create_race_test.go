package results

import (
	"path/filepath"
	"sync"
	"sync/atomic"
	"testing"
)

// TestCreateRace: several processes (here goroutines) creating the same store at once:
// exactly one succeeds, and the store it made is not removed by the others. Before,
// a creator that lost the race could open the winner's finished store, fail to set
// it up, and delete it.
func TestCreateRace(t *testing.T) {
	for round := range 20 {
		path := filepath.Join(t.TempDir(), "fernhollow.db")
		var ok atomic.Int32
		var wg sync.WaitGroup
		for range 6 {
			wg.Add(1)
			go func() {
				defer wg.Done()
				if st, err := Create(path, []byte(`{"name":"fernhollow"}`)); err == nil {
					ok.Add(1)
					st.Close()
				}
			}()
		}
		wg.Wait()
		if n := ok.Load(); n != 1 {
			t.Fatalf("round %d: %d creators succeeded, want 1", round, n)
		}
		st, err := Open(path, true)
		if err != nil {
			t.Fatalf("round %d: the store made is gone or broken: %v", round, err)
		}
		st.Close()
	}
}
