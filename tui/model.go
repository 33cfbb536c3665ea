package tui

import (
	"fmt"
	"math"
	"strings"
	"time"

	"github.com/charmbracelet/bubbles/help"
	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/lipgloss"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/advice"
	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/tui/live"
	"github.com/caploop/caploop/tui/live/tune"
)

// View is one screen of the bench screen.
type View int

// The views, in tab order.
const (
	ViewTrace View = iota
	ViewFigures
	ViewSpread
	ViewRipple
	ViewStep
	numViews
)

var viewNames = [...]string{"trace", "figures", "spread", "ripple", "step"}

// String returns the view's name.
func (v View) String() string { return viewNames[v] }

// Options tune the screen. The zero value is usable.
type Options struct {
	Color   bool          // colour the plot and the header (false honours NO_COLOR)
	Span    float64       // initial time window, s (0 = 2 s)
	Retain  int           // points kept for scrolling back (0 = live.DefaultRetain)
	Timeout time.Duration // how long to wait for the board to confirm a command (0 = 5 s)
	Tune    tune.Options  // the tune view's run (t): range, goals, gates; plan and progress are the view's
}

// frameMsg is what the root model forwards to its children after each frame.
type frameMsg struct {
	summary   *analysis.Summary
	advice    *advice.Advice
	adviceErr string
	stats     *live.Stats
	change    *DeadbandChange
	changes   []settingChange // changes of settings so far, oldest first
	reset     bool            // the source restarted
}

// confirmTimeoutMsg fires when the board did not answer a command in time.
type confirmTimeoutMsg struct{ id int }

// sentMsg reports the result of writing a command to the board.
type sentMsg struct {
	cmd string
	err error
}

// pendingChange is a deadband command waiting for the board's meta line.
type pendingChange struct {
	id int
	to int
}

// Model is the bench screen: the root bubbletea model that owns the small models and
// the retained window of points.
type Model struct {
	src  *live.Pipeline
	opts Options
	keys KeyMap
	help help.Model
	held bool // the screen is held: a replay holds, a live plot freezes
	view View
	full bool // full help shown
	plot PlotModel

	width, height int

	figures FiguresModel
	advice  AdviceModel
	status  StatusModel
	charts  [3]ChartModel

	sum     *analysis.Summary
	confirm int           // deadband waiting for y/n; 0 = none
	tenth   bool          // j was pressed: a digit picks the tenth of the capture to jump to
	offsets [numViews]int // first line shown of each view that scrolls
	noting  bool
	note    []rune
	pending *pendingChange
	change  *DeadbandChange
	changes []settingChange // changes of settings seen, oldest first (diagnostics now/earlier)
	nextID  int
	message string
	ended   bool
	last    time.Time
	speeds  []float64
	speedIx int

	drawn   *drawCache // the blocks last drawn (pace.go)
	textRev int64      // bumped whenever the text blocks may read differently
	tv      tuneView   // the tune view (tuneview.go)
}

// New returns the screen for a pipeline.
func New(src *live.Pipeline, opts Options) Model {
	if opts.Span <= 0 {
		opts.Span = 2
	}
	if opts.Retain <= 0 {
		opts.Retain = live.DefaultRetain
	}
	if opts.Timeout <= 0 {
		opts.Timeout = 5 * time.Second
	}
	m := Model{
		src:     src,
		opts:    opts,
		keys:    DefaultKeyMap(),
		help:    help.New(),
		plot:    NewPlot(opts.Retain, opts.Span, opts.Color),
		width:   80,
		height:  24,
		figures: NewFigures(),
		advice:  NewAdvice(src.CanSend()),
		status:  NewStatus(src.Replay()),
		charts:  [3]ChartModel{NewChart(ChartSpread, opts.Color), NewChart(ChartRipple, opts.Color), NewChart(ChartStep, opts.Color)},
		speeds:  []float64{1, 2, 10, 0},
		drawn:   &drawCache{},
	}
	if src.Replay() {
		m.held = src.Held()
		m.status.SetHeld(m.held)
		for i, v := range m.speeds {
			if v == src.Speed() || (v > 0 && src.Speed() > v) {
				m.speedIx = i
			}
		}
	}
	m.keys.SetState(m.held, src.Replay(), src.CanSend())
	m.layout()
	return m
}

// Init starts waiting for the source.
func (m Model) Init() tea.Cmd { return wait(m.src, time.Time{}) }

// Ring returns the retained window (for tests and benchmarks).
func (m Model) Ring() *Ring { return m.plot.ring }

func (m *Model) layout() {
	m.help.Width = m.width
	m.status.SetWidth(m.width)
	bodyH := m.height - 4
	figH, advH := 4, 2
	switch {
	case m.height >= 36:
		advH = 5
	case m.height < 22:
		figH, advH = 2, 1 // keep the plot readable on small terminals
	}
	m.plot.SetSize(m.width, bodyH-figH-advH)
	if m.view == ViewTrace {
		m.figures.SetSize(m.width, figH, true)
		m.advice.SetSize(m.width, advH, true)
	} else {
		m.figures.SetSize(m.width, bodyH-(bodyH/3), false)
		m.advice.SetSize(m.width, bodyH/3, false)
	}
	for i := range m.charts {
		m.charts[i].SetSize(m.width, bodyH)
	}
}

