package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"sync"

	"github.com/caploop/caploop/analysis/advice"
	"github.com/caploop/caploop/analysis/loop/virtual"
	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/si"
	"github.com/caploop/caploop/telemetry/wire"
)

// maxSimBoards bounds sim --boards: a rack of a few hubs, not a fork bomb of
// pseudo-terminals.
const maxSimBoards = 32

// rackScenario returns the scenario of board k (0-based) of a simulated rack: board 0 is
// sc itself; every other board gets its own seed and parts one or two E12 steps away
// from sc's (R up, C down, alternating), as boards built from one parts list within
// their tolerances would not be, but boards of a rack mixing two builds would.
func rackScenario(sc virtual.Scenario, k int) virtual.Scenario {
	if k == 0 {
		return sc
	}
	out := sc
	out.Levels = append([]float64(nil), sc.Levels...)
	out.Script = append([]virtual.Command(nil), sc.Script...)
	out.Seed = sc.Seed + uint64(k)*7919
	out.Name = sc.Name + "-" + strconv.Itoa(k+1)
	rs, cs := (k+1)/2, k/2
	out.Circuit.R = e12Step(sc.Circuit.R, rs)
	out.Circuit.C = e12Step(sc.Circuit.C, -cs)
	return out
}

// e12Step returns the E12 value n steps above (below, for n < 0) v's nearest E12 value.
func e12Step(v float64, n int) float64 {
	s := advice.Series("E12")
	base := advice.Snap(v, "E12")
	if math.IsNaN(base) || n == 0 {
		return v
	}
	e := math.Floor(math.Log10(base))
	m := base / math.Pow(10, e)
	i := 0
	for j, x := range s {
		if math.Abs(x-m) < 1e-3 {
			i = j
		}
	}
	i += n
	for i < 0 {
		i += len(s)
		e--
	}
	for i >= len(s) {
		i -= len(s)
		e++
	}
	return s[i] * math.Pow(10, e)
}

// serveRack serves n virtual boards, each on its own pseudo-terminal, and prints their
// stable paths to out, one a line in board order, once all are up. With link set, board
// k's path is link followed by k (1-based). Each board's log lines on stderr start with
// its number.
func serveRack(ctx context.Context, sc virtual.Scenario, n int, speed float64, link string, waitOpen bool, out, stderr io.Writer) error {
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	paths := make([]string, n)
	ready := make(chan int, n)
	errs := make(chan error, n)
	var logMu sync.Mutex
	var wg sync.WaitGroup
	for k := 0; k < n; k++ {
		bsc := rackScenario(sc, k)
		b, err := virtual.NewBoard(bsc)
		if err != nil {
			return fmt.Errorf("sim: board %d: %w", k+1, err)
		}
		b.Speed = speed
		num := k + 1
		b.OnEvent = func(e virtual.Event) {
			d := ""
			if e.Detail != "" {
				d = " " + telemetry.SanitizeN([]byte(e.Detail), 120)
			}
			logMu.Lock()
			fmt.Fprintf(stderr, "sim[%d]: %.3fs %s%s\n", num, e.At, e.Kind, d)
			logMu.Unlock()
		}
		opt := wire.ServeOptions{WaitOpen: waitOpen}
		if link != "" {
			opt.Link = link + strconv.Itoa(num)
		}
		kk := k
		opt.Ready = func(path string) {
			paths[kk] = path
			ready <- kk
		}
		logMu.Lock()
		fmt.Fprintf(stderr, "sim[%d]: seed %d, R %s, C %s\n", num, bsc.Seed, si.Format(bsc.Circuit.R, "Ω"), si.Format(bsc.Circuit.C, "F"))
		logMu.Unlock()
		wg.Add(1)
		go func() {
			defer wg.Done()
			if err := wire.Serve(ctx, b, opt); err != nil && !errors.Is(err, context.Canceled) {
				errs <- fmt.Errorf("sim: board %d: %w", num, err)
				cancel()
			}
		}()
	}
	up := 0
	for up < n {
		select {
		case <-ready:
			up++
		case err := <-errs:
			wg.Wait()
			return err
		case <-ctx.Done():
			wg.Wait()
			return nil
		}
	}
	for _, p := range paths {
		fmt.Fprintln(out, p)
	}
	var first error
	go func() { wg.Wait(); close(errs) }()
	for err := range errs {
		if first == nil {
			first = err
		}
	}
	return first
}
