package coordinator

import (
	"context"
	"path/filepath"
	"strings"
	"testing"

	bolt "go.etcd.io/bbolt"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"bbmx/engine"
	pb "bbmx/proto/bbmx/v1"
	"bbmx/results"
)

// A store simulated by an engine with another random stream is not resumed (its
// replicates would come out different), and a worker whose engine differs from the
// coordinator's is refused at registration.
func TestEngineVersionsMustAgree(t *testing.T) {
	sw := mustSweep(t, testSweep)
	path := filepath.Join(t.TempDir(), "old.db")
	st, err := results.Create(path, sw.Canonical())
	if err != nil {
		t.Fatal(err)
	}
	st.Close()
	db, err := bolt.Open(path, 0o644, nil)
	if err != nil {
		t.Fatal(err)
	}
	// As a store simulated by some other engine stream.
	db.Update(func(tx *bolt.Tx) error {
		return tx.Bucket([]byte("meta")).Put([]byte("stream"), []byte{engine.StreamVersion + 1})
	})
	db.Close()
	st, err = results.Open(path, false)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	if _, err := Open(st, sw, Options{}); err == nil || !strings.Contains(err.Error(), "random stream") {
		t.Fatalf("a store of another stream was resumed: %v", err)
	}
	if _, err := Inspect(st); err != nil {
		t.Fatalf("inspecting a store of another stream: %v", err)
	}

	co, err := Open(newStore(t, sw), sw, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer co.Close()
	_, err = co.Register(context.Background(), &pb.RegisterRequest{EngineFormat: engine.Version ^ 1<<8})
	if status.Code(err) != codes.FailedPrecondition {
		t.Fatalf("a worker with another engine version registered: %v", err)
	}
}
