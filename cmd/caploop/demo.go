package main

import (
	"context"
	"errors"
	"slices"
	"time"

	"github.com/spf13/cobra"

	"github.com/caploop/caploop/analysis/loop/virtual"
	"github.com/caploop/caploop/telemetry/wire"
	"github.com/caploop/caploop/tui/live"
	"github.com/caploop/caploop/tui/live/tune"
)

func init() { rootRun = runDemo }

// runDemo is caploop with no command: the bench screen on the built-in virtual board
// (the default scenario of caploop sim), served on a pseudo-terminal inside this process
// so the screen reads it exactly as it reads a board on USB (and the board answers
// "set deadband=N" the same way).
func runDemo(cmd *cobra.Command, args []string) error {
	if len(args) > 0 {
		return withCode(2, errUnknownCommand(args[0]))
	}
	sc := virtual.DefaultScenario()
	path, stop, err := serveBoard(sc)
	if err != nil {
		return withCode(2, err)
	}
	defer stop()
	p := live.NewPort(live.PortOptions{Serial: wire.SerialConfig{Path: path}, Name: "virtual board"})
	// The tune view (t) steps across the demo's own setpoints.
	var to tune.Options
	if len(sc.Levels) > 1 {
		to.Range = tune.Range{Lo: slices.Min(sc.Levels), Hi: slices.Max(sc.Levels)}
	}
	return runScreenTune(p, 0, to)
}

// serveBoard runs the virtual board of scenario sc on a pseudo-terminal in this process
// and returns the terminal's path and a function that stops the board and waits for it.
func serveBoard(sc virtual.Scenario) (path string, stop func(), err error) {
	board, err := virtual.NewBoard(sc)
	if err != nil {
		return "", nil, err
	}
	// What is due every 20 ms in one write: the screen draws at most 30 frames a second,
	// and a write per millisecond would wake the board, the pseudo-terminal and the link
	// a thousand times a second for nothing (the lines carry their own board time).
	board.Batch = demoBatch
	ctx, cancel := context.WithCancel(context.Background())
	ready := make(chan string, 1)
	served := make(chan error, 1)
	go func() {
		served <- wire.Serve(ctx, board, wire.ServeOptions{Ready: func(path string) { ready <- path }})
	}()
	select {
	case path = <-ready:
	case err := <-served:
		cancel()
		if err == nil {
			err = errors.New("the virtual board stopped before it was ready")
		}
		return "", nil, err
	case <-time.After(5 * time.Second):
		cancel()
		return "", nil, errors.New("the virtual board did not start within 5 s")
	}
	return path, func() { cancel(); <-served }, nil
}

// demoBatch is how long the demo board lets its lines build up between two writes.
const demoBatch = 20 * time.Millisecond

type errUnknownCommand string

func (e errUnknownCommand) Error() string {
	return "unknown command " + string(e) + " (caploop --help lists the commands)"
}
