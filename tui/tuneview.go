package tui

import (
	"errors"
	"regexp"
	"strings"

	"github.com/charmbracelet/bubbles/key"
	tea "github.com/charmbracelet/bubbletea"

	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/tui/live"
	"github.com/caploop/caploop/tui/live/tune"
)

// The tune view: `t` runs the sequencer of package tune over the screen's own link (the
// same run as `caploop tune`, without a record folder) and shows its plan to confirm,
// its progress (step k of n) and, at the end, the before/after line. q during a run
// stops it; the board's settings are restored before the screen ends.

// tuneView is the state of the tune view.
type tuneView struct {
	run        *live.TuneRun
	shown      bool     // the tune view replaces the body
	plan       string   // the plan waiting for y/n; "" = none
	lines      []string // progress lines, oldest first
	step       string   // "step k of n: ..." of the newest step
	verdict    string   // "before -> after: ..." once the run is done
	end        string   // how the run ended
	quitting   bool     // q was pressed: quit once the settings are restored
	confirming bool
}

// tuneMsg carries one update of a run to the screen.
type tuneMsg struct {
	run *live.TuneRun
	u   live.TuneUpdate
	ok  bool
}

// maxTuneLines bounds the progress lines kept.
const maxTuneLines = 200

var stepLine = regexp.MustCompile(`^step \d+ of \d+`)

func waitTune(r *live.TuneRun) tea.Cmd {
	return func() tea.Msg {
		u, ok := <-r.Updates()
		return tuneMsg{run: r, u: u, ok: ok}
	}
}

// startTune handles the tune key: it starts a run, or shows and hides the view of one.
func (m Model) startTune() (tea.Model, tea.Cmd) {
	if m.tv.run != nil && m.tv.end == "" {
		m.tv.shown = !m.tv.shown
		return m, nil
	}
	r, err := m.src.StartTune(m.opts.Tune)
	if err != nil {
		m.message = "cannot tune: " + err.Error()
		return m, nil
	}
	m.tv = tuneView{run: r, shown: true}
	m.message = "tune: asking the board for its settings (info)…"
	return m, waitTune(r)
}

// tuneUpdate applies one update of the run.
func (m Model) tuneUpdate(msg tuneMsg) (tea.Model, tea.Cmd) {
	if msg.run != m.tv.run || !msg.ok {
		return m, nil
	}
	u := msg.u
	switch {
	case u.Plan != "":
		m.tv.plan = u.Plan
		m.tv.confirming = true
		m.tv.shown = true
		m.keys.SetConfirming(true)
		m.message = "tune: send these settings to the board? y/n"
	case u.Progress != "":
		m.tv.lines = append(m.tv.lines, u.Progress)
		if n := len(m.tv.lines); n > maxTuneLines {
			m.tv.lines = m.tv.lines[n-maxTuneLines:]
		}
		if stepLine.MatchString(u.Progress) {
			m.tv.step = u.Progress
		}
		m.message = "tune: " + u.Progress
	case u.Done:
		m.tv.end = tuneEnd(u.Result, u.Err)
		if u.Result != nil && u.Result.Compare != nil {
			m.tv.verdict = "before -> after: " + u.Result.Compare.Line
			m.message = m.tv.verdict
		} else {
			m.message = "tune: " + m.tv.end
		}
		if m.tv.confirming {
			m.tv.confirming = false
			m.keys.SetConfirming(m.confirm != 0)
		}
		if m.tv.quitting {
			return m, tea.Quit
		}
		return m, nil
	}
	return m, waitTune(m.tv.run)
}

// tuneEnd says how a run ended, in one line.
func tuneEnd(res *tune.Result, err error) string {
	var parts []string
	switch {
	case err == nil:
		parts = append(parts, "done")
	case errors.Is(err, tune.ErrQuit):
		parts = append(parts, "stopped")
	case errors.Is(err, tune.ErrDeclined):
		parts = append(parts, "plan not confirmed; nothing sent")
	default:
		parts = append(parts, "ended: "+telemetry.Sanitize([]byte(err.Error())))
	}
	if res != nil && res.RestoreNote != "" && res.Plan != nil {
		parts = append(parts, res.RestoreNote)
	}
	if res != nil && res.GatesFailed {
		parts = append(parts, "the verified loop does not meet the gates")
	}
	return strings.Join(parts, "; ")
}

// tuneKey handles a key while a run is under way; handled is false for keys the
// screen's own handling takes.
func (m Model) tuneKey(msg tea.KeyMsg) (_ tea.Model, _ tea.Cmd, handled bool) {
	if m.tv.run == nil || m.tv.end != "" {
		return m, nil, false
	}
	if m.tv.confirming {
		switch {
		case key.Matches(msg, m.keys.Confirm):
			m.tv.run.Answer(true)
			m.message = "tune: going on; q stops the run and restores the board's settings"
		case key.Matches(msg, m.keys.Quit):
			m.tv.run.Stop()
			m.tv.quitting = true
			m.message = "tune: stopping…"
		default:
			m.tv.run.Answer(false)
			m.message = "tune: not sent"
		}
		m.tv.confirming = false
		m.tv.plan = ""
		m.keys.SetConfirming(m.confirm != 0)
		return m, nil, true
	}
	if key.Matches(msg, m.keys.Apply) {
		m.message = "tune is setting the deadband; wait for its end"
		return m, nil, true
	}
	if key.Matches(msg, m.keys.Quit) {
		if m.tv.quitting {
			return m, tea.Quit, true // a second q: Close still waits for the restore
		}
		m.tv.run.Stop()
		m.tv.quitting = true
		m.tv.shown = true
		m.message = "tune: stopping and restoring the board's settings…"
		return m, nil, true
	}
	return m, nil, false
}

// tuneBody draws the tune view in the body's place.
func (m Model) tuneBody(w, h int) string {
	head := "tune"
	if m.tv.step != "" {
		head += "  " + m.tv.step
	}
	out := []string{head}
	var tail []string
	if m.tv.verdict != "" {
		tail = append(tail, m.tv.verdict)
	}
	if m.tv.end != "" {
		tail = append(tail, "tune "+m.tv.end+" (t runs it again)")
	}
	room := h - len(out) - len(tail)
	var mid []string
	if m.tv.plan != "" {
		mid = strings.Split(strings.TrimRight(m.tv.plan, "\n"), "\n")
		mid = append(mid, "send these settings? y/n")
		if len(mid) > room && room > 0 {
			mid = mid[len(mid)-room:]
		}
	} else {
		mid = m.tv.lines
		if len(mid) > room && room > 0 {
			mid = mid[len(mid)-room:]
		}
	}
	out = append(out, mid...)
	out = append(out, tail...)
	for i, l := range out {
		out[i] = cut(l, max(w, 2))
	}
	return fitBlock(strings.Join(out, "\n"), w, h)
}

// tuneStatus is a short word for the header while a run is under way.
func (m Model) tuneStatus() string {
	switch {
	case m.tv.run == nil:
		return ""
	case m.tv.end != "":
		return "tuned"
	case m.tv.quitting:
		return "tune stopping"
	default:
		return "tuning"
	}
}
