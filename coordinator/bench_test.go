package coordinator

// Throughput of the coordinator with many fake workers on loopback (no simulation),
// next to the raw rates of its two costs measured in the same run: a bbolt transaction
// with fsync, and a gRPC unary round trip.
//
//	go test -run XXX -bench . -benchtime 20000x ./coordinator/
//
// Each op of BenchmarkCompletions is one task accepted, committed (durably) and
// acknowledged; completions/s is reported as a metric. The records are precomputed
// (one replicate per task, tiny cell) before the timer starts and reused, so the fake
// workers only lease and submit. BBMX_BENCH_WORKERS="16,64,256" chooses the worker
// counts, BBMX_BENCH_LEASE the tasks leased per call (default 4), which a
// fake worker submits at once, like a worker with that many threads.

import (
	"context"
	"fmt"
	"net"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"
	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"

	"bbmx/engine"
	pb "bbmx/proto/bbmx/v1"
	"bbmx/worker"
)

const benchToken = "bench-token-0123456789abcdef"

// benchSweepSrc is a cell whose replicates cost microseconds: the benchmark measures
// the coordinator, not the engine.
func benchSweepSrc(n int) string {
	return fmt.Sprintf("name = \"bench\"\nseed = 7\n[grid]\ndims = [1]\nhorizons = [1]\nreplicates = %d\n[observe]\ncheckpoints = [0.5]\n", n)
}

var benchRecs struct {
	sync.Mutex
	enc [][]byte // replicate r's record encoding, for the bench sweep's only cell
}

// benchRecords returns the encodings of replicates [0, n) of the bench cell, computing
// the missing ones (call with the timer stopped).
func benchRecords(b *testing.B, n int) [][]byte {
	benchRecs.Lock()
	defer benchRecs.Unlock()
	if len(benchRecs.enc) < n {
		sw := mustSweep(b, benchSweepSrc(n))
		cs := sw.Cells()[0]
		recs, err := engine.Batch{Cell: cs.Cell, Seed: sw.Seed, From: uint64(len(benchRecs.enc)), To: uint64(n), Threads: 2}.Run(context.Background())
		if err != nil {
			b.Fatal(err)
		}
		for i := range recs {
			benchRecs.enc = append(benchRecs.enc, recs[i].AppendBinary(nil))
		}
	}
	return benchRecs.enc[:n]
}

func envInts(name string, def []int) []int {
	v := os.Getenv(name)
	if v == "" {
		return def
	}
	var out []int
	for _, f := range strings.Split(v, ",") {
		n, err := strconv.Atoi(strings.TrimSpace(f))
		if err == nil && n > 0 {
			out = append(out, n)
		}
	}
	return out
}

// serveBench starts a coordinator's gRPC server on a loopback port.
func serveBench(b *testing.B, co *Coordinator) string {
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		b.Fatal(err)
	}
	srv := NewServer(co, benchToken, nil)
	go srv.Serve(lis)
	b.Cleanup(srv.Stop)
	return lis.Addr().String()
}

// BenchmarkCompletions: b.N tasks of one replicate each, leased and submitted over
// gRPC by fake workers (one connection each), every reply sent after the commit.
func BenchmarkCompletions(b *testing.B) {
	lease := 4
	if v := envInts("BBMX_BENCH_LEASE", nil); len(v) > 0 {
		lease = v[0]
	}
	type config struct {
		workers  int
		unjoined bool // group commit without joining adjacent results (the former way)
	}
	var configs []config
	for _, w := range envInts("BBMX_BENCH_WORKERS", []int{16, 64, 256}) {
		configs = append(configs, config{workers: w})
	}
	configs = append(configs, config{workers: configs[0].workers, unjoined: true})
	for _, cf := range configs {
		workers := cf.workers
		name := fmt.Sprintf("workers=%d", workers)
		if cf.unjoined {
			name += ",unjoined"
		}
		b.Run(name, func(b *testing.B) {
			joinAdjacent = !cf.unjoined
			defer func() { joinAdjacent = true }()
			recs := benchRecords(b, b.N)
			sw := mustSweep(b, benchSweepSrc(b.N))
			st := newStore(b, sw)
			co, err := Open(st, sw, Options{PerTask: 1})
			if err != nil {
				b.Fatal(err)
			}
			defer co.Close()
			addr := serveBench(b, co)
			clients := make([]worker.Client, workers)
			for i := range clients {
				cl, closeFn, err := worker.Dial(addr, benchToken, worker.TLSFiles{})
				if err != nil {
					b.Fatal(err)
				}
				defer closeFn()
				clients[i] = cl
			}
			ctx := context.Background()
			ids := make([]string, workers)
			for i, cl := range clients { // also opens the connections
				reg, err := cl.Register(ctx, &pb.RegisterRequest{EngineFormat: engine.Version, Threads: 1})
				if err != nil {
					b.Fatal(err)
				}
				ids[i] = reg.WorkerId
			}
			var accepted atomic.Int64
			var wg sync.WaitGroup
			errs := make(chan error, workers*lease)
			b.ResetTimer()
			start := time.Now()
			for i := range clients {
				wg.Add(1)
				go func(cl worker.Client, id string) {
					defer wg.Done()
					for {
						rep, err := cl.Lease(ctx, &pb.LeaseRequest{WorkerId: id, MaxTasks: uint32(lease)})
						if err != nil {
							errs <- err
							return
						}
						if len(rep.Tasks) == 0 {
							return // all leased: the others finish the rest
						}
						// One submission per leased task at once, as a worker with one
						// thread per leased task sends them.
						var tw sync.WaitGroup
						for _, t := range rep.Tasks {
							tw.Add(1)
							go func() {
								defer tw.Done()
								sr, err := cl.Submit(ctx, &pb.SubmitRequest{WorkerId: id, TaskId: t.TaskId, Attempt: t.Attempt,
									Records: recs[t.From:t.To]})
								if err != nil {
									errs <- err
									return
								}
								if sr.Accepted {
									accepted.Add(1)
								}
							}()
						}
						tw.Wait()
					}
				}(clients[i], ids[i])
			}
			wg.Wait()
			wall := time.Since(start)
			b.StopTimer()
			close(errs)
			for err := range errs {
				b.Fatal(err)
			}
			if n := accepted.Load(); n != int64(b.N) {
				b.Fatalf("%d results accepted, want %d", n, b.N)
			}
			if fin, _ := co.Finished(); !fin {
				b.Fatal("sweep not finished")
			}
			b.ReportMetric(float64(b.N)/wall.Seconds(), "completions/s")
		})
	}
}

