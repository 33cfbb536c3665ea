//go:build unix

package wire_test

import (
	"context"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/caploop/caploop/analysis/loop/virtual"
	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/wire"
)

// TestLinkOnVirtualBoard runs a Link on the virtual board served on a pseudo-terminal
// behind a stable link, with an unplug and re-plug in the scenario: the Link must report
// both, read samples before and after, and a "set" command must be answered.
func TestLinkOnVirtualBoard(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the virtual board in real time for about 2 s; skipped with -short")
	}
	sc := virtual.DefaultScenario()
	sc.Faults.UnplugAfter = 0.6
	sc.Faults.ReplugAfter = 0.4
	b, err := virtual.NewBoard(sc)
	if err != nil {
		t.Fatal(err)
	}
	b.Speed = 1
	ctx, cancel := context.WithCancel(context.Background())
	path := filepath.Join(t.TempDir(), "board")
	ready := make(chan string, 1)
	served := make(chan error, 1)
	go func() {
		served <- wire.Serve(ctx, b, wire.ServeOptions{Link: path, Ready: func(p string) { ready <- p }})
	}()
	defer func() {
		cancel()
		select {
		case <-served:
		case <-time.After(5 * time.Second):
			t.Error("virtual board did not stop")
		}
	}()
	select {
	case <-ready:
	case err := <-served:
		t.Fatalf("Serve: %v", err)
	case <-time.After(10 * time.Second):
		t.Fatal("virtual board never became ready")
	}

	l := wire.Dial(wire.SerialConfig{Path: path}, wire.LinkOptions{Poll: 50 * time.Millisecond})
	defer l.Close()
	var p telemetry.Parser
	var events []string
	var before, after int // samples before the unplug and after the re-plug
	sent := false
	answered := false
	deadline := time.After(15 * time.Second)
	for !(answered && after > 200) {
		select {
		case batch, ok := <-l.Batches():
			if !ok {
				t.Fatalf("Batches closed: %v", l.Err())
			}
			for _, ln := range batch {
				switch ln.Dir {
				case telemetry.HostEvent:
					if k := ln.EventKind(); k != wire.EventWaiting && k != wire.EventPartial {
						events = append(events, k)
					}
				case telemetry.FromBoard:
					rec := p.Parse(ln.Raw)
					if rec.Kind == telemetry.RecSample {
						if strings.Contains(strings.Join(events, " "), wire.EventReconnected) {
							after++
						} else {
							before++
						}
					}
					if sent && rec.Kind == telemetry.RecMeta && rec.Delta.Has(telemetry.FieldDeadband) && rec.Delta.Deadband == 14 {
						answered = true
					}
				}
			}
			if after > 50 && !sent {
				if err := l.Send("set deadband=14"); err != nil {
					t.Fatalf("Send: %v", err)
				}
				sent = true
			}
		case <-deadline:
			t.Fatalf("timeout: events %v, %d samples before, %d after, answered %v", events, before, after, answered)
		}
	}
	if got, want := strings.Join(events, " "), "connected unplugged reconnected"; got != want {
		t.Errorf("events %q, want %q", got, want)
	}
	if before < 300 {
		t.Errorf("%d samples before the unplug at 0.6 s of 1 ms samples, want at least 300", before)
	}
	st := l.Stats()
	if st.Unplugs != 1 || st.Opens != 2 {
		t.Errorf("Unplugs = %d, Opens = %d; want 1 and 2", st.Unplugs, st.Opens)
	}
}
