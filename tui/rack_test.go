package tui

import (
	"strings"
	"testing"
	"time"

	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/x/ansi"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/tui/live"
)

// rackFixture is a rack of three idle pipelines on a clock the test moves.
func rackFixture(t *testing.T) (Rack, []*live.Pipeline, *time.Time) {
	t.Helper()
	var srcs []*live.Pipeline
	for _, n := range []string{"/dev/ttyACM0", "/dev/ttyACM1", "/dev/ttyACM2"} {
		p := live.NewIdle(n, live.IdleOptions{Send: func(string) error { return nil }})
		t.Cleanup(func() { p.Close() })
		srcs = append(srcs, p)
	}
	clock := time.Date(2026, 12, 2, 12, 0, 0, 0, time.UTC)
	r := NewRack(srcs, RackOptions{
		Gates: "max-ripple 20mV",
		Verdict: func(s *analysis.Summary) Verdict {
			// Every segment, as the summary's gates judge them.
			judged := false
			for _, seg := range s.Segments {
				if seg.RipplePPV == nil {
					continue
				}
				if *seg.RipplePPV > 0.020 {
					return Verdict{State: VerdictFail, Short: "FAIL ripple", Detail: "ripple over 20 mV"}
				}
				judged = true
			}
			if !judged {
				return Verdict{Short: "waiting"}
			}
			return Verdict{State: VerdictPass, Short: "pass"}
		},
	})
	r.now = func() time.Time { return clock }
	m, _ := r.Update(tea.WindowSizeMsg{Width: 130, Height: 20})
	return m.(Rack), srcs, &clock
}

// feed hands board i a snapshot with points at times ts, a summary and a link state.
func feed(r Rack, srcs []*live.Pipeline, i int, state string, ripple float64, ts ...float64) Rack {
	snap := live.Snapshot{Stats: &live.Stats{Name: srcs[i].Name(), State: state}}
	for _, x := range ts {
		snap.Points = append(snap.Points, live.Point{T: x, SP: 1.2, PV: float32(1.2 + 0.01*x), DB: 0.02})
	}
	if ripple > 0 {
		snap.Summary = &analysis.Summary{
			SamplePeriodS: fp(1e-3),
			Board:         analysis.Board{ADCBits: func() *int { b := 10; return &b }(), DeadbandCounts: fp(4)},
			Plant:         analysis.Plant{TauChargeS: fp(0.047)},
			Segments: []analysis.Segment{{SetpointV: fp(1.2), SteadySamples: 100, RipplePPV: fp(ripple),
				DutyCharge: fp(0.25), LimitCyclePeriodS: fp(0.0104), BandJumps: 7}},
		}
	}
	m, _ := r.Update(rackMsg{board: i, msg: samplesMsg{src: srcs[i], snap: snap}})
	return m.(Rack)
}

func rowOf(t *testing.T, view, port string) string {
	t.Helper()
	for _, ln := range strings.Split(view, "\n") {
		if strings.Contains(ln, port+" ") {
			return ln
		}
	}
	t.Fatalf("no row for %s in\n%s", port, view)
	return ""
}

func TestRackRows(t *testing.T) {
	r, srcs, clock := rackFixture(t)
	r = feed(r, srcs, 0, "connected", 0.031, 0, 0.5, 1)
	r = feed(r, srcs, 1, "connected", 0.012, 0, 0.5, 1)
	r = feed(r, srcs, 2, "connected", 0)
	*clock = clock.Add(time.Second)
	r = feed(r, srcs, 1, "UNPLUGGED, waiting for the board", 0)
	*clock = clock.Add(1500 * time.Millisecond) // board 3: connected 2.5 s ago, no sample
	r = feed(r, srcs, 0, "connected", 0, 1.5, 2)
	v := r.View()

	row := rowOf(t, v, "/dev/ttyACM0")
	for _, want := range []string{"db 4 10b 1ms", " live ", "1.2V", "31mV", "25%", "10.4ms", " 7 ", "47ms", "FAIL ripple"} {
		if !strings.Contains(row, want) {
			t.Errorf("board 1 row lacks %q:\n%s", want, row)
		}
	}
	if row := rowOf(t, v, "/dev/ttyACM1"); !strings.Contains(row, "unplugged") || !strings.Contains(row, "pass") {
		t.Errorf("board 2 row: %s", row)
	}
	if row := rowOf(t, v, "/dev/ttyACM2"); !strings.Contains(row, "silent") {
		t.Errorf("board 3 row: %s", row)
	}
	if !strings.Contains(v, "3 boards · 1 failing") {
		t.Errorf("header:\n%s", v)
	}
	vs := r.Verdicts()
	if vs[0].State != VerdictFail || vs[1].State != VerdictPass || vs[2].State != VerdictNone {
		t.Errorf("verdicts %+v", vs)
	}
	// A new summary judges again: board 1 back under the gate.
	r = feed(r, srcs, 0, "connected", 0.015, 2.5)
	if r.Verdicts()[0].State != VerdictPass {
		t.Errorf("board 1 verdict after a passing summary: %+v", r.Verdicts()[0])
	}
}