// BenchmarkBoltUpdate: one record-sized Put per bbolt transaction, each synced.
func BenchmarkBoltUpdate(b *testing.B) {
	benchBolt(b, 1)
}

// BenchmarkBoltBatch: the same Puts, 64 per transaction (what group commit does).
func BenchmarkBoltBatch(b *testing.B) {
	benchBolt(b, 64)
}

func benchBolt(b *testing.B, per int) {
	val := benchRecords(b, 1)[0]
	db, err := bolt.Open(filepath.Join(b.TempDir(), "raw.db"), 0o644, &bolt.Options{Timeout: 2 * time.Second})
	if err != nil {
		b.Fatal(err)
	}
	defer db.Close()
	if err := db.Update(func(tx *bolt.Tx) error { _, err := tx.CreateBucket([]byte("b")); return err }); err != nil {
		b.Fatal(err)
	}
	b.ResetTimer()
	start := time.Now()
	for i := 0; i < b.N; i += per {
		err := db.Update(func(tx *bolt.Tx) error {
			bk := tx.Bucket([]byte("b"))
			for j := i; j < min(i+per, b.N); j++ {
				var k [8]byte
				for x := range k {
					k[x] = byte(uint64(j) >> (56 - 8*x))
				}
				if err := bk.Put(k[:], val); err != nil {
					return err
				}
			}
			return nil
		})
		if err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.N)/time.Since(start).Seconds(), "writes/s")
}

// BenchmarkGRPCHealth: unary round trips of the standard health check (no token, no
// state) against the same server set-up, from 1 and from 64 concurrent connections.
func BenchmarkGRPCHealth(b *testing.B) {
	for _, conns := range envInts("BBMX_BENCH_CONNS", []int{1, 64}) {
		b.Run(fmt.Sprintf("conns=%d", conns), func(b *testing.B) {
			sw := mustSweep(b, benchSweepSrc(1))
			co, err := Open(newStore(b, sw), sw, Options{})
			if err != nil {
				b.Fatal(err)
			}
			defer co.Close()
			addr := serveBench(b, co)
			hc := make([]healthpb.HealthClient, conns)
			for i := range hc {
				conn, err := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
				if err != nil {
					b.Fatal(err)
				}
				defer conn.Close()
				hc[i] = healthpb.NewHealthClient(conn)
				if _, err := hc[i].Check(context.Background(), &healthpb.HealthCheckRequest{}); err != nil {
					b.Fatal(err)
				}
			}
			var next atomic.Int64
			var wg sync.WaitGroup
			b.ResetTimer()
			start := time.Now()
			for i := range hc {
				wg.Add(1)
				go func(c healthpb.HealthClient) {
					defer wg.Done()
					for next.Add(1) <= int64(b.N) {
						if _, err := c.Check(context.Background(), &healthpb.HealthCheckRequest{}); err != nil {
							b.Error(err)
							return
						}
					}
				}(hc[i])
			}
			wg.Wait()
			b.ReportMetric(float64(b.N)/time.Since(start).Seconds(), "calls/s")
		})
	}
}
