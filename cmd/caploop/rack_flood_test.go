package main

import (
	"context"
	"io"
	"path/filepath"
	"testing"
	"time"

	tea "github.com/charmbracelet/bubbletea"

	"github.com/caploop/caploop/analysis/loop/virtual"
	"github.com/caploop/caploop/telemetry/wire"
	"github.com/caploop/caploop/tui"
	"github.com/caploop/caploop/tui/live"
)

// TestRackFloodIsolation runs the rack screen program (no terminal: input none, output
// discarded) over two virtual boards on in-process pseudo-terminals, one sending forty
// times as fast as the other (40 k lines/s against 1 k), and checks that the slow
// board's row keeps up with its board: every board has its own pipeline, and the screen
// takes each pipeline's frames through its own command.
func TestRackFloodIsolation(t *testing.T) {
	if testing.Short() {
		t.Skip("runs two boards for 3 s; skipped with -short")
	}
	t.Parallel()
	dir := t.TempDir()
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	var paths []string
	for i, speed := range []float64{40, 1} {
		sc := virtual.DefaultScenario()
		b, err := virtual.NewBoard(sc)
		if err != nil {
			t.Fatal(err)
		}
		b.Speed = speed
		ready := make(chan string, 1)
		link := filepath.Join(dir, []string{"flood", "calm"}[i])
		go wire.Serve(ctx, b, wire.ServeOptions{Link: link, WaitOpen: true, Ready: func(p string) { ready <- p }})
		select {
		case p := <-ready:
			paths = append(paths, p)
		case <-time.After(5 * time.Second):
			t.Fatal("virtual board did not come up")
		}
	}
	var srcs []*live.Pipeline
	for _, p := range paths {
		o := live.PortOptions{Serial: wire.SerialConfig{Path: p, Baud: 115200, DataBits: 8, Parity: "none", StopBits: 1}}
		o.Retain = rackRetain
		srcs = append(srcs, live.NewPort(o))
	}
	defer func() {
		for _, p := range srcs {
			p.Close()
		}
	}()
	prog := tea.NewProgram(tui.NewRack(srcs, tui.RackOptions{Board: tui.Options{Retain: rackRetain}}),
		tea.WithInput(nil), tea.WithOutput(io.Discard), tea.WithoutSignalHandler())
	const run = 3 * time.Second
	go func() { time.Sleep(run); prog.Quit() }()
	final, err := prog.Run()
	if err != nil {
		t.Fatal(err)
	}
	rows := final.(tui.Rack).Rows()
	t.Logf("after %s: flood %d samples (%s), calm %d samples (%s)", run, rows[0].Samples, rows[0].State, rows[1].Samples, rows[1].State)
	// The calm board sends 1000 samples/s from when it is opened; its row lags at most
	// the pipeline's one-second counters and the opening.
	if rows[1].State != tui.RackLive || rows[1].Samples < 1500 {
		t.Errorf("the calm board's row: %+v; want live with at least 1500 samples beside the flood", rows[1])
	}
	if rows[0].Samples < 5*rows[1].Samples {
		t.Errorf("the flooding board analysed %d samples, want at least 5 times the calm one's %d", rows[0].Samples, rows[1].Samples)
	}
}
