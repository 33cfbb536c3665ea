package tui

import (
	"fmt"
	"strconv"
	"time"

	tea "github.com/charmbracelet/bubbletea"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/tui/live"
)

// VerdictState is where a board stands against the gates.
type VerdictState int

// Verdict states.
const (
	VerdictNone VerdictState = iota // no gate given, or nothing to judge yet
	VerdictPass                     // every gate checked so far passed
	VerdictFail                     // a gate failed
)

// Verdict is a board's standing against the gates given on the command line: Short fits
// a table cell ("pass", "FAIL ripple"), Detail says which gate failed where and by how
// much. Both are plain text.
type Verdict struct {
	State  VerdictState
	Short  string
	Detail string
}

// RackOptions tune the rack screen. Board is the bench screen's options, used when one
// board is opened full screen.
type RackOptions struct {
	Board Options
	// Verdict judges a board's summary so far against the gates; nil leaves the
	// verdict column empty.
	Verdict func(s *analysis.Summary) Verdict
	// Gates names the gates for the header ("max-ripple 20 mV"); "" = none.
	Gates string
	// SilentAfter is how long a connected board may send no sample before its row
	// says "silent" (0 = 2 s).
	SilentAfter time.Duration
}

// rackBoard is one board of the rack: its own bench screen model, fed by its own
// pipeline, and what the row needs besides.
type rackBoard struct {
	m        Model
	sum      *analysis.Summary // summary the verdict was judged on
	verdict  Verdict
	lastData time.Time // last display points
	state    string    // last link state seen
	since    time.Time // when it became that state
}

// Rack is the rack screen: one row per board (port, board settings, state, setpoint,
// ripple, duty, limit cycle, band jumps, tau, verdict, a sparkline of the reading); Enter
// opens a board's bench screen, Esc returns. Each board keeps its own Model, fed by its
// own pipeline's wait command, so a board that is unplugged or floods its link holds up
// no other row.
type Rack struct {
	boards        []rackBoard
	opts          RackOptions
	sel           int
	focus         int // board shown full screen; -1 = the table
	width, height int
	now           func() time.Time
}

// rackMsg carries a message produced by a board's command back to that board.
type rackMsg struct {
	board int
	msg   tea.Msg
}

// rackTickMsg refreshes the states (silent) and the sparklines without new data.
type rackTickMsg struct{}

const rackTick = 500 * time.Millisecond

// NewRack returns the rack screen over the pipelines, one row each, in order.
func NewRack(srcs []*live.Pipeline, opts RackOptions) Rack {
	if opts.SilentAfter <= 0 {
		opts.SilentAfter = 2 * time.Second
	}
	r := Rack{opts: opts, focus: -1, width: 80, height: 24, now: time.Now}
	t := r.now()
	for _, p := range srcs {
		r.boards = append(r.boards, rackBoard{m: New(p, opts.Board), since: t})
	}
	return r
}

// Init starts every board's wait and the refresh tick.
func (r Rack) Init() tea.Cmd {
	cmds := []tea.Cmd{tickRack()}
	for i := range r.boards {
		cmds = append(cmds, tagCmd(i, r.boards[i].m.Init()))
	}
	return tea.Batch(cmds...)
}

func tickRack() tea.Cmd {
	return tea.Tick(rackTick, func(time.Time) tea.Msg { return rackTickMsg{} })
}

// tagCmd wraps a board's command so that its message comes back to that board.
func tagCmd(i int, c tea.Cmd) tea.Cmd {
	if c == nil {
		return nil
	}
	return func() tea.Msg {
		msg := c()
		if msg == nil {
			return nil
		}
		return rackMsg{board: i, msg: msg}
	}
}

// Verdicts returns every board's current verdict, in row order.
func (r Rack) Verdicts() []Verdict {
	out := make([]Verdict, len(r.boards))
	for i, b := range r.boards {
		out[i] = b.verdict
	}
	return out
}

// Focused returns the board shown full screen, or -1 for the table.
func (r Rack) Focused() int { return r.focus }

