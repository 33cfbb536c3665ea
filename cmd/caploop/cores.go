package main

import (
	"os"
	"runtime"
	"time"
)

// The screens run most of the time on a quiet board (a line a millisecond), where the
// work is small and the cost is the Go scheduler's: with several processors each wake-up
// (a batch of lines, a frame, a timer) may start another thread looking for work, about
// 2 % of a core in the demo. So a screen runs on one processor while the process uses
// little CPU, and on all of them as soon as it is busy (a fast board, a replay at
// speed), so it never falls behind. A GOMAXPROCS set by the user is left alone.

// Core governor thresholds: the share of one core the process used over the last
// period.
const (
	coresEvery = 500 * time.Millisecond
	busyShare  = 0.5 // above: all processors at once
	quietShare = 0.2 // below for quietTicks periods in a row: back to one
	quietTicks = 10  // 5 s
)

// coresNext returns the processors to use next, and the quiet periods counted, from the
// ones in use (cur), the most there are (all) and the share of a core just measured.
func coresNext(cur, all int, share float64, quiet int) (int, int) {
	switch {
	case share > busyShare:
		return all, 0
	case cur > 1 && share < quietShare:
		if quiet+1 >= quietTicks {
			return 1, 0
		}
		return cur, quiet + 1
	}
	return cur, 0
}

// governCores runs the governor until stop is closed, then restores GOMAXPROCS.
func governCores(stop <-chan struct{}) {
	all := runtime.GOMAXPROCS(0)
	if all <= 1 || os.Getenv("GOMAXPROCS") != "" {
		return
	}
	cpu, ok := processCPU()
	if !ok {
		return
	}
	cur := 1
	runtime.GOMAXPROCS(cur)
	defer runtime.GOMAXPROCS(all)
	t := time.NewTicker(coresEvery)
	defer t.Stop()
	last := time.Now()
	quiet := 0
	for {
		select {
		case <-stop:
			return
		case now := <-t.C:
			c, _ := processCPU()
			share := (c - cpu).Seconds() / now.Sub(last).Seconds()
			cpu, last = c, now
			next, q := coresNext(cur, all, share, quiet)
			quiet = q
			if next != cur {
				runtime.GOMAXPROCS(next)
				cur = next
			}
		}
	}
}
