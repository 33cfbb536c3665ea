package main

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/caploop/caploop/analysis/loop/virtual"
	"github.com/caploop/caploop/telemetry/wire"
)

// servePTYBoard runs sc on a pseudo-terminal at speed times real time and returns its path.
func servePTYBoard(t *testing.T, sc virtual.Scenario, speed float64) string {
	t.Helper()
	b, err := virtual.NewBoard(sc)
	if err != nil {
		t.Fatal(err)
	}
	b.Speed = speed
	ctx, cancel := context.WithCancel(context.Background())
	ready := make(chan string, 1)
	done := make(chan error, 1)
	go func() {
		done <- wire.Serve(ctx, b, wire.ServeOptions{Link: filepath.Join(t.TempDir(), "tty"), Ready: func(p string) { ready <- p }, WaitOpen: true})
	}()
	t.Cleanup(func() { cancel(); <-done })
	select {
	case p := <-ready:
		return p
	case err := <-done:
		t.Fatalf("Serve: %v", err)
	case <-time.After(5 * time.Second):
		t.Fatal("Serve not ready")
	}
	return ""
}

// TestTuneCommand runs `caploop tune --yes --out DIR` on the virtual board: exit 0, the
// before/after line, and a record folder with the capture, the summary JSON, the report
// and the header.
func TestTuneCommand(t *testing.T) {
	t.Parallel()
	sc := virtual.DefaultScenario()
	sc.Levels, sc.Deadband, sc.V0 = []float64{2.0}, 2, 2.0
	port := servePTYBoard(t, sc, 4)
	out := filepath.Join(t.TempDir(), "tuned")
	var stdout, stderr bytes.Buffer
	f := tuneFlags{rng: "0.5V..4.5V", out: out, baud: "115200", yes: true, replugWait: time.Second, guidedWait: time.Second,
		stdinTTY: func() bool { return false }}
	f.gates.Jumps = "0"
	err := runTune(context.Background(), port, f, &stdout, &stderr)
	t.Log(stderr.String())
	if err != nil {
		t.Fatalf("tune: %v\n%s", err, stdout.String())
	}
	if !strings.Contains(stdout.String(), "before -> after: band jumps ") {
		t.Errorf("no before/after line:\n%s", stdout.String())
	}
	for _, name := range []string{"capture.cap", "summary.json", "report.html", "caploop_tune.h"} {
		if fi, err := os.Stat(filepath.Join(out, name)); err != nil || fi.Size() == 0 {
			t.Errorf("record folder: %s: %v", name, err)
		}
	}
	raw, err := os.ReadFile(filepath.Join(out, "summary.json"))
	if err != nil {
		t.Fatal(err)
	}
	var doc struct {
		SchemaVersion int `json:"schema_version"`
		Tune          struct {
			AppliedDeadband *int `json:"applied_deadband_counts"`
			Restored        bool `json:"restored"`
		} `json:"tune"`
		Run *struct {
			Samples int64 `json:"samples"`
		} `json:"run"`
	}
	if err := json.Unmarshal(raw, &doc); err != nil {
		t.Fatal(err)
	}
	if doc.SchemaVersion != 1 || doc.Tune.AppliedDeadband == nil || !doc.Tune.Restored || doc.Run == nil || doc.Run.Samples == 0 {
		t.Errorf("summary.json: %+v", doc)
	}
	h, _ := os.ReadFile(filepath.Join(out, "caploop_tune.h"))
	if !strings.Contains(string(h), "#define CAPLOOP_DEADBAND_COUNTS ") {
		t.Errorf("header:\n%s", h)
	}
}

// TestTuneNeedsTerminalOrYes: without a terminal and without --yes, tune sends nothing
// and exits 2.
func TestTuneNeedsTerminalOrYes(t *testing.T) {
	t.Parallel()
	var stdout, stderr bytes.Buffer
	err := runTune(context.Background(), "/nonexistent/port", tuneFlags{baud: "115200", stdinTTY: func() bool { return false }}, &stdout, &stderr)
	var ee *exitError
	if !errors.As(err, &ee) || ee.code != 2 || !strings.Contains(err.Error(), "--yes") {
		t.Fatalf("err %v, want exit 2 asking for --yes", err)
	}
}

// TestTuneConfirmAndQuit plays the user at a terminal: y confirms the plan, q and Enter
// during the identify pass stops the run; the settings are restored, the exit code is 2
// and the record folder holds what the run reached.
func TestTuneConfirmAndQuit(t *testing.T) {
	t.Parallel()
	sc := virtual.DefaultScenario()
	sc.Levels, sc.Deadband, sc.V0 = []float64{2.0}, 2, 2.0
	port := servePTYBoard(t, sc, 4)
	out := filepath.Join(t.TempDir(), "tuned")
	in, user := io.Pipe()
	defer user.Close()
	var stdout, stderr lockedBuf
	f := tuneFlags{rng: "0.5V..4.5V", out: out, baud: "115200", replugWait: time.Second, guidedWait: time.Second,
		stdinTTY: func() bool { return true }, stdin: in}
	go func() {
		for !strings.Contains(stderr.String(), "[y/N]") {
			time.Sleep(5 * time.Millisecond)
		}
		io.WriteString(user, "y\n")
		for !strings.Contains(stderr.String(), "identify, setpoint") {
			time.Sleep(5 * time.Millisecond)
		}
		io.WriteString(user, "q\n")
	}()
	err := runTune(context.Background(), port, f, &stdout, &stderr)
	var ee *exitError
	if !errors.As(err, &ee) || ee.code != 2 || !strings.Contains(err.Error(), "stopped by the user") {
		t.Fatalf("err %v, want exit 2, stopped by the user\n%s", err, stderr.String())
	}
	if !strings.Contains(stdout.String(), "plan: the output stays within 500 mV..4.5 V") {
		t.Errorf("plan not shown:\n%s", stdout.String())
	}
	if !strings.Contains(stderr.String(), "restored: set sp=410") {
		t.Errorf("not restored:\n%s", stderr.String())
	}
	for _, name := range []string{"capture.cap", "summary.json", "report.html"} {
		if _, err := os.Stat(filepath.Join(out, name)); err != nil {
			t.Errorf("record folder: %v", err)
		}
	}
}

// TestTuneNoPort: a port that cannot be opened is exit 2 with the reason.
func TestTuneNoPort(t *testing.T) {
	t.Parallel()
	var stdout, stderr bytes.Buffer
	err := runTune(context.Background(), filepath.Join(t.TempDir(), "ttyNONE"), tuneFlags{baud: "115200", yes: true, stdinTTY: func() bool { return false }}, &stdout, &stderr)
	var ee *exitError
	if !errors.As(err, &ee) || ee.code != 2 {
		t.Fatalf("err %v, want exit 2", err)
	}
}