func (m *Model) setHeld(held bool) {
	m.held = held
	m.status.SetHeld(held)
	m.keys.SetState(held, m.src.Replay(), m.src.CanSend())
	if m.confirm != 0 {
		m.keys.SetConfirming(true)
	}
}

// Update handles messages: frames from the source, keys, sizes and timers.
func (m Model) Update(msg tea.Msg) (tea.Model, tea.Cmd) {
	if _, ok := msg.(samplesMsg); !ok {
		m.textRev++ // a key, a size, a reply: the text may change (takeFrame bumps its own)
	}
	switch msg := msg.(type) {
	case tea.WindowSizeMsg:
		m.width, m.height = msg.Width, msg.Height
		m.layout()
		return m, nil
	case samplesMsg:
		if msg.src != m.src {
			return m, nil
		}
		cmd := m.takeFrame(msg.snap)
		m.last = time.Now()
		return m, tea.Batch(cmd, waitEvery(m.src, m.last, m.frameEvery()))
	case sourceErrMsg:
		m.message = "source: " + telemetry.Sanitize([]byte(msg.err.Error()))
		m.ended = true
		if m.src.Replay() {
			return m, wait(m.src, time.Now())
		}
		return m, nil
	case sourceDoneMsg:
		m.ended = true
		if m.src.Replay() {
			return m, wait(m.src, time.Now())
		}
		return m, nil
	case sentMsg:
		if msg.err != nil {
			m.message = "could not send " + msg.cmd + ": " + telemetry.Sanitize([]byte(msg.err.Error()))
			m.pending = nil
		}
		return m, nil
	case confirmTimeoutMsg:
		if m.pending != nil && m.pending.id == msg.id {
			m.message = fmt.Sprintf("the board did not confirm deadband %d within %s", m.pending.to, m.opts.Timeout)
			m.pending = nil
		}
		return m, nil
	case tuneMsg:
		return m.tuneUpdate(msg)
	case tea.KeyMsg:
		return m.key(msg)
	}
	return m, nil
}

// takeFrame applies one snapshot of the pipeline to the model.
func (m *Model) takeFrame(b live.Snapshot) tea.Cmd {
	if b.Reset {
		m.change, m.pending, m.changes = nil, nil, nil
	}
	if b.Reset || b.Summary != nil || b.Advice != nil || b.AdviceErr != "" || b.Stats != nil || len(b.Events) > 0 ||
		b.Done || b.Err != nil || m.ended {
		m.textRev++
	}
	var marks []Mark
	for _, e := range b.Events {
		if mk, ok := m.event(e); ok {
			marks = append(marks, mk)
		}
	}
	m.plot, _ = m.plot.Update(pointsMsg{points: b.Points, marks: marks, reset: b.Reset})
	if b.Summary != nil {
		m.sum = b.Summary
		if m.change != nil {
			m.change.After = afterSegment(b.Summary, m.change)
		}
	}
	if b.Stats != nil {
		st := *b.Stats
		st.Dropped = b.Dropped
		b.Stats = &st
	}
	if b.Done {
		m.ended = true
	} else if len(b.Points) > 0 {
		m.ended = false
	}
	if b.Err != nil {
		m.message = "source: " + telemetry.Sanitize([]byte(b.Err.Error()))
	}
	snap := frameMsg{summary: b.Summary, advice: b.Advice, adviceErr: b.AdviceErr, stats: b.Stats, change: m.change,
		changes: m.changes, reset: b.Reset}
	m.plot, _ = m.plot.Update(snap)
	m.figures, _ = m.figures.Update(snap)
	m.advice, _ = m.advice.Update(snap)
	m.status, _ = m.status.Update(snap)
	for i := range m.charts {
		m.charts[i], _ = m.charts[i].Update(snap)
	}
	return nil
}

// afterSegment picks the figures that show what a deadband change bought: among the
// segments that started after the change (so none of their samples ran under the old
// band) and have a steady part, the newest with the setpoint of the "before" segment,
// else the newest one. Nil while there is none yet.
func afterSegment(s *analysis.Summary, c *DeadbandChange) *analysis.Segment {
	var best *analysis.Segment
	for i := len(s.Segments) - 1; i >= 0; i-- {
		seg := &s.Segments[i]
		if seg.StartS <= c.CutS {
			break
		}
		if seg.SteadySamples == 0 || seg.DeadbandCounts == nil || *seg.DeadbandCounts != c.To {
			continue
		}
		if best == nil {
			best = seg
		}
		if c.Before != nil && seg.SetpointCounts == c.Before.SetpointCounts {
			best = seg
			break
		}
	}
	if best == nil {
		return nil
	}
	out := *best
	return &out
}

