package tui

import (
	"fmt"
	"strings"
	"testing"

	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/x/ansi"
	"github.com/charmbracelet/x/exp/golden"
)

func tea_WindowSize(w, h int) tea.WindowSizeMsg { return tea.WindowSizeMsg{Width: w, Height: h} }

// confirmChange plays the board's answer to "set deadband=4": its meta line, then a
// summary with a new segment at the first setpoint under the new band.
func confirmChange(t testing.TB, m Model) Model {
	t.Helper()
	sum := *fixtureSummary()
	sum.Board.DeadbandCounts = fp(4)
	seg := sum.Segments[0]
	seg.StartS, seg.EndS, seg.SteadyStartS, seg.SteadySamples = 3, 4.5, fp(3.02), 1480
	seg.DeadbandCounts, seg.BandJumps, seg.DeadbandEntries, seg.DeadbandExits = fp(4), 0, 9, 8
	seg.RipplePPV, seg.RipplePPCounts, seg.RippleRMSV = fp(0.0391), fp(8), fp(0.0102)
	seg.DutyCharge, seg.DutyHold, seg.DutyDischarge = fp(0.04), fp(0.95), fp(0.01)
	seg.SwitchingHz, seg.LimitCyclePeriodS = fp(12.5), fp(0.081)
	sum.Segments = append(sum.Segments, seg)
	box := mailbox{events: []Event{{T: 2.9, Kind: EventDeadband, Text: "deadband 2→4", Value: 4}}}
	mm, _ := m.Update(samplesMsg{src: m.src, box: box})
	mm, _ = mm.(Model).Update(samplesMsg{src: m.src, box: mailbox{summary: &sum}})
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
		{"note", []string{"m", "f", "a", "n"}},
		{"after_change", []string{"d", "y", "<change>", "2"}},
		{"after_change_trace", []string{"d", "y", "<change>"}},
	}
	for _, sz := range sizes {
		for _, v := range views {
			t.Run(fmt.Sprintf("%dx%d/%s", sz[0], sz[1], v.name), func(t *testing.T) {
				m := fixtureModel(t, sz[0], sz[1])
				for _, k := range v.keys {
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