// Update routes messages: a board's own messages to its model, keys to the table or the
// opened board, sizes to all.
func (r Rack) Update(msg tea.Msg) (tea.Model, tea.Cmd) {
	switch msg := msg.(type) {
	case tea.WindowSizeMsg:
		r.width, r.height = msg.Width, msg.Height
		// A board's screen gets one row less: the rack's own line heads it.
		sub := tea.WindowSizeMsg{Width: msg.Width, Height: max(msg.Height-1, 1)}
		for i := range r.boards {
			r.boardUpdate(i, sub)
		}
		return r, nil
	case rackTickMsg:
		t := r.now()
		for i := range r.boards {
			r.boards[i].observe(t)
		}
		return r, tickRack()
	case rackMsg:
		switch inner := msg.msg.(type) {
		case tea.BatchMsg:
			cmds := make([]tea.Cmd, len(inner))
			for k, c := range inner {
				cmds[k] = tagCmd(msg.board, c)
			}
			return r, tea.Batch(cmds...)
		case tea.QuitMsg:
			return r, tea.Quit
		}
		if msg.board < 0 || msg.board >= len(r.boards) {
			return r, nil
		}
		return r, r.boardUpdate(msg.board, msg.msg)
	case tea.KeyMsg:
		return r.key(msg)
	}
	return r, nil
}

// boardUpdate hands msg to board i's model and notes what the row needs.
func (r *Rack) boardUpdate(i int, msg tea.Msg) tea.Cmd {
	b := &r.boards[i]
	mm, cmd := b.m.Update(msg)
	b.m = mm.(Model)
	t := r.now()
	if s, ok := msg.(samplesMsg); ok && len(s.snap.Points) > 0 {
		b.lastData = t
	}
	if b.m.sum != nil && b.m.sum != b.sum {
		b.sum = b.m.sum
		if r.opts.Verdict != nil {
			b.verdict = b.judge(r.opts.Verdict)
		}
	}
	b.observe(t)
	return tagCmd(i, cmd)
}

// judge gives the board's current verdict: over the run so far, or, once a deadband
// change was confirmed on this screen, over what ran wholly under the new band (the
// segments and steps after the change; the per-file gates still over the whole run).
func (b *rackBoard) judge(verdict func(*analysis.Summary) Verdict) Verdict {
	c := b.m.change
	if c == nil {
		return verdict(b.sum)
	}
	s := *b.sum
	s.Segments, s.Steps = nil, nil
	for _, g := range b.sum.Segments {
		if g.StartS > c.CutS {
			s.Segments = append(s.Segments, g)
		}
	}
	for _, st := range b.sum.Steps {
		if st.AtS > c.CutS {
			s.Steps = append(s.Steps, st)
		}
	}
	v := verdict(&s)
	if v.Detail != "" {
		v.Detail += fmt.Sprintf(" (since the deadband change to %s)", strconv.FormatFloat(c.To, 'f', -1, 64))
	}
	return v
}

// observe follows the link state, to say how long it has held.
func (b *rackBoard) observe(t time.Time) {
	if st := b.m.status.st.State; st != b.state {
		b.state, b.since = st, t
	}
}

func (r Rack) key(msg tea.KeyMsg) (tea.Model, tea.Cmd) {
	if r.focus >= 0 {
		b := &r.boards[r.focus]
		if msg.Type == tea.KeyEsc && !b.m.noting && b.m.confirm == 0 {
			r.focus = -1
			return r, nil
		}
		return r, r.boardUpdate(r.focus, msg)
	}
	switch msg.String() {
	case "q", "ctrl+c":
		return r, tea.Quit
	case "up", "k":
		if r.sel > 0 {
			r.sel--
		}
	case "down", "j":
		if r.sel < len(r.boards)-1 {
			r.sel++
		}
	case "home":
		r.sel = 0
	case "end":
		r.sel = len(r.boards) - 1
	case "enter":
		if len(r.boards) > 0 {
			r.focus = r.sel
		}
	default:
		// A row number selects that board (1-9).
		if s := msg.String(); len(s) == 1 && s[0] >= '1' && s[0] <= '9' {
			if n := int(s[0] - '1'); n < len(r.boards) {
				r.sel = n
			}
		}
	}
	return r, nil
}

// RackRow is what a row of the rack says, for a caller that reads the screen's final
// model (tests, an exit report).
type RackRow struct {
	Port    string
	State   string // live, unplugged, silent, no port, opening, closed
	Samples int64  // samples analysed
	Verdict Verdict
}

// Rows returns every row, in order.
func (r Rack) Rows() []RackRow {
	out := make([]RackRow, len(r.boards))
	now := r.now()
	for i := range r.boards {
		b := &r.boards[i]
		out[i] = RackRow{Port: b.m.src.Name(), State: b.rowState(now, r.opts.SilentAfter), Samples: b.m.status.st.Samples, Verdict: b.verdict}
	}
	return out
}
