//go:build unix

package tune

import (
	"context"
	"errors"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/caploop/caploop/analysis/loop"
	"github.com/caploop/caploop/telemetry/wire"
	"github.com/caploop/caploop/telemetry/wire/firmware"
)

// buildFirmware compiles the reference firmware (testdata/firmware) with the host C
// compiler, or skips: under -short, and without a compiler (a failure when CI=true).
func buildFirmware(t *testing.T) string {
	t.Helper()
	if testing.Short() {
		t.Skip("compiles and runs the C reference firmware with cc; skipped with -short")
	}
	src, err := firmware.FindSource(".")
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	prog, err := firmware.Build(ctx, src, t.TempDir())
	if errors.Is(err, firmware.ErrNoCompiler) {
		if os.Getenv("CI") == "true" {
			t.Fatalf("CI=true and no C compiler: %v", err)
		}
		t.Skipf("no C compiler, tune against the reference firmware not tested: %v", err)
	}
	if err != nil {
		t.Fatal(err)
	}
	return prog
}

// TestTuneReferenceFirmware tunes the reference firmware loop (firmware in the loop, the
// loop model as its plant): 5 V pin, 47 kΩ, 1 µF, 1 MΩ load (tau = C R || R_load =
// 44.9 ms), 10-bit ADC at 5 V, 1 ms, three-state with a band of 2 counts at 2 V, run at
// 8 times real time.
func TestTuneReferenceFirmware(t *testing.T) {
	t.Parallel()
	prog := buildFirmware(t)
	oneBoard(t)
	cfg := loop.Config{
		Circuit:    loop.Circuit{Supply: 5, R: 47e3, C: 1e-6, Load: 1e6},
		ADC:        loop.ADC{Vref: 5, Bits: 10, Noise: 0.5},
		Controller: loop.Controller{Kind: loop.ThreeState, Deadband: 2},
		Period:     1e-3,
		Seed:       7,
		V0:         2.0,
	}
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	rig, err := firmware.Start(ctx, firmware.Options{Program: prog, Plant: cfg, SP: 410, Speed: 4})
	if err != nil {
		t.Fatal(err)
	}
	defer rig.Close()
	dir := t.TempDir()
	l := wire.Dial(wire.SerialConfig{Path: rig.Path()}, wire.LinkOptions{RecordPath: filepath.Join(dir, "capture.cap")})
	defer l.Close()
	var prog2 syncBuf
	res, err := Run(ctx, l, Options{Range: Range{0.5, 4.5}, Progress: &prog2})
	t.Log(prog2.String())
	if err != nil {
		t.Fatalf("Run: %v", err)
	}
	if !strings.Contains(strings.Join(res.Board.Accepts, ","), "sp,mode,deadband,period_us") {
		t.Errorf("accepts %v", res.Board.Accepts)
	}
	want := cfg.Circuit.C * cfg.Circuit.R * cfg.Circuit.Load / (cfg.Circuit.R + cfg.Circuit.Load)
	for name, v := range map[string]*float64{"charge": res.Plant.TauChargeS, "discharge": res.Plant.TauDischargeS} {
		if v == nil {
			t.Fatalf("tau %s not identified", name)
		}
		if math.Abs(*v/want-1) > 0.02 {
			t.Errorf("tau %s %g s, model %g s: off by more than 2 %%", name, *v, want)
		}
	}
	if res.AppliedDeadband == nil || *res.AppliedDeadband != *res.Advice.DeadbandCounts {
		t.Fatalf("applied deadband %v, advice %v", res.AppliedDeadband, res.Advice.DeadbandCounts)
	}
	if res.PredictedJumps != nil && *res.PredictedJumps == 0 && res.Compare.JumpsAfter != 0 {
		t.Errorf("the model predicts 0 band jumps, verify saw %d", res.Compare.JumpsAfter)
	}
	if !res.Restored {
		t.Errorf("not restored: %s", res.RestoreNote)
	}
	board := 0.0
	for _, s := range res.Steps {
		board += s.DwellS
	}
	if board > 20 {
		t.Errorf("%g s of board time, want under 20 s", board)
	}
	t.Logf("deadband %d, %s, %.2f s of board time", *res.AppliedDeadband, res.Compare.Line, board)
}