// event applies one source event and returns the mark it puts on the plot, if any.
func (m *Model) event(e live.Event) (Mark, bool) {
	switch e.Kind {
	case live.EventMark:
		return Mark{T: e.T, Label: cut(e.Text, 20)}, true
	case live.EventState:
		m.message = "link: " + e.Text
		return Mark{T: e.T, Label: cut(e.Text, 12)}, true
	case live.EventNote:
		return Mark{T: e.T, Label: cut(e.Text, 16)}, true
	case live.EventInfo:
		m.message = e.Text
	case live.EventSent:
		if e.Text == "info" {
			if m.tv.confirming {
				break // the plan's question stays on the line
			}
			m.message = "asked the board for its settings (info)"
		} else {
			m.message = "sent: " + e.Text
		}
		if strings.HasPrefix(e.Text, "set ") {
			m.noteChange(e.T, e.SegStartS, e.Text)
		}
	case live.EventMeta:
		m.message = "the board reports " + e.Text
		m.noteChange(e.T, e.SegStartS, e.Text)
		return Mark{T: e.T, Label: cut(e.Text, 16)}, true
	case live.EventDeadband:
		from := -1.0
		if e.Segment != nil && e.Segment.DeadbandCounts != nil {
			from = *e.Segment.DeadbandCounts
		}
		m.change = &DeadbandChange{At: e.T, From: from, To: e.Value, Before: e.Segment, CutS: e.SegStartS}
		m.noteChange(e.T, e.SegStartS, fmt.Sprintf("deadband %g", e.Value))
		if m.pending != nil && int(math.Round(e.Value)) == m.pending.to {
			m.message = fmt.Sprintf("the board confirmed deadband %d; figures before and after on view 2", m.pending.to)
			m.pending = nil
		} else {
			m.message = "the board reports " + e.Text + "; figures before and after on view 2"
		}
		return Mark{T: e.T, Label: "db " + strings.TrimPrefix(e.Text, "deadband ")}, true
	case live.EventJump:
		switch {
		case e.Value < 0:
			m.message = e.Text
		case e.Text == "fraction":
			m.message = "jumped to " + formatSeconds(e.Value)
		default:
			m.message = "jumped to the " + e.Text + " at " + formatSeconds(e.Value)
		}
	}
	return Mark{}, false
}

func cut(s string, n int) string {
	r := []rune(s)
	if len(r) > n {
		return string(r[:n-1]) + "…"
	}
	return s
}

// View draws the screen: header, body of the current view, message, status, help.
func (m Model) View() string {
	w, h := m.width, m.height
	if w < 20 || h < 8 {
		return "caploop: terminal too small"
	}
	header := m.header()
	var body string
	bodyH := h - 4
	if m.full {
		body = fitBlock("keys\n"+m.help.FullHelpView(m.keys.FullHelp()), w, bodyH)
	} else if m.tv.shown {
		body = m.tuneBody(w, bodyH)
	} else {
		switch m.view {
		case ViewTrace:
			text, _ := m.textViews()
			body = m.plotView() + "\n" + text
		case ViewFigures:
			// Every figure, then the whole advice; it scrolls when it does not fit.
			off := m.offsets[m.view]
			body = scrolled(m.scrollLines(), w, bodyH, &off)
		default:
			body = m.charts[m.view-ViewSpread].View()
		}
	}
	msg := m.message
	if m.noting {
		msg = "note (enter stores it, esc cancels): " + string(m.note) + "█"
	}
	lines := []string{header, fitBlock(body, w, bodyH), padRight(msg, w), m.statusView(), m.helpView()}
	return strings.Join(lines, "\n")
}

func (m Model) header() string {
	var tabs []string
	for v := View(0); v < numViews; v++ {
		name := fmt.Sprintf("%d %s", v+1, v)
		if v == m.view {
			name = "[" + name + "]"
			if m.opts.Color {
				name = lipgloss.NewStyle().Bold(true).Reverse(true).Render(name)
			}
		}
		tabs = append(tabs, name)
	}
	left := "caploop  " + strings.Join(tabs, " ")
	// The time window belongs to the trace; the other views show whole-run figures.
	var right []string
	if m.ended {
		right = append(right, "ended")
	}
	if s := m.tuneStatus(); s != "" {
		right = append(right, s)
	}
	if m.view == ViewTrace && !m.full {
		right = append(right, "window "+formatSeconds(m.plot.Span()))
	}
	return headerLine(left, strings.Join(right, " · "), m.width)
}

// headerLine puts right at the right end of a line width cells wide after left, or
// drops it when they do not fit.
func headerLine(left, right string, width int) string {
	gap := width - cellWidth(left) - cellWidth(right)
	if gap < 1 {
		return padRight(left, width)
	}
	return left + strings.Repeat(" ", gap) + right
}
