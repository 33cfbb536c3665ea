package tui

import (
	"time"

	"github.com/caploop/caploop/tui/live"
)

// Pacing and caching of the screen's drawing, so a screen left open costs little: the
// frame rate drops when nothing on screen can move faster, and the blocks of text are
// drawn again only when what they show changed.

// slowFrame is the longest time between two frames while data arrives: the pipeline
// hands over a summary at most every 100 ms, so nothing but the trace moves faster.
const slowFrame = 100 * time.Millisecond

// frameEvery is the time between two frames for what is on screen: at most FrameRate a second
// on the trace while it follows the data, one per plot column when a column lasts longer
// (a wide window moves less than a column in a thirtieth of a second), and one per
// summary on the views of whole-run figures, the help, or a held or frozen trace.
func (m Model) frameEvery() time.Duration {
	if m.full || m.view != ViewTrace || m.held || !m.plot.follow {
		return slowFrame
	}
	col := time.Duration(m.plot.Span() / float64(max(plotColumns(m.width), 1)) * float64(time.Second))
	return min(max(col, frameInterval), slowFrame)
}

// drawCache keeps the last drawn blocks; the model holds it by pointer, so the copies
// bubbletea makes of the model share it.
type drawCache struct {
	plotKey plotKey
	plot    string
	textRev int64
	textW   int
	text    string // figures and advice under the trace
	status  string
	help    string
}

// plotKey is everything the trace plot is drawn from.
type plotKey struct {
	from, to      float64
	n             int
	last          live.Point
	marks         int
	width, height int
	volts, color  bool
}

func (m PlotModel) key() plotKey {
	from, to := m.Window()
	last, _ := m.ring.Last()
	return plotKey{from: from, to: to, n: m.ring.Len(), last: last, marks: len(m.marks),
		width: m.width, height: m.height, volts: m.volts, color: m.color}
}

// plotView draws the trace plot, or returns it as last drawn when none of its inputs
// changed.
func (m Model) plotView() string {
	if m.drawn == nil {
		return m.plot.View()
	}
	k := m.plot.key()
	if m.drawn.plot == "" || k != m.drawn.plotKey {
		m.drawn.plot, m.drawn.plotKey = m.plot.View(), k
	}
	return m.drawn.plot
}

// textViews returns the figures and advice under the trace and the status line, drawn
// again only when a frame brought new figures, advice, counters or events, or after a
// key or a new size (each bumps textRev).
func (m Model) textViews() (text, status string) {
	if m.drawn == nil {
		return m.figures.View() + "\n" + m.advice.View(), m.status.View()
	}
	if m.drawn.text == "" || m.drawn.textRev != m.textRev || m.drawn.textW != m.width {
		m.drawn.text = m.figures.View() + "\n" + m.advice.View()
		m.drawn.status = m.status.View()
		m.drawn.help = padRight(m.help.ShortHelpView(m.keys.ShortHelp()), m.width)
		m.drawn.textRev, m.drawn.textW = m.textRev, m.width
	}
	return m.drawn.text, m.drawn.status
}

func (m Model) statusView() string {
	_, st := m.textViews()
	return st
}

// helpView is the short help line, drawn again with the text blocks (a key changes it).
func (m Model) helpView() string {
	if m.drawn == nil {
		return padRight(m.help.ShortHelpView(m.keys.ShortHelp()), m.width)
	}
	m.textViews()
	return m.drawn.help
}
