package tui

import (
	"fmt"
	"strings"

	tea "github.com/charmbracelet/bubbletea"
)

// SourceStats are the counters of a source the status line shows.
type SourceStats struct {
	Name        string  // source name: port path, file name, "virtual board"
	State       string  // "connected", "unplugged", "reconnecting", "playing", "ended"...
	Samples     int64   // samples analysed
	Rate        float64 // samples per second, recent
	Rejected    int64   // rejected lines
	Gaps        int64   // missing samples seen from t or n
	Dropped     int64   // points not delivered to the display (the analysis has them all)
	Lost        int64   // lines the link could not hand over in time (recorded, not analysed)
	Recording   string  // capture path, "" when not recording
	RecordBytes int64   // capture size so far
	Speed       float64 // replay speed, 0 = as fast as possible
	Position    float64 // replay position, s
}

// StatusModel is the bottom status line.
type StatusModel struct {
	st      SourceStats
	mode    Mode
	replay  bool
	message string
	width   int
}

// NewStatus returns a status line.
func NewStatus(replay bool) StatusModel { return StatusModel{replay: replay} }

// SetWidth sets the line width.
func (m *StatusModel) SetWidth(w int) { m.width = w }

// SetMode sets the screen mode shown first on the line.
func (m *StatusModel) SetMode(mode Mode) { m.mode = mode }

// Update takes source counters.
func (m StatusModel) Update(msg tea.Msg) (StatusModel, tea.Cmd) {
	if msg, ok := msg.(snapshotMsg); ok && msg.stats != nil {
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
	mode := strings.ToUpper(m.mode.String())
	if m.replay && m.mode != ModePaused {
		mode = "REPLAY " + speedText(st.Speed)
	}
	parts := []string{mode, st.Name}
	if st.State != "" {
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
		parts = append(parts, fmt.Sprintf("rec %s %s", st.Recording, fmtBytes(st.RecordBytes)))
	} else if !m.replay {
		if short {
			parts = append(parts, "no rec")
		} else {
			parts = append(parts, "not recording")
		}
	}
	return padRight(strings.Join(parts, " · "), m.width)
}
