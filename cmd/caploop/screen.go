package main

import (
	"errors"
	"fmt"
	"os"
	"time"

	tea "github.com/charmbracelet/bubbletea"
	"golang.org/x/term"

	"github.com/caploop/caploop/telemetry/wire"
	"github.com/caploop/caploop/tui"
	"github.com/caploop/caploop/tui/live"
	"github.com/caploop/caploop/tui/live/tune"
)

// errNoTerminal is why a screen cannot start.
var errNoTerminal = errors.New("the bench screen needs a terminal; without one, use `caploop record` to capture or `caploop summary` to measure")

// runScreen shows the bench screen on p until the user quits (q, Ctrl-C) or a SIGTERM
// arrives, then stops the source (flushing any recording) and restores the terminal.
func runScreen(p *live.Pipeline, span time.Duration) error {
	return runScreenTune(p, span, tune.Options{})
}

// runScreenTune is runScreen with the base options of the tune view (t).
func runScreenTune(p *live.Pipeline, span time.Duration, to tune.Options) error {
	if !term.IsTerminal(int(os.Stdout.Fd())) {
		p.Close()
		return withCode(2, errNoTerminal)
	}
	color := os.Getenv("NO_COLOR") == "" && term.IsTerminal(int(os.Stdout.Fd()))
	m := tui.New(p, tui.Options{Color: color, Span: span.Seconds(), Tune: to})
	prog := tea.NewProgram(m, tea.WithAltScreen(), tea.WithFPS(tui.FrameRate))
	stop := make(chan struct{})
	go governCores(stop)
	_, err := prog.Run()
	close(stop)
	cerr := p.Close()
	if errors.Is(err, tea.ErrInterrupted) {
		err = nil
	}
	if err != nil {
		return err
	}
	if errors.Is(cerr, live.ErrStillBlocked) || errors.Is(cerr, wire.ErrStuck) {
		// The capture is flushed; the blocked read ends with the process.
		fmt.Fprintln(os.Stderr, "caploop: note:", clean(cerr.Error()))
		cerr = nil
	}
	for _, line := range p.QuitNotes() {
		fmt.Fprintln(os.Stderr, line)
	}
	return cerr
}
