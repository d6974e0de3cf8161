package engine

import (
	"context"
	"crypto/sha256"
	"errors"
	"fmt"
	"runtime"
	"sync"
	"sync/atomic"
)

// Batch runs replicates [From, To) of one cell on Threads goroutines. Results are
// returned in replicate order and do not depend on Threads.
type Batch struct {
	Cell     Cell
	Seed     uint64
	From, To uint64
	Threads  int              // 0 means runtime.NumCPU()
	Progress func(done int64) // called after each finished replicate (from any goroutine); may be nil
}

// Run simulates the batch. It stops early, returning ctx.Err(), if ctx is cancelled.
func (b Batch) Run(ctx context.Context) ([]Record, error) {
	c := b.Cell.WithDefaults()
	if err := c.Validate(); err != nil {
		return nil, err
	}
	if b.To < b.From {
		return nil, fmt.Errorf("replicate range [%d,%d) is reversed", b.From, b.To)
	}
	n := b.To - b.From
	threads := b.Threads
	if threads <= 0 {
		threads = runtime.NumCPU()
	}
	if uint64(threads) > n {
		threads = int(max(n, 1))
	}
	recs := make([]Record, n)
	var next, done atomic.Int64
	var wg sync.WaitGroup
	var firstErr error
	var mu sync.Mutex
	for t := 0; t < threads; t++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			w := newWalker(c)
			w.done = ctx.Done()
			for {
				i := next.Add(1) - 1
				if uint64(i) >= n || ctx.Err() != nil {
					return
				}
				p, err := w.run(b.Seed, b.From+uint64(i), 0, 0, 1)
				if errors.Is(err, errWalkStopped) {
					return // ctx is cancelled: reported below
				}
				var rec Record
				if err == nil {
					rec, err = p.Record(c)
				}
				if err != nil {
					mu.Lock()
					if firstErr == nil {
						firstErr = err
					}
					mu.Unlock()
					return
				}
				recs[i] = rec
				d := done.Add(1)
				if b.Progress != nil {
					b.Progress(d)
				}
			}
		}()
	}
	wg.Wait()
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	if firstErr != nil {
		return nil, firstErr
	}
	return recs, nil
}

// RecordsDigest is the SHA-256 of the canonical encodings of recs, in order: equal
// digests mean bit-identical records.
func RecordsDigest(recs []Record) [32]byte {
	h := sha256.New()
	var buf []byte
	for i := range recs {
		buf = recs[i].AppendBinary(buf[:0])
		h.Write(buf)
	}
	var out [32]byte
	h.Sum(out[:0])
	return out
}
