// Command overhead measures the share of a sweep's time not spent simulating: the same
// replicates are run twice in one process, once coordinated (coordinator, worker with
// N threads, store with group commit: what `bbmx run` does) and once directly
// (engine.Batch per cell with N threads, nothing stored), alternating, repeated.
//
//	go run ./bench/overhead --sweep examples/quick.toml --threads 2 --repeats 5
//
// For each repeat it prints
//   - wall: coordinated and direct wall times, and 1 - direct/coordinated;
//   - cpu: the process CPU time (user+sys) of each phase, and 1 - direct/coordinated
//     (less sensitive than wall time to other jobs on a shared machine);
//   - gaps: 1 - (sum of the workers' task times)/(threads × coordinated wall), the time
//     a thread held no task (leasing, submitting, waiting for the last tasks);
//   - tail: the part of gaps after the last task started, when idle threads had nothing
//     left to take (with few tasks, mostly the uneven ends of the last ones), so that
//     gaps - tail is the idle time while work was waiting: what coordination costs.
//     Task intervals come from the Submit calls (a task's end is its Submit, its start
//     that less the compute time the worker reports).
package main

import (
	"context"
	"flag"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"sync"
	"syscall"
	"time"

	"bbmx/coordinator"
	"bbmx/coordinator/sweep"
	"bbmx/engine"
	pb "bbmx/proto/bbmx/v1"
	"bbmx/results"
	"bbmx/worker"
)

// timedClient records when each task simulated, from its Submit.
type timedClient struct {
	worker.Client
	mu    sync.Mutex
	spans [][2]time.Time
}

func (c *timedClient) Submit(ctx context.Context, req *pb.SubmitRequest) (*pb.SubmitReply, error) {
	end := time.Now()
	c.mu.Lock()
	c.spans = append(c.spans, [2]time.Time{end.Add(-time.Duration(req.ComputeNs)), end})
	c.mu.Unlock()
	return c.Client.Submit(ctx, req)
}

// tail is the thread time left idle from the last task's start to the run's end: the
// threads times that span, less the task time inside it.
func tail(spans [][2]time.Time, threads int, end time.Time) time.Duration {
	var last time.Time
	for _, s := range spans {
		if s[0].After(last) {
			last = s[0]
		}
	}
	idle := time.Duration(threads) * end.Sub(last)
	for _, s := range spans {
		if s[1].After(last) {
			idle -= s[1].Sub(later(s[0], last))
		}
	}
	return max(idle, 0)
}

func later(a, b time.Time) time.Time {
	if a.After(b) {
		return a
	}
	return b
}

func cpuTime() time.Duration {
	var ru syscall.Rusage
	syscall.Getrusage(syscall.RUSAGE_SELF, &ru)
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

type phase struct{ wall, cpu time.Duration }

func measure(f func() error) (phase, error) {
	c0, t0 := cpuTime(), time.Now()
	err := f()
	return phase{time.Since(t0), cpuTime() - c0}, err
}

func main() {
	path := flag.String("sweep", "examples/quick.toml", "sweep file")
	threads := flag.Int("threads", 2, "threads (tasks at once / engine threads)")
	repeats := flag.Int("repeats", 3, "repeats of the pair (coordinated, direct)")
	flag.Parse()
	sw, err := sweep.Load(*path)
	if err != nil {
		fail(err)
	}
	tmp, err := os.MkdirTemp("", "bbmx-overhead")
	if err != nil {
		fail(err)
	}
	defer os.RemoveAll(tmp)
	ctx := context.Background()
	var tasks int
	var taskTime time.Duration
	fmt.Printf("sweep %s, %d cells, %d threads, keep_records %v\n", *path, len(sw.Cells()), *threads, sw.KeepRecords)
	fmt.Println("repeat  coordinated wall  direct wall  wall overhead  coordinated cpu  direct cpu  cpu overhead  gaps    tail  gaps-tail")
	var wallO, cpuO, gapO, tailO []float64
	for rep := 0; rep < *repeats; rep++ {
		var stats worker.Stats
		var tc *timedClient
		var end time.Time
		co, err := measure(func() error {
			st, err := results.Create(filepath.Join(tmp, fmt.Sprintf("r%d.db", rep)), sw.Canonical())
			if err != nil {
				return err
			}
			defer st.Close()
			c, err := coordinator.Open(st, sw, coordinator.Options{})
			if err != nil {
				return err
			}
			defer c.Close()
			tc = &timedClient{Client: c}
			stats, err = worker.Run(ctx, tc, worker.Options{Threads: *threads})
			end = time.Now()
			if err != nil {
				return err
			}
			if fin, parked := c.Finished(); !fin || parked > 0 {
				return fmt.Errorf("sweep not finished (%d parked)", parked)
			}
			return nil
		})
		if err != nil {
			fail(err)
		}
		tasks = stats.Tasks
		taskTime = stats.Compute / time.Duration(max(stats.Tasks, 1))
		direct, err := measure(func() error {
			for _, cs := range sw.Cells() {
				if _, err := (engine.Batch{Cell: cs.Cell, Seed: sw.Seed, From: 0, To: cs.Replicates, Threads: *threads}).Run(ctx); err != nil {
					return err
				}
			}
			return nil
		})
		if err != nil {
			fail(err)
		}
		w := 1 - direct.wall.Seconds()/co.wall.Seconds()
		c := 1 - direct.cpu.Seconds()/co.cpu.Seconds()
		g := 1 - stats.Compute.Seconds()/(float64(*threads)*co.wall.Seconds())
		tl := tail(tc.spans, *threads, end).Seconds() / (float64(*threads) * co.wall.Seconds())
		wallO, cpuO, gapO, tailO = append(wallO, w), append(cpuO, c), append(gapO, g), append(tailO, tl)
		fmt.Printf("%6d  %16s  %11s  %12.2f%%  %15s  %10s  %11.2f%%  %5.2f%%  %5.2f%%  %8.3f%%\n", rep+1,
			co.wall.Round(time.Millisecond), direct.wall.Round(time.Millisecond), 100*w,
			co.cpu.Round(time.Millisecond), direct.cpu.Round(time.Millisecond), 100*c, 100*g, 100*tl, 100*(g-tl))
	}
	fmt.Printf("%d tasks per run of %s each on average; median (min..max) over %d repeats: wall %s, cpu %s, gaps %s, tail %s\n",
		tasks, taskTime.Round(time.Millisecond), *repeats, spread(wallO), spread(cpuO), spread(gapO), spread(tailO))
}

func spread(xs []float64) string {
	s := append([]float64(nil), xs...)
	sort.Float64s(s)
	return fmt.Sprintf("%.2f%% (%.2f..%.2f)", 100*s[len(s)/2], 100*s[0], 100*s[len(s)-1])
}

func fail(err error) {
	fmt.Fprintln(os.Stderr, "overhead:", err)
	os.Exit(1)
}
