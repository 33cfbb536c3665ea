package tui

import (
	"fmt"
	"strings"
	"time"

	"github.com/charmbracelet/bubbles/key"
	tea "github.com/charmbracelet/bubbletea"

	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/tui/live"
)

func (m Model) key(msg tea.KeyMsg) (tea.Model, tea.Cmd) {
	// Keys typed quickly (or sent by a script) arrive as one message with several runes:
	// outside the note prompt, take them one at a time.
	if msg.Type == tea.KeyRunes && len(msg.Runes) > 1 && !msg.Paste && !m.noting {
		var cmds []tea.Cmd
		var mm tea.Model = m
		for _, r := range msg.Runes {
			var cmd tea.Cmd
			mm, cmd = mm.(Model).key(tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune{r}})
			cmds = append(cmds, cmd)
		}
		return mm, tea.Batch(cmds...)
	}
	if m.noting {
		switch msg.Type {
		case tea.KeyEnter:
			m.noting = false
			note := telemetry.Sanitize([]byte(strings.TrimSpace(string(m.note))))
			if note == "" {
				note = "mark"
			}
			m.note = nil
			t := m.plot.Latest()
			m.plot, _ = m.plot.Update(pointsMsg{marks: []Mark{{T: t, Label: cut(note, 20)}}})
			m.message = "marked " + formatSeconds(t) + ": " + note
			src := m.src
			return m, func() tea.Msg {
				if err := src.Mark(note); err != nil {
					return sentMsg{cmd: "mark", err: err}
				}
				return nil
			}
		case tea.KeyEsc:
			m.noting = false
			m.note = nil
			return m, nil
		case tea.KeyCtrlC:
			return m, tea.Quit
		case tea.KeyBackspace:
			if len(m.note) > 0 {
				m.note = m.note[:len(m.note)-1]
			}
		case tea.KeyRunes, tea.KeySpace:
			if len(m.note)+len(msg.Runes) <= 60 {
				m.note = append(m.note, msg.Runes...)
			}
		}
		return m, nil
	}
	if m.tenth {
		m.tenth = false
		if r := msg.Runes; msg.Type == tea.KeyRunes && len(r) == 1 && r[0] >= '0' && r[0] <= '9' {
			m.src.SeekFraction(float64(r[0]-'0') / 10)
			m.plot.Follow()
		} else {
			m.message = "no jump"
		}
		return m, nil
	}
	if mm, cmd, ok := m.tuneKey(msg); ok {
		return mm, cmd
	}
	if m.confirm != 0 {
		switch {
		case key.Matches(msg, m.keys.Confirm):
			return m.sendDeadband()
		case key.Matches(msg, m.keys.Quit) && msg.String() == "ctrl+c":
			return m, tea.Quit
		default:
			m.confirm = 0
			m.keys.SetConfirming(false)
			m.message = "not sent"
			return m, nil
		}
	}
	k := m.keys
	switch {
	case key.Matches(msg, k.Quit):
		return m, tea.Quit
	case key.Matches(msg, k.Help):
		m.full = !m.full
	case key.Matches(msg, k.Pause):
		m.togglePause()
	case key.Matches(msg, k.ZoomIn):
		m.plot.Zoom(0.5)
	case key.Matches(msg, k.ZoomOut):
		m.plot.Zoom(2)
	case key.Matches(msg, k.Back):
		m.plot.Scroll(-0.25, m.held)
	case key.Matches(msg, k.Forward):
		m.plot.Scroll(0.25, m.held)
	case key.Matches(msg, k.Latest):
		m.plot.Follow()
	case key.Matches(msg, k.NextView):
		m.view = (m.view + 1) % numViews
		m.layout()
	case key.Matches(msg, k.PrevView):
		m.view = (m.view + numViews - 1) % numViews
		m.layout()
	case key.Matches(msg, k.PickView):
		m.view = View(msg.Runes[0] - '1')
		m.layout()
	case key.Matches(msg, k.LineUp):
		m.scroll(-1)
	case key.Matches(msg, k.LineDown):
		m.scroll(1)
	case key.Matches(msg, k.PageUp):
		m.scroll(-(m.height - 5))
	case key.Matches(msg, k.PageDown):
		m.scroll(m.height - 5)
	case key.Matches(msg, k.Apply):
		n, ok := m.advice.Suggested()
		if !ok {
			m.message = "no suggested deadband yet"
			return m, nil
		}
		if m.pending != nil {
			m.message = "still waiting for the board to confirm the last change"
			return m, nil
		}
		m.confirm = n
		m.keys.SetConfirming(true)
		m.message = fmt.Sprintf("send \"set deadband=%d\" to the board? y/n", n)
	case key.Matches(msg, k.Tune):
		return m.startTune()
	case key.Matches(msg, k.Mark):
		m.noting = true
		m.note = nil
		return m, nil
	case key.Matches(msg, k.Faster):
		m.setSpeed(+1)
	case key.Matches(msg, k.Slower):
		m.setSpeed(-1)
	case key.Matches(msg, k.Advance):
		m.src.Step(m.plot.Span() / 10)
	case key.Matches(msg, k.Tenth):
		m.tenth = true
		m.message = "jump to which tenth of the capture? 0-9"
	case key.Matches(msg, k.Rewind):
		m.src.SeekFraction(0)
		m.plot.Follow()
	default:
		for _, j := range []struct {
			b    key.Binding
			l    live.Landmark
			next bool
		}{
			{k.NextSP, live.LandmarkStep, true}, {k.PrevSP, live.LandmarkStep, false},
			{k.NextSegment, live.LandmarkSegment, true}, {k.PrevSegment, live.LandmarkSegment, false},
			{k.NextMark, live.LandmarkMark, true}, {k.PrevMark, live.LandmarkMark, false},
			{k.NextEvent, live.LandmarkEvent, true}, {k.PrevEvent, live.LandmarkEvent, false},
		} {
			if key.Matches(msg, j.b) {
				if j.next {
					m.src.Next(j.l)
				} else {
					m.src.Prev(j.l)
				}
				m.plot.Follow()
				break
			}
		}
	}
	return m, nil
}

func (m Model) sendDeadband() (tea.Model, tea.Cmd) {
	n := m.confirm
	m.confirm = 0
	m.keys.SetConfirming(false)
	m.nextID++
	m.pending = &pendingChange{id: m.nextID, to: n}
	cmd := fmt.Sprintf("set deadband=%d", n)
	m.message = "sent \"" + cmd + "\", waiting for the board…"
	src, id, timeout := m.src, m.nextID, m.opts.Timeout
	return m, tea.Batch(
		func() tea.Msg { return sentMsg{cmd: cmd, err: src.Send(cmd)} },
		tea.Tick(timeout, func(time.Time) tea.Msg { return confirmTimeoutMsg{id: id} }),
	)
}

func (m *Model) togglePause() {
	if m.held {
		if m.src.Replay() {
			m.src.Run()
		}
		m.setHeld(false)
		m.plot.Follow()
		return
	}
	if m.src.Replay() {
		// The playback holds; the plot keeps following it so steps show.
		m.src.Hold()
	} else {
		// The board keeps sending and the analysis keeps every sample; the plot freezes.
		m.plot.Freeze()
	}
	m.setHeld(true)
}

func (m *Model) setSpeed(d int) {
	m.speedIx = min(max(m.speedIx+d, 0), len(m.speeds)-1)
	m.src.SetSpeed(m.speeds[m.speedIx])
}
