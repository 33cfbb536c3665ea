package tui

import (
	"fmt"
	"strings"
	"testing"
	"time"

	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/x/ansi"
	"github.com/charmbracelet/x/exp/golden"

	"github.com/caploop/caploop/tui/live"
)

func tea_WindowSize(w, h int) tea.WindowSizeMsg { return tea.WindowSizeMsg{Width: w, Height: h} }

// confirmChange plays the board's answer to "set deadband=4": its meta line, then a
// summary with a new segment at the first setpoint under the new band.
func confirmChange(t testing.TB, m Model) Model {
	t.Helper()
	sum := *fixtureSummary()
	sum.Board.DeadbandCounts = fp(4)
	seg := sum.Segments[0]
	// 5.5 s under the new band without a band jump: the narrow band counts as fixed.
	seg.StartS, seg.EndS, seg.SteadyStartS, seg.SteadySamples = 3, 8.5, fp(3.02), 5480
	seg.DeadbandCounts, seg.BandJumps, seg.DeadbandEntries, seg.DeadbandExits = fp(4), 0, 9, 8
	seg.RipplePPV, seg.RipplePPCounts, seg.RippleRMSV = fp(0.0391), fp(8), fp(0.0102)
	seg.DutyCharge, seg.DutyHold, seg.DutyDischarge = fp(0.04), fp(0.95), fp(0.01)
	seg.SwitchingHz, seg.LimitCyclePeriodS = fp(12.5), fp(0.081)
	sum.Segments = append(sum.Segments, seg)
	before := fixtureSummary().Segments[1]
	snap := live.Snapshot{Events: []live.Event{{T: 2.9, Kind: live.EventDeadband, Text: "deadband 2→4", Value: 4, Segment: &before, SegStartS: before.StartS}}}
	mm, _ := m.Update(samplesMsg{src: m.src, snap: snap})
	mm, _ = mm.(Model).Update(samplesMsg{src: m.src, snap: live.Snapshot{Summary: &sum}})
	return mm.(Model)
}

func press(t testing.TB, m Model, keys ...string) Model {
	t.Helper()
	for _, k := range keys {
		var msg tea.KeyMsg
		switch k {
		case "tab":
			msg = tea.KeyMsg{Type: tea.KeyTab}
		case "enter":
			msg = tea.KeyMsg{Type: tea.KeyEnter}
		case "esc":
			msg = tea.KeyMsg{Type: tea.KeyEsc}
		case "left":
			msg = tea.KeyMsg{Type: tea.KeyLeft}
		case "right":
			msg = tea.KeyMsg{Type: tea.KeyRight}
		case " ":
			msg = tea.KeyMsg{Type: tea.KeySpace, Runes: []rune{' '}}
		case "home":
			msg = tea.KeyMsg{Type: tea.KeyHome}
		case "up":
			msg = tea.KeyMsg{Type: tea.KeyUp}
		case "down":
			msg = tea.KeyMsg{Type: tea.KeyDown}
		case "pgup":
			msg = tea.KeyMsg{Type: tea.KeyPgUp}
		case "pgdown":
			msg = tea.KeyMsg{Type: tea.KeyPgDown}
		case "S-tab":
			msg = tea.KeyMsg{Type: tea.KeyShiftTab}
		default:
			msg = tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune(k)}
		}
		mm, _ := m.Update(msg)
		m = mm.(Model)
	}
	return m
}

// checkGrid fails unless the screen is exactly height lines of exactly width cells.
func checkGrid(t *testing.T, s string, width, height int) {
	t.Helper()
	lines := strings.Split(s, "\n")
	if len(lines) != height {
		t.Errorf("screen has %d lines, want %d", len(lines), height)
	}
	for i, l := range lines {
		if w := ansi.StringWidth(l); w != width {
			t.Errorf("line %d is %d cells wide, want %d: %q", i+1, w, width, l)
		}
	}
}

// TestViews renders every view of the fixture at 80x24 and 120x40 and compares it with
// testdata/TestViews/<size>/<view>.golden (regenerate with go test ./tui -update).
func TestViews(t *testing.T) {
	sizes := [][2]int{{80, 24}, {120, 40}}
	views := []struct {
		name string
		keys []string
	}{
		{"trace", nil},
		{"figures", []string{"2"}},
		{"spread", []string{"3"}},
		{"ripple", []string{"4"}},
		{"step", []string{"5"}},
		{"help", []string{"?"}},
		{"zoomed_back", []string{"+", "+", "left"}},
		{"confirm", []string{"d"}},
		{"note", []string{"<live>", "m", "f", "a", "n"}},
		{"help_live", []string{"<live>", "?"}},
		{"after_change", []string{"d", "y", "<change>", "2"}},
		{"after_change_trace", []string{"d", "y", "<change>"}},
		{"figures_bottom", []string{"2", "pgdown", "pgdown", "pgdown", "pgdown", "pgdown"}},
		{"figures_line_down", []string{"2", "down"}},
	}
	for _, sz := range sizes {
		for _, v := range views {
			t.Run(fmt.Sprintf("%dx%d/%s", sz[0], sz[1], v.name), func(t *testing.T) {
				m := fixtureModel(t, sz[0], sz[1])
				for _, k := range v.keys {
					if k == "<live>" {
						m = liveFixtureSized(t, sz[0], sz[1])
						continue
					}
					if k == "<change>" {
						m = confirmChange(t, m)
						continue
					}
					m = press(t, m, k)
				}
				out := m.View()
				checkGrid(t, out, sz[0], sz[1])
				golden.RequireEqual(t, []byte(out))
			})
		}
	}
}

