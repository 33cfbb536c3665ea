package tune

import (
	"context"
	"errors"
	"fmt"
	"io"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/caploop/caploop/analysis/loop/virtual"
	"github.com/caploop/caploop/telemetry"
)

// TestTuneUnplugAtHandover: the board's own unplug fault 1.3 s of board time in (0.3 s
// off, then a reboot with its own settings) lands, at 4 times real time, between the
// identify pass and the verify pass: while the advice is worked out, its band sent or
// answered. The run waits for the board, reads its settings again, sends the band again
// and verifies under it. A host that shifts the unplug into a neighbouring pass must see
// it resumed the same way.
func TestTuneUnplugAtHandover(t *testing.T) {
	t.Parallel()
	sc := benchScenario()
	sc.Faults.UnplugAfter = 1.3
	sc.Faults.ReplugAfter = 0.3
	dir := t.TempDir()
	l := serveVirtual(t, newBoard(t, sc), dir)
	var prog syncBuf
	res, err := Run(context.Background(), l, Options{Range: Range{0.5, 4.5}, Progress: &prog, ReplugWait: 5 * time.Second})
	t.Log(prog.String())
	if err != nil {
		t.Fatalf("Run: %v", err)
	}
	l.Close()
	checkResumed(t, res, prog.String(), filepath.Join(dir, "capture.cap"))
}

// cableBoard is a virtual board whose cable the test pulls at a moment of its choosing
// (pull): the port goes away as on an unplug, and when it is plugged in again the
// board has lost the settings tune sent (its RAM, as on a reboot).
type cableBoard struct {
	*virtual.Board
	sc virtual.Scenario

	mu  sync.Mutex
	w   io.Writer // the server's writer; a virtual.Plugger
	off bool
}

func (b *cableBoard) Run(ctx context.Context, w io.Writer, realtime bool) error {
	b.mu.Lock()
	b.w = w
	b.mu.Unlock()
	return b.Board.Run(ctx, cableWriter{b}, realtime)
}

// pull unplugs the board and, when back > 0, plugs it in again back later.
func (b *cableBoard) pull(back time.Duration) {
	b.mu.Lock()
	b.off = true
	b.w.(virtual.Plugger).Unplug()
	b.mu.Unlock()
	// The reboot: the firmware's own settings again (the answers go nowhere).
	b.Board.Send(fmt.Sprintf("set deadband=%d mode=%s", b.sc.Deadband, b.sc.Mode))
	if back > 0 {
		time.AfterFunc(back, func() {
			b.mu.Lock()
			defer b.mu.Unlock()
			if err := b.w.(virtual.Plugger).Replug(); err == nil {
				b.off = false
			}
		})
	}
}

type cableWriter struct{ b *cableBoard }

func (c cableWriter) Write(p []byte) (int, error) {
	c.b.mu.Lock()
	defer c.b.mu.Unlock()
	if c.b.off {
		return len(p), nil
	}
	return c.b.w.Write(p)
}

// pullAtAdvice serves a cable board and returns a progress writer that pulls its cable
// (for back, 0 = for good) as the advice is printed: the advised band's set line is sent
// after the port has gone.
func pullAtAdvice(t *testing.T, back time.Duration) (*cableBoard, *syncBuf, string) {
	sc := benchScenario()
	b := &cableBoard{Board: newBoard(t, sc), sc: sc}
	pulled := false
	prog := &syncBuf{on: func(line string) {
		if !pulled && strings.HasPrefix(line, "advise: deadband ") {
			pulled = true
			b.pull(back)
		}
	}}
	return b, prog, t.TempDir()
}

