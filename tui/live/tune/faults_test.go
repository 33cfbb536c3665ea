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

	"github.com/caploop/caploop/analysis/loop/virtual"
	"github.com/caploop/caploop/telemetry"
)

// ignoringBoard is a virtual board whose firmware reads `info` but ignores every `set`,
// while its info answer still lists them: a board that does not do what it says.
type ignoringBoard struct{ *virtual.Board }

func (b ignoringBoard) Send(line string) {
	if strings.HasPrefix(strings.TrimSpace(line), "set") {
		return
	}
	b.Board.Send(line)
}

func newBoard(t *testing.T, sc virtual.Scenario) *virtual.Board {
	t.Helper()
	b, err := virtual.NewBoard(sc)
	if err != nil {
		t.Fatal(err)
	}
	b.Speed = 4
	return b
}

// captureRecords reads the capture the test Link wrote.
func captureRecords(t *testing.T, path string) []telemetry.Record {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	sc := telemetry.NewScanner(f)
	var out []telemetry.Record
	for sc.Scan() {
		r := telemetry.Record{Kind: sc.Kind()}
		switch r.Kind {
		case telemetry.RecSample:
			r.Sample = sc.Sample()
		case telemetry.RecEvent:
			r.Event = sc.Event()
		case telemetry.RecMeta:
			r.Delta = sc.MetaChange()
		}
		out = append(out, r)
	}
	return out
}

// TestTuneUnplugMidIdentify: the board is unplugged during the identify pass and comes
// back 0.3 s later, rebooted with its own settings: the run resumes (the wide band sent
// again, the dwell started over), finishes, identifies tau within 2 % and restores the
// settings; the capture shows the wide band sent again after the reconnection.
func TestTuneUnplugMidIdentify(t *testing.T) {
	t.Parallel()
	sc := benchScenario()
	// Board time, at 4 times real time: the ask and the before pass end near 0.7 s (the
	// ask's share depends on the host); the identify pass lasts about 0.5 s more (the
	// run fit identifies tau within one cycle), then advise and verify.
	sc.Faults.UnplugAfter = 0.95
	sc.Faults.ReplugAfter = 0.3
	dir := t.TempDir()
	b := newBoard(t, sc)
	b.Speed = 4
	l := serveVirtual(t, b, dir)
	var prog syncBuf
	res, err := Run(context.Background(), l, Options{Range: Range{0.5, 4.5}, Progress: &prog, ReplugWait: 5 * time.Second})
	t.Log(prog.String())
	if err != nil {
		t.Fatalf("Run: %v", err)
	}
	// The unplug is timed for the identify pass; a slow host may shift it into a
	// neighbouring pass, which resumes the same way.
	if res.Resumed != 1 || !strings.Contains(prog.String(), "the board is back: resuming the ") {
		t.Errorf("resumed %d times; want once", res.Resumed)
	}
	if !strings.Contains(prog.String(), "resuming the identify pass") {
		t.Logf("the unplug fell outside the identify pass on this host")
	}
	if !res.Restored || !strings.HasPrefix(res.RestoreNote, "restored: set sp=410") {
		t.Errorf("restored %v: %s", res.Restored, res.RestoreNote)
	}
	want := modelTau(sc)
	if v := res.Plant.TauChargeS; v == nil || math.Abs(*v/want-1) > 0.02 {
		t.Errorf("tau charge %v, model %g s", v, want)
	}
	l.Close()
	recs := captureRecords(t, filepath.Join(dir, "capture.cap"))
	reconnected, again := false, false
	for _, r := range recs {
		if r.Kind == telemetry.RecEvent && strings.HasPrefix(r.Event.Text, "reconnected") {
			reconnected = true
		}
		if reconnected && r.Kind == telemetry.RecEvent && r.Event.Dir == telemetry.ToBoard && strings.HasPrefix(r.Event.Text, "set deadband=") {
			again = true
			break
		}
	}
	if !again {
		t.Errorf("the pass's band was not sent again after the reconnection")
	}
}

// TestTuneUnplugForGood: a board that does not come back within the wait ends the run
// with ErrUnplugged, and tune says it could not restore the settings. The unplug comes
// 1.6 s of board time in, in the verify pass: the whole run takes under 2 s of board
// time since identify needs one cycle, so at 2 s the run had often ended already.
func TestTuneUnplugForGood(t *testing.T) {
	t.Parallel()
	sc := benchScenario()
	sc.Faults.UnplugAfter = 1.6
	sc.Faults.ReplugAfter = 30
	b := newBoard(t, sc)
	l := serveVirtual(t, b, t.TempDir())
	var prog syncBuf
	res, err := Run(context.Background(), l, Options{Range: Range{0.5, 4.5}, Progress: &prog, ReplugWait: 300 * time.Millisecond})
	if !errors.Is(err, ErrUnplugged) {
		t.Fatalf("err %v, want ErrUnplugged\n%s", err, prog.String())
	}
	if !strings.Contains(err.Error(), "did not come back within 300ms") {
		t.Errorf("err %v: it does not say how long it waited", err)
	}
	if res.Restored || !strings.HasPrefix(res.RestoreNote, "could not restore") {
		t.Errorf("restored %v: %s", res.Restored, res.RestoreNote)
	}
}

