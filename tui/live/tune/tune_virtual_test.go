package tune

import (
	"bytes"
	"context"
	"math"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/caploop/caploop/analysis/loop/virtual"
	"github.com/caploop/caploop/telemetry/wire"
)

// syncBuf is a bytes.Buffer safe for the progress writer and the test reading it.
type syncBuf struct {
	mu sync.Mutex
	b  bytes.Buffer
	on func(line string)
}

func (s *syncBuf) Write(p []byte) (int, error) {
	s.mu.Lock()
	s.b.Write(p)
	s.mu.Unlock()
	if s.on != nil {
		for _, l := range strings.Split(strings.TrimSpace(string(p)), "\n") {
			s.on(l)
		}
	}
	return len(p), nil
}

func (s *syncBuf) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// boards lets one served board run at a time: each runs several times faster than real
// time and keeps a core busy, and the suite runs on two cores beside timing-sensitive
// tests of other packages.
var boards = make(chan struct{}, 1)

// oneBoard holds the board slot until the test ends.
func oneBoard(t *testing.T) {
	boards <- struct{}{}
	t.Cleanup(func() { <-boards })
}

// serveVirtual runs dev (a virtual board, possibly wrapped) on a pseudo-terminal and
// returns a Link to it that records to capture.cap in dir.
func serveVirtual(t *testing.T, dev wire.Device, dir string) *wire.Link {
	t.Helper()
	oneBoard(t)
	ctx, cancel := context.WithCancel(context.Background())
	ready := make(chan string, 1)
	done := make(chan error, 1)
	link := filepath.Join(dir, "tty")
	go func() {
		done <- wire.Serve(ctx, dev, wire.ServeOptions{Link: link, Ready: func(p string) { ready <- p }, WaitOpen: true})
	}()
	var path string
	select {
	case path = <-ready:
	case err := <-done:
		t.Fatalf("Serve: %v", err)
	case <-time.After(5 * time.Second):
		t.Fatal("Serve not ready")
	}
	l := wire.Dial(wire.SerialConfig{Path: path}, wire.LinkOptions{RecordPath: filepath.Join(dir, "capture.cap"), Poll: 20 * time.Millisecond})
	t.Cleanup(func() {
		l.Close()
		cancel()
		<-done
	})
	return l
}

// benchScenario is the greenhouse bias board at a fixed setpoint: 5 V pin, 47 kΩ + 25 Ω
// pin, 1 µF, 1 MΩ load, 10-bit ADC at 5 V, 1 ms, three-state with a band of 2 counts.
func benchScenario() virtual.Scenario {
	sc := virtual.DefaultScenario()
	sc.Levels = []float64{2.0}
	sc.Deadband = 2
	sc.V0 = 2.0
	return sc
}

// modelTau is the charge time constant of the scenario's circuit: C (R + R_pin) || R_load.
func modelTau(sc virtual.Scenario) float64 {
	r := sc.Circuit.R + sc.Circuit.RPin
	return sc.Circuit.C * r * sc.Circuit.Load / (r + sc.Circuit.Load)
}

func TestTuneVirtualBoard(t *testing.T) {
	t.Parallel()
	sc := benchScenario()
	b, err := virtual.NewBoard(sc)
	if err != nil {
		t.Fatal(err)
	}
	b.Speed = 4
	dir := t.TempDir()
	if d := os.Getenv("TUNE_KEEP"); d != "" {
		dir = d
	}
	l := serveVirtual(t, b, dir)
	var prog syncBuf
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	res, err := Run(ctx, l, Options{Range: Range{0.5, 4.5}, Progress: &prog})
	t.Log(prog.String())
	if err != nil {
		t.Fatalf("Run: %v", err)
	}
	if !res.Restored {
		t.Errorf("not restored: %s", res.RestoreNote)
	}
	want := modelTau(sc)
	for name, v := range map[string]*float64{"charge": res.Plant.TauChargeS, "discharge": res.Plant.TauDischargeS} {
		if v == nil {
			t.Fatalf("tau %s not identified", name)
		}
		if math.Abs(*v/want-1) > 0.02 {
			t.Errorf("tau %s %g s, model %g s: off by more than 2 %%", name, *v, want)
		}
	}
	// The wide-band holds show the droop: the load ratio R_load / R from it.
	wantRatio := sc.Circuit.Load / (sc.Circuit.R + sc.Circuit.RPin)
	if lr := res.Plant.LoadRatio; lr == nil || math.Abs(*lr/wantRatio-1) > 0.05 {
		t.Errorf("load ratio %v, model %.4g (within 5 %%)", lr, wantRatio)
	}
	if res.AppliedDeadband == nil || res.Advice.DeadbandCounts == nil || *res.AppliedDeadband != *res.Advice.DeadbandCounts {
		t.Fatalf("applied deadband %v, advice %v", res.AppliedDeadband, res.Advice.DeadbandCounts)
	}
	if res.PredictedJumps != nil && *res.PredictedJumps == 0 && res.Compare.JumpsAfter != 0 {
		t.Errorf("the model predicts 0 band jumps, verify saw %d", res.Compare.JumpsAfter)
	}
	t.Logf("deadband %d, %s", *res.AppliedDeadband, res.Compare.Line)
	var board float64
	for _, s := range res.Steps {
		board += s.DwellS
	}
	if board > 20 {
		t.Errorf("the run took %g s of board time, want under 20 s", board)
	}
}

// TestTuneSlowPlant: tau near 100 ms (110 kΩ + 25 Ω, 1 µF, 1 MΩ load: 99.1 ms) is tuned
// in under 20 s of board time (run at 16 times real time), tau within 2 %.
func TestTuneSlowPlant(t *testing.T) {
	t.Parallel()
	sc := benchScenario()
	sc.Circuit.R = 110e3
	b, err := virtual.NewBoard(sc)
	if err != nil {
		t.Fatal(err)
	}
	b.Speed = 8
	l := serveVirtual(t, b, t.TempDir())
	res, err := Run(context.Background(), l, Options{Range: Range{0.5, 4.5}})
	if err != nil {
		t.Fatal(err)
	}
	want := modelTau(sc)
	if v := res.Plant.TauChargeS; v == nil || math.Abs(*v/want-1) > 0.02 {
		t.Errorf("tau charge %v, model %g s", v, want)
	}
	board := 0.0
	for _, s := range res.Steps {
		board += s.DwellS
	}
	if board > 20 {
		t.Errorf("%g s of board time, want under 20 s", board)
	}
	t.Logf("tau %g s (model %g s), %.1f s of board time; %s", *res.Plant.TauChargeS, want, board, res.Compare.Line)
}
