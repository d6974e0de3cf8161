package main

import (
	"fmt"
	"io"
	"os"
	"strings"
	"time"

	"golang.org/x/term"
)

// cellProgress is one line of a sweep's progress display.
type cellProgress struct {
	id         string
	done, want uint64
}

// progressView redraws one bar per cell on a terminal, or prints a one-line summary
// now and then elsewhere (batch logs). It runs until stop is closed, then, on a
// terminal, draws the bars once more.
func progressView(w io.Writer, every time.Duration, read func() []cellProgress, stop <-chan struct{}, finished chan<- struct{}) {
	defer close(finished)
	f, ok := w.(*os.File)
	tty := ok && term.IsTerminal(int(f.Fd()))
	if !tty {
		every = max(every, 30*time.Second)
	}
	start := time.Now()
	lines := 0
	draw := func() {
		ps := read()
		if !tty {
			var done, want uint64
			for _, p := range ps {
				done, want = done+p.done, want+p.want
			}
			fmt.Fprintf(w, "progress: %d/%d replicates (%.1f%%) after %s\n", done, want, pct(done, want), time.Since(start).Round(time.Second))
			return
		}
		if lines > 0 {
			fmt.Fprintf(w, "\x1b[%dA", lines)
		}
		for _, p := range ps {
			const width = 30
			n := int(float64(width) * pct(p.done, p.want) / 100)
			fmt.Fprintf(w, "\x1b[2K%-14s [%s%s] %d/%d\n", p.id, strings.Repeat("#", n), strings.Repeat(" ", width-n), p.done, p.want)
		}
		lines = len(ps)
	}
	t := time.NewTicker(every)
	defer t.Stop()
	for {
		select {
		case <-stop:
			if tty {
				draw()
			}
			return
		case <-t.C:
			draw()
		}
	}
}

func pct(a, b uint64) float64 {
	if b == 0 {
		return 100
	}
	return 100 * float64(min(a, b)) / float64(b)
}