// TestTuneQuitDuringVerify: q (here, the context) during the verify pass restores the
// settings at once, and the record folder holds what the run reached.
func TestTuneQuitDuringVerify(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	l := serveVirtual(t, newBoard(t, benchScenario()), dir)
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	verify := 0
	prog := syncBuf{on: func(line string) {
		// q on the second step of the verify pass.
		if strings.Contains(line, ": verify, setpoint") {
			if verify++; verify == 2 {
				cancel()
			}
		}
	}}
	res, err := Run(ctx, l, Options{Range: Range{0.5, 4.5}, Progress: &prog})
	if !errors.Is(err, ErrQuit) {
		t.Fatalf("err %v, want ErrQuit\n%s", err, prog.String())
	}
	if !res.Restored {
		t.Errorf("not restored: %s", res.RestoreNote)
	}
	if res.Before == nil || res.Identify == nil || res.Advice == nil || res.AppliedDeadband == nil || res.After == nil {
		t.Fatalf("the result lacks a pass it reached: %+v", res)
	}
	wrote, err := WriteRecord(dir, res, nil, time.Date(2026, 12, 2, 12, 0, 0, 0, time.UTC))
	if err != nil {
		t.Fatal(err)
	}
	if strings.Join(wrote, " ") != "summary.json report.html caploop_tune.h" {
		t.Errorf("wrote %v", wrote)
	}
	h, _ := os.ReadFile(filepath.Join(dir, HeaderFile))
	if !strings.Contains(string(h), "on 2026-12-02") || !strings.Contains(string(h), "not verified on the board") {
		t.Errorf("header:\n%s", h)
	}
}

// TestTuneBoardIgnoresSet: a board that lists set keys but ignores them ends the run with
// the guided mode offered, and nothing is left changed.
func TestTuneBoardIgnoresSet(t *testing.T) {
	t.Parallel()
	l := serveVirtual(t, ignoringBoard{newBoard(t, benchScenario())}, t.TempDir())
	var prog syncBuf
	res, err := Run(context.Background(), l, Options{Range: Range{0.5, 4.5}, Progress: &prog, TakeTimeout: 500 * time.Millisecond})
	if !errors.Is(err, ErrNeedsGuide) || !strings.Contains(err.Error(), "--guided") {
		t.Fatalf("err %v, want ErrNeedsGuide offering --guided", err)
	}
	if !res.Restored {
		t.Errorf("not restored: %s", res.RestoreNote)
	}
}

// TestTuneGuided: the same board in guided mode: the test plays the user, dialling in
// each setpoint tune asks for (here by the board's own set, behind the filter).
func TestTuneGuided(t *testing.T) {
	t.Parallel()
	b := newBoard(t, benchScenario())
	l := serveVirtual(t, ignoringBoard{b}, t.TempDir())
	prog := syncBuf{on: func(line string) {
		if i := strings.Index(line, "(sp="); i >= 0 && strings.HasPrefix(line, "guided: dial in") {
			n := strings.TrimSuffix(strings.Fields(line[i+4:])[0], "")
			b.Send("set sp=" + n)
		}
	}}
	res, err := Run(context.Background(), l, Options{Range: Range{0.5, 4.5}, Progress: &prog, Guided: true, MaxCycles: 2, GuidedWait: 5 * time.Second, TakeTimeout: 300 * time.Millisecond})
	t.Log(prog.String())
	if err != nil && !errors.Is(err, ErrNeedsGuide) {
		t.Fatalf("Run: %v", err)
	}
	if len(res.Steps) < 3 {
		t.Fatalf("guided steps %d", len(res.Steps))
	}
	for _, s := range res.Steps[:3] {
		if s.ArrivedS == nil {
			t.Errorf("step %+v: the dialled setpoint was not reached", s)
		}
	}
}

// TestTuneOutOfRange: a noise burst throws readings far outside the range: the run
// stops on that reading (before any later line is looked at), and the restore line
// leaves the host within 20 ms of receiving it, in real time.
func TestTuneOutOfRange(t *testing.T) {
	t.Parallel()
	sc := benchScenario()
	sc.Faults = virtual.Faults{BurstEvery: 0.6, BurstLen: 0.05, BurstNoise: 400}
	dir := t.TempDir()
	b := newBoard(t, sc)
	b.Speed = 1 // real time: the host's reaction is measured against the board's period
	l := serveVirtual(t, b, dir)
	var prog syncBuf
	res, err := Run(context.Background(), l, Options{Range: Range{0.5, 4.5}, Progress: &prog})
	if !errors.Is(err, ErrOutOfRange) {
		t.Fatalf("err %v, want ErrOutOfRange\n%s", err, prog.String())
	}
	if !res.Restored {
		t.Errorf("not restored: %s", res.RestoreNote)
	}
	l.Close()
	recs := captureRecords(t, filepath.Join(dir, "capture.cap"))
	lo, hi := res.Board.counts(0.5)-float64(res.Plan.MarginCounts), res.Board.counts(4.5)+float64(res.Plan.MarginCounts)
	var outAt int64 = -1
	for _, r := range recs {
		if r.Kind == telemetry.RecSample && outAt < 0 && r.Sample.Flags&telemetry.HasHost != 0 && (r.Sample.PV < lo || r.Sample.PV > hi) {
			outAt = r.Sample.Host
		}
		if outAt >= 0 && r.Kind == telemetry.RecEvent && r.Event.Dir == telemetry.ToBoard && strings.HasPrefix(r.Event.Text, "set sp=410") {
			d := time.Duration(r.Event.Host - outAt)
			t.Logf("restore sent %v after the reading outside the range was received", d)
			if d > 20*time.Millisecond {
				t.Errorf("restore sent %v after the reading outside the range, want within 20 ms", d)
			}
			return
		}
	}
	t.Errorf("no restore line after a reading outside the range")
	_ = math.Abs
}