func TestRackFocus(t *testing.T) {
	r, srcs, _ := rackFixture(t)
	r = feed(r, srcs, 1, "connected", 0.012, 0, 0.5)
	key := func(k tea.KeyMsg) tea.Cmd {
		m, cmd := r.Update(k)
		r = m.(Rack)
		return cmd
	}
	key(tea.KeyMsg{Type: tea.KeyDown})
	key(tea.KeyMsg{Type: tea.KeyEnter})
	if r.Focused() != 1 {
		t.Fatalf("focused %d after down, enter; want 1", r.Focused())
	}
	v := r.View()
	if !strings.HasPrefix(v, "rack · board 2 of 3 · /dev/ttyACM1") || !strings.Contains(v, "LIVE · /dev/ttyACM1") {
		t.Errorf("board screen:\n%s", v)
	}
	if n := strings.Count(v, "\n") + 1; n != 20 {
		t.Errorf("board screen has %d lines, want the terminal's 20", n)
	}
	// Data for another board while one is open still reaches that board's row.
	r = feed(r, srcs, 2, "connected", 0.05, 0, 0.5)
	if r.Verdicts()[2].State != VerdictFail {
		t.Errorf("board 3 not judged while board 2 was open")
	}
	key(tea.KeyMsg{Type: tea.KeyEsc})
	if r.Focused() != -1 {
		t.Fatalf("esc did not return to the rack")
	}
	// q quits from the table, and from an open board (its own quit command comes back
	// tagged with the board and ends the program).
	if cmd := key(tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune("q")}); cmd == nil {
		t.Errorf("q gave no command")
	} else if _, ok := cmd().(tea.QuitMsg); !ok {
		t.Errorf("q did not quit")
	}
	key(tea.KeyMsg{Type: tea.KeyEnter})
	cmd := key(tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune("q")})
	if cmd == nil {
		t.Fatal("q on an open board gave no command")
	}
	msg := cmd()
	m, cmd := r.Update(msg)
	r = m.(Rack)
	if cmd == nil {
		t.Fatalf("the board's quit (%T) was not turned into the program's", msg)
	}
	if _, ok := cmd().(tea.QuitMsg); !ok {
		t.Errorf("the board's quit did not end the program")
	}
}

// A board's batch of commands comes back to the same board, command by command.
func TestRackTagsBatches(t *testing.T) {
	r, _, _ := rackFixture(t)
	inner := func() tea.Msg { return confirmTimeoutMsg{id: 7} }
	other := func() tea.Msg { return confirmTimeoutMsg{id: 8} }
	_, cmd := r.Update(rackMsg{board: 2, msg: tea.BatchMsg{inner, other}})
	if cmd == nil {
		t.Fatal("no command for the batch")
	}
	b, ok := cmd().(tea.BatchMsg)
	if !ok || len(b) != 2 {
		t.Fatalf("batch came back as %T", cmd())
	}
	got, ok := b[0]().(rackMsg)
	if !ok || got.board != 2 {
		t.Fatalf("batched command's message %+v, want tagged with board 2", got)
	}
	if c, ok := got.msg.(confirmTimeoutMsg); !ok || c.id != 7 {
		t.Errorf("inner message %+v", got.msg)
	}
}

func TestSparkline(t *testing.T) {
	ring := NewRing(1000)
	for i := 0; i <= 600; i++ {
		pv := float32(1)
		if i >= 300 {
			pv = 2
		}
		ring.Push(live.Point{T: float64(i) / 100, PV: pv})
	}
	got := sparkline(ring, 12)
	if want := "▁▁▁▁▁▁██████"; got != want {
		t.Errorf("sparkline = %q, want %q", got, want)
	}
	if got := sparkline(NewRing(10), 5); got != "     " {
		t.Errorf("empty sparkline = %q", got)
	}
}

// On 80 columns the table drops the least needed columns and keeps port, state and
// verdict.
func TestRackNarrow(t *testing.T) {
	r, srcs, _ := rackFixture(t)
	m, _ := r.Update(tea.WindowSizeMsg{Width: 80, Height: 20})
	r = m.(Rack)
	r = feed(r, srcs, 0, "connected", 0.031, 0, 0.5, 1)
	v := r.View()
	t.Logf("80 columns:\n%s", v)
	row := rowOf(t, v, "/dev/ttyACM0")
	for _, want := range []string{"live", "31mV", "FAIL ripple"} {
		if !strings.Contains(row, want) {
			t.Errorf("80-column row lacks %q:\n%s", want, v)
		}
	}
	for i, ln := range strings.Split(v, "\n") {
		if w := ansi.StringWidth(ln); w != 80 {
			t.Errorf("line %d is %d cells wide, want 80: %q", i+1, w, ln)
		}
	}
}

// After a deadband change confirmed on the screen, the verdict judges what ran under
// the new band only.
func TestRackVerdictSinceChange(t *testing.T) {
	r, srcs, _ := rackFixture(t)
	r = feed(r, srcs, 0, "connected", 0.031, 0, 0.5, 1)
	if r.Verdicts()[0].State != VerdictFail {
		t.Fatalf("before the change: %+v", r.Verdicts()[0])
	}
	ev := live.Event{T: 1.2, Kind: live.EventDeadband, Value: 9, Text: "deadband 4→9", SegStartS: 0}
	sum := &analysis.Summary{Segments: []analysis.Segment{
		{StartS: 0, SetpointV: fp(1.2), SteadySamples: 100, RipplePPV: fp(0.031)},
		{StartS: 1.2, SetpointV: fp(1.2), SteadySamples: 100, RipplePPV: fp(0.012)},
	}}
	m, _ := r.Update(rackMsg{board: 0, msg: samplesMsg{src: srcs[0], snap: live.Snapshot{
		Events: []live.Event{ev}, Summary: sum, Points: []live.Point{{T: 1.5, PV: 1.2}}}}})
	r = m.(Rack)
	v := r.Verdicts()[0]
	if v.State != VerdictPass {
		t.Errorf("after the change to 9 with a 12 mV segment: %+v", v)
	}
}