// TestTuneUnplugBeforeVerifySend: the cable is pulled just before the advised band is
// sent and plugged in again 0.1 s later; the run resumes the verify pass.
func TestTuneUnplugBeforeVerifySend(t *testing.T) {
	t.Parallel()
	b, prog, dir := pullAtAdvice(t, 100*time.Millisecond)
	l := serveVirtual(t, b, dir)
	res, err := Run(context.Background(), l, Options{Range: Range{0.5, 4.5}, Progress: prog, ReplugWait: 5 * time.Second})
	t.Log(prog.String())
	if err != nil {
		t.Fatalf("Run: %v", err)
	}
	if !strings.Contains(prog.String(), "resuming the verify pass") {
		t.Errorf("the verify pass was not resumed")
	}
	l.Close()
	checkResumed(t, res, prog.String(), filepath.Join(dir, "capture.cap"))
}

// TestTuneUnplugBeforeVerifyForGood: the cable is pulled just before the advised band
// is sent and never plugged in again: the run ends with ErrUnplugged saying how long it
// waited, and the restore line is reported as not sent.
func TestTuneUnplugBeforeVerifyForGood(t *testing.T) {
	t.Parallel()
	b, prog, dir := pullAtAdvice(t, 0)
	l := serveVirtual(t, b, dir)
	t0 := time.Now()
	res, err := Run(context.Background(), l, Options{Range: Range{0.5, 4.5}, Progress: prog, ReplugWait: 300 * time.Millisecond})
	t.Log(prog.String())
	if !errors.Is(err, ErrUnplugged) || !strings.Contains(err.Error(), "did not come back within 300ms") {
		t.Fatalf("err %v, want ErrUnplugged: it did not come back within 300ms", err)
	}
	if d := time.Since(t0); d > 20*time.Second {
		t.Errorf("the run took %v", d)
	}
	if res.Restored || !strings.HasPrefix(res.RestoreNote, "could not restore") || !strings.Contains(res.RestoreNote, res.Plan.Restore) {
		t.Errorf("restored %v: %s", res.Restored, res.RestoreNote)
	}
	if res.After != nil || res.Compare != nil {
		t.Errorf("a verify pass is reported without the board")
	}
}

// TestTuneUnplugBeforeVerifyRestoreLater: the board comes back after the resume wait
// (1 s) but within the restore wait after it: the run ends with ErrUnplugged, and the
// board's settings are restored on the new connection.
func TestTuneUnplugBeforeVerifyRestoreLater(t *testing.T) {
	t.Parallel()
	b, prog, dir := pullAtAdvice(t, 1500*time.Millisecond)
	l := serveVirtual(t, b, dir)
	res, err := Run(context.Background(), l, Options{Range: Range{0.5, 4.5}, Progress: prog, ReplugWait: time.Second})
	t.Log(prog.String())
	if !errors.Is(err, ErrUnplugged) || !strings.Contains(err.Error(), "did not come back within 1s") {
		t.Fatalf("err %v, want ErrUnplugged: it did not come back within 1s", err)
	}
	if !res.Restored || res.RestoreNote != "restored: "+res.Plan.Restore {
		t.Errorf("restored %v: %s", res.Restored, res.RestoreNote)
	}
}

