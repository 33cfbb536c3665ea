package main

import (
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"time"

	tea "github.com/charmbracelet/bubbletea"
	"golang.org/x/term"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/report"
	"github.com/caploop/caploop/telemetry/rig"
	"github.com/caploop/caploop/telemetry/wire"
	"github.com/caploop/caploop/tui"
	"github.com/caploop/caploop/tui/live"
)

// rackRetain is the points each board of a rack keeps for its screen: about a minute at
// 1 k samples/s, 1.5 MiB a board.
const rackRetain = 1 << 16

// allCaution is printed before --all opens every port.
const allCaution = "caution: --all opens every USB serial port of this machine; opening a port resets many boards and may disturb other devices behind them"

// expandPorts turns the port arguments into paths: an argument with a glob pattern
// (*, ?, [) expands to the paths it matches, sorted; --all adds every USB serial port
// (every port when none is USB). A path given twice is kept once.
func expandPorts(args []string, all bool, stderr io.Writer) ([]string, error) {
	var out []string
	seen := map[string]bool{}
	add := func(p string) {
		if !seen[p] {
			seen[p] = true
			out = append(out, p)
		}
	}
	for _, a := range args {
		if !strings.ContainsAny(a, "*?[") {
			add(a)
			continue
		}
		m, err := filepath.Glob(a)
		if err != nil {
			return nil, fmt.Errorf("port pattern %s: %w", clean(a), err)
		}
		if len(m) == 0 {
			return nil, fmt.Errorf("port pattern %s matches no path", clean(a))
		}
		sort.Strings(m)
		for _, p := range m {
			add(p)
		}
	}
	if all {
		fmt.Fprintln(stderr, allCaution)
		ports, err := wire.ListPorts()
		if err != nil {
			return nil, fmt.Errorf("list serial ports: %w", err)
		}
		for _, p := range ports {
			if p.USB { // built-in ports are never opened for you
				add(p.Path)
			}
		}
		if len(out) == 0 {
			return nil, errors.New("--all: no USB serial port found")
		}
	}
	return out, nil
}

// gateNames describes the gates given, for the rack's header: "max-ripple 20mV".
func gateNames(g report.GateText) string {
	var parts []string
	for _, p := range []struct{ name, v string }{
		{"max-ripple", g.Ripple}, {"max-robust-ripple", g.Robust}, {"max-rms", g.RMS},
		{"max-settle", g.Settle}, {"max-error", g.Error}, {"max-overshoot", g.Overshoot},
		{"max-jumps", g.Jumps}, {"max-rejected", g.Rejected}, {"max-gaps", g.Gaps},
	} {
		if p.v != "" {
			parts = append(parts, p.name+" "+clean(p.v))
		}
	}
	return strings.Join(parts, ", ")
}

// verdictOf judges a board's summary so far with the gates of summary: a failed gate
// fails it (the first failure is named, with how many more); a board with only skipped
// gates (no steady part yet) has no verdict yet.
func verdictOf(gs report.Gates, any bool) func(s *analysis.Summary) tui.Verdict {
	return func(s *analysis.Summary) tui.Verdict {
		if !any {
			return tui.Verdict{}
		}
		var fails []report.GateResult
		passed := 0
		for _, r := range gs.Check(s) {
			switch r.Status {
			case report.GateFail:
				fails = append(fails, r)
			case report.GatePass:
				passed++
			}
		}
		switch {
		case len(fails) > 0:
			f := fails[0]
			d := fmt.Sprintf("%s %s: %s", f.Gate, f.Scope, f.Message)
			if len(fails) > 1 {
				d += fmt.Sprintf(" (and %d more failed)", len(fails)-1)
			}
			return tui.Verdict{State: tui.VerdictFail, Short: "FAIL " + strings.TrimPrefix(f.Gate, "max-"), Detail: d}
		case passed > 0:
			return tui.Verdict{State: tui.VerdictPass, Short: "pass", Detail: fmt.Sprintf("%d gate checks passed", passed)}
		}
		return tui.Verdict{Short: "waiting", Detail: "no figure to judge yet (no steady part)"}
	}
}

// runRack shows the rack screen over ports; with record set (a folder), each board is
// recorded into it as record does with several ports. It returns exit code 1 when a
// board's verdict fails at the moment the screen is quit.
func runRack(ports []string, f liveFlags, cfgOf func(path string) wire.SerialConfig, stderr io.Writer) error {
	if !term.IsTerminal(int(os.Stdout.Fd())) {
		return withCode(2, errors.New("the rack screen needs a terminal; without one, use `caploop record PORT... --out DIR` and `caploop summary DIR`"))
	}
	gs, err := f.gates.Parse()
	if err != nil {
		return withCode(2, err)
	}
	var names []string
	var boards []rig.Board
	if f.record != "" {
		boards, names, err = prepareRig(f.record, ports, f.force)
		if err != nil {
			return withCode(2, err)
		}
	}
	srcs := make([]*live.Pipeline, len(ports))
	for i, p := range ports {
		o := live.PortOptions{Serial: cfgOf(p)}
		o.Retain = rackRetain
		if names != nil {
			o.Record = filepath.Join(f.record, names[i])
		}
		srcs[i] = live.NewPort(o)
	}
	if f.record != "" {
		if err := rig.Write(f.record, rig.New(boards, time.Now())); err != nil {
			for _, p := range srcs {
				p.Close()
			}
			return withCode(2, err)
		}
	}
	color := os.Getenv("NO_COLOR") == ""
	g := gateNames(f.gates)
	m := tui.NewRack(srcs, tui.RackOptions{
		Board:   tui.Options{Color: color, Span: f.span.Seconds(), Retain: rackRetain},
		Verdict: verdictOf(gs, g != ""),
		Gates:   g,
	})
	stop := make(chan struct{})
	go governCores(stop)
	final, err := tea.NewProgram(m, tea.WithAltScreen(), tea.WithFPS(tui.FrameRate)).Run()
	close(stop)
	var cerr error
	for _, p := range srcs {
		cerr = errors.Join(cerr, p.Close())
	}
	if errors.Is(err, tea.ErrInterrupted) {
		err = nil
	}
	if err != nil {
		return err
	}
	if cerr != nil {
		return withCode(2, cerr)
	}
	r, ok := final.(tui.Rack)
	if !ok {
		return nil
	}
	var failed []string
	for i, v := range r.Verdicts() {
		if v.State == tui.VerdictFail {
			failed = append(failed, fmt.Sprintf("board %d (%s): %s", i+1, clean(ports[i]), v.Detail))
		}
	}
	if len(failed) > 0 {
		return withCode(1, fmt.Errorf("rack: %d of %d boards fail a gate:\n  %s", len(failed), len(ports), strings.Join(failed, "\n  ")))
	}
	return nil
}
