package tui

import (
	"fmt"
	"strings"

	tea "github.com/charmbracelet/bubbletea"

	"github.com/caploop/caploop/analysis/figure"
	"github.com/caploop/caploop/tui/live"
)

// StatusModel is the bottom status line.
type StatusModel struct {
	st      live.Stats
	held    bool
	replay  bool
	message string
	width   int
}

// NewStatus returns a status line.
func NewStatus(replay bool) StatusModel { return StatusModel{replay: replay} }

// SetWidth sets the line width.
func (m *StatusModel) SetWidth(w int) { m.width = w }

// SetHeld says whether the screen is held (the first word on the line).
func (m *StatusModel) SetHeld(held bool) { m.held = held }

// Update takes source counters.
func (m StatusModel) Update(msg tea.Msg) (StatusModel, tea.Cmd) {
	if msg, ok := msg.(frameMsg); ok && msg.stats != nil {
		m.st = *msg.stats
	}
	return m, nil
}

func speedText(s float64) string {
	if s <= 0 {
		return "max"
	}
	return fmt.Sprintf("%gx", s)
}

// View renders the line; narrow terminals get the short words.
func (m StatusModel) View() string {
	st := m.st
	short := m.width < 100
	var mode string
	switch {
	case m.held:
		mode = "HELD"
	case m.replay:
		mode = "REPLAY " + speedText(st.Speed)
	default:
		mode = "LIVE"
	}
	parts := []string{mode, st.Name}
	switch {
	case m.replay && st.State == live.StateHeld:
		parts = append(parts, "held at "+formatSeconds(st.Position))
	case m.replay && st.State == live.StateRunning:
		parts = append(parts, "at "+formatSeconds(st.Position))
	case st.State != "":
		parts = append(parts, st.State)
	}
	rej, gaps := "rejected", "gaps"
	if short {
		rej = "rej"
	}
	parts = append(parts, fmtRate(st.Rate), fmt.Sprintf("%s %d", rej, st.Rejected), fmt.Sprintf("%s %d", gaps, st.Gaps))
	if st.Dropped > 0 {
		parts = append(parts, fmt.Sprintf("undrawn %d", st.Dropped))
	}
	if st.Lost > 0 {
		parts = append(parts, fmt.Sprintf("LOST %d", st.Lost))
	}
	if st.Recording != "" {
		parts = append(parts, fmt.Sprintf("rec %s %s", st.Recording, figure.Bytes(st.RecordBytes)))
	} else if !m.replay {
		if short {
			parts = append(parts, "no rec")
		} else {
			parts = append(parts, "not recording")
		}
	}
	return padRight(strings.Join(parts, " · "), m.width)
}