// replayToEnd replays path at full speed through the real pipeline (scanner, analysis,
// advice) into a screen of the given size and returns it once the file has ended. The
// rate, which depends on the machine, is zeroed for golden comparisons.
func replayToEnd(t *testing.T, path string, width, height int, withAdvice bool) Model {
	t.Helper()
	p, err := live.NewReplay(live.ReplayOptions{Path: path, Speed: 0, Options: live.Options{NoAdvice: !withAdvice}})
	if err != nil {
		t.Fatalf("live.NewReplay: %v", err)
	}
	t.Cleanup(func() { p.Close() })
	m := New(p, Options{Span: 2})
	mm, _ := m.Update(tea_WindowSize(width, height))
	m = mm.(Model)
	deadline := time.Now().Add(30 * time.Second)
	last := time.Time{}
	for !m.ended {
		if time.Now().After(deadline) {
			t.Fatalf("replay of %s did not end in 30 s", path)
		}
		msg := wait(p, last)()
		last = time.Now()
		switch msg := msg.(type) {
		case samplesMsg:
			m.takeFrame(msg.snap)
		case sourceErrMsg:
			t.Fatalf("replay: %v", msg.err)
		case sourceDoneMsg:
			m.ended = true
		}
	}
	m.status.st.Rate = 0
	return m
}

// TestCaptureViews replays a fixed capture (testdata/bench-tuned.cap, a copy of the
// project's tuned.cap: the demo board at deadband 4, then "set deadband=9" and the same
// setpoints again) through the real pipeline and compares every view at 80x24 and
// 120x40 with testdata/TestCaptureViews/... (regenerate with -update after a change of
// the analysis figures). The advice engine is left out here so that its tuning does not
// churn these files; TestViews covers the advice block and TestCaptureAdvice the engine
// on this capture.
func TestCaptureViews(t *testing.T) {
	for _, sz := range [][2]int{{80, 24}, {120, 40}} {
		m := replayToEnd(t, "testdata/bench-tuned.cap", sz[0], sz[1], false)
		if m.change == nil || m.change.To != 9 {
			t.Errorf("%dx%d: no before/after for the capture's deadband change (change %+v)", sz[0], sz[1], m.change)
		}
		for _, v := range []struct {
			name string
			keys []string
		}{
			{"trace", nil}, {"figures", []string{"2"}}, {"spread", []string{"3"}},
			{"ripple", []string{"4"}}, {"step", []string{"5"}}, {"help", []string{"?"}},
			{"figures_bottom", []string{"2", "pgdown", "pgdown", "pgdown", "pgdown", "pgdown", "pgdown", "pgdown", "pgdown"}},
		} {
			t.Run(fmt.Sprintf("%dx%d/%s", sz[0], sz[1], v.name), func(t *testing.T) {
				out := press(t, m, v.keys...).View()
				checkGrid(t, out, sz[0], sz[1])
				golden.RequireEqual(t, []byte(out))
			})
		}
	}
}

// TestCaptureAdvice checks the advice the screen shows at the end of the fixed capture:
// the capture's scenario note says a deadband of 9 makes the demo board settle
// (testdata/README.md, tuned.cap), and the screen must offer it.
func TestCaptureAdvice(t *testing.T) {
	m := replayToEnd(t, "testdata/bench-tuned.cap", 120, 40, true)
	n, ok := m.advice.Suggested()
	if !ok {
		t.Fatalf("no suggested deadband at the end of the capture (advice error %q)", m.advice.err)
	}
	if n != 9 {
		t.Errorf("suggested deadband = %d, want 9", n)
	}
	if out := m.View(); !strings.Contains(out, "advice: deadband 9 counts (in force)") {
		t.Errorf("trace view does not show the advice line; screen:\n%s", out)
	}
}

// TestTrackingViews replays the project's ramp capture (testdata/two-state-ramp.txt, a
// setpoint that moves by a count every sample or two) and checks that the trace and
// figures views show the tracking figures where a segment's would stand, against
// testdata/TestTrackingViews/... (regenerate with -update).
func TestTrackingViews(t *testing.T) {
	const w, h = 120, 40
	m := replayToEnd(t, "../testdata/two-state-ramp.txt", w, h, false)
	for _, v := range []struct {
		name string
		keys []string
		want string
	}{
		{"trace", nil, "tracking"}, {"figures", []string{"2"}, "tracking (moving setpoint)"},
	} {
		t.Run(v.name, func(t *testing.T) {
			out := press(t, m, v.keys...).View()
			checkGrid(t, out, w, h)
			if !strings.Contains(out, v.want) || !strings.Contains(out, "lag") {
				t.Errorf("view lacks %q and the lag:\n%s", v.want, out)
			}
			golden.RequireEqual(t, []byte(out))
		})
	}
}