// checkResumed checks a run that resumed once after a re-plug: restored, verified, and
// in the capture: after the reconnection tune asked the board for its settings (info),
// sent the resumed pass's band and saw it answered before the next setpoint; every
// reading of the verify pass outside the break ran under the applied band.
func checkResumed(t *testing.T, res *Result, prog, capture string) {
	t.Helper()
	if res.Resumed != 1 {
		t.Errorf("resumed %d times; want once", res.Resumed)
	}
	if !res.Restored || res.RestoreNote != "restored: "+res.Plan.Restore {
		t.Errorf("restored %v: %s", res.Restored, res.RestoreNote)
	}
	if res.AppliedDeadband == nil || res.After == nil || res.Compare == nil {
		t.Fatalf("no verify pass: applied %v, after %v", res.AppliedDeadband, res.After != nil)
	}
	applied := float64(*res.AppliedDeadband)
	band := applied
	if !strings.Contains(prog, "resuming the verify pass") {
		band = float64(*res.Plan.WideBandCounts)
	}
	recs := captureRecords(t, capture)
	last := -1
	for i, r := range recs {
		if r.Kind == telemetry.RecEvent && strings.HasPrefix(r.Event.Text, "reconnected") {
			last = i
		}
	}
	if last < 0 {
		t.Fatal("no reconnection in the capture")
	}
	// After the reconnection: info, the pass's band, its answer, then a setpoint.
	const (
		wantInfo = iota
		wantSet
		wantAnswer
		done
	)
	state := wantInfo
	for _, r := range recs[last:] {
		toBoard := r.Kind == telemetry.RecEvent && r.Event.Dir == telemetry.ToBoard
		switch {
		case state == wantInfo && toBoard && r.Event.Text == "info":
			state = wantSet
		case state == wantSet && toBoard && strings.HasPrefix(r.Event.Text, fmt.Sprintf("set deadband=%g", band)):
			state = wantAnswer
		case state == wantAnswer && r.Kind == telemetry.RecMeta && r.Delta.Has(telemetry.FieldDeadband) && r.Delta.Deadband == band:
			state = done
		case state < done && toBoard && strings.HasPrefix(r.Event.Text, "set sp="):
			t.Fatalf("a setpoint was sent after the reconnection before info, the band %g and its answer (state %d)", band, state)
		}
	}
	if state != done {
		t.Fatalf("after the reconnection: info, set deadband=%g and its answer not all seen (state %d)", band, state)
	}
	// The verify pass: from its start to the restore line, every reading outside the
	// break (the unplug to the answer showing the applied band) ran under that band.
	in, broken, under, other := false, false, 0, 0
	cur := -1.0
	for _, r := range recs {
		switch r.Kind {
		case telemetry.RecEvent:
			switch {
			case r.Event.Text == "tune: verify pass":
				in = true
			case in && r.Event.Dir == telemetry.ToBoard && r.Event.Text == res.Plan.Restore:
				in = false
			case strings.HasPrefix(r.Event.Text, "unplugged"):
				broken = true
			}
		case telemetry.RecMeta:
			if r.Delta.Has(telemetry.FieldDeadband) {
				cur = r.Delta.Deadband
				if cur == applied {
					broken = false
				}
			}
		case telemetry.RecSample:
			if in && !broken {
				if cur == applied {
					under++
				} else {
					other++
				}
			}
		}
	}
	if other > 0 || under < 120 {
		t.Errorf("verify pass: %d readings under the applied band %g, %d under another", under, applied, other)
	}
}

// TestTuneUnplugMidVerify: the cable is pulled as the second step of the verify pass
// starts and plugged in again 0.1 s later, the band lost: the verify pass resumes under
// the applied band, and it saw no reading of the break (its summary shows no change of
// the band: neither the board's own band after the reboot nor the applied one again).
func TestTuneUnplugMidVerify(t *testing.T) {
	t.Parallel()
	sc := benchScenario()
	b := &cableBoard{Board: newBoard(t, sc), sc: sc}
	verify := 0
	prog := &syncBuf{on: func(line string) {
		if strings.Contains(line, ": verify, setpoint") {
			if verify++; verify == 2 {
				b.pull(100 * time.Millisecond)
			}
		}
	}}
	dir := t.TempDir()
	l := serveVirtual(t, b, dir)
	res, err := Run(context.Background(), l, Options{Range: Range{0.5, 4.5}, Progress: prog, ReplugWait: 5 * time.Second})
	t.Log(prog.String())
	if err != nil {
		t.Fatalf("Run: %v", err)
	}
	if !strings.Contains(prog.String(), "resuming the verify pass") {
		t.Errorf("the verify pass was not resumed")
	}
	l.Close()
	checkResumed(t, res, prog.String(), filepath.Join(dir, "capture.cap"))
	for _, e := range res.After.Events {
		if strings.Contains(e.Text, "deadband=") {
			t.Errorf("the verify pass saw the band change: %s %s", e.Kind, e.Text)
		}
	}
}
