package tui

import (
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"

	"github.com/charmbracelet/lipgloss"
	"github.com/charmbracelet/x/ansi"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/figure"
	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/si"
	"github.com/caploop/caploop/tui/live"
)

// Row states of the rack, as the table says them.
const (
	RackLive      = "live"
	RackUnplugged = "unplugged"
	RackSilent    = "silent"
	RackNoPort    = "no port"
	RackOpening   = "opening"
	RackClosed    = "closed"
)

// rowState says what a board is doing: live (samples arriving), unplugged, silent
// (connected, no sample for SilentAfter), no port (the path is not there), opening or
// closed.
func (b *rackBoard) rowState(now time.Time, silent time.Duration) string {
	st := b.m.status.st.State
	switch {
	case strings.HasPrefix(st, "UNPLUGGED"):
		return RackUnplugged
	case st == "connected":
		last := b.lastData
		if b.since.After(last) {
			last = b.since
		}
		if now.Sub(last) > silent {
			return RackSilent
		}
		return RackLive
	case strings.HasPrefix(st, "waiting"):
		return RackNoPort
	case st == "closed" || b.m.ended:
		return RackClosed
	}
	return RackOpening
}

// rackColumn is one column of the table: its heading, width and cell.
type rackColumn struct {
	head  string
	width int
	right bool
	cell  func(b *rackBoard, now time.Time) string
}

func (r Rack) columns() []rackColumn {
	silent := r.opts.SilentAfter
	seg := func(b *rackBoard) *analysis.Segment { return live.CurrentSegment(b.m.sum) }
	return []rackColumn{
		{"port", 18, false, func(b *rackBoard, _ time.Time) string { return tail(b.m.src.Name(), 18) }},
		{"board", 17, false, func(b *rackBoard, _ time.Time) string { return boardSettings(b.m.sum) }},
		{"state", 9, false, func(b *rackBoard, t time.Time) string { return b.rowState(t, silent) }},
		{"setpoint", 8, true, func(b *rackBoard, _ time.Time) string {
			if b.m.sum == nil || len(b.m.sum.Segments) == 0 {
				return rackNone
			}
			s := &b.m.sum.Segments[len(b.m.sum.Segments)-1]
			if s.SetpointV != nil {
				return si3(*s.SetpointV, "V")
			}
			return strconv.FormatFloat(s.SetpointCounts, 'f', 0, 64)
		}},
		{"ripple", 8, true, func(b *rackBoard, _ time.Time) string {
			if s := seg(b); s != nil && s.RipplePPV != nil {
				return si3(*s.RipplePPV, "V")
			}
			return rackNone
		}},
		{"duty", 5, true, func(b *rackBoard, _ time.Time) string {
			if s := seg(b); s != nil {
				return rackPct(s.DutyCharge)
			}
			return rackNone
		}},
		{"cycle", 8, true, func(b *rackBoard, _ time.Time) string {
			if s := seg(b); s != nil && s.LimitCyclePeriodS != nil {
				return si3(*s.LimitCyclePeriodS, "s")
			}
			return rackNone
		}},
		{"jumps", 5, true, func(b *rackBoard, _ time.Time) string {
			if s := seg(b); s != nil {
				return strconv.FormatInt(s.BandJumps, 10)
			}
			return rackNone
		}},
		{"tau", 8, true, func(b *rackBoard, _ time.Time) string {
			if b.m.sum != nil && b.m.sum.Plant.TauChargeS != nil {
				return si3(*b.m.sum.Plant.TauChargeS, "s")
			}
			return rackNone
		}},
		{"verdict", 13, false, func(b *rackBoard, _ time.Time) string {
			if b.verdict.Short == "" {
				return rackNone
			}
			return b.verdict.Short
		}},
	}
}

// dropOrder is the order in which columns give way on a narrow terminal: the port, the
// state and the verdict stay.
var dropOrder = []string{"cycle", "tau", "duty", "board", "setpoint", "jumps", "ripple"}

// fitColumns drops columns in dropOrder until the table fits width (a sparkline of at
// least 8 cells wanted).
func fitColumns(cols []rackColumn, width int) []rackColumn {
	need := func(cs []rackColumn) int {
		n := 2 + 8
		for _, c := range cs {
			n += c.width + 1
		}
		return n
	}
	for _, d := range dropOrder {
		if need(cols) <= width {
			break
		}
		for i, c := range cols {
			if c.head == d {
				cols = append(cols[:i:i], cols[i+1:]...)
				break
			}
		}
	}
	return cols
}

// rackNone is written in a cell without a figure.
const rackNone = figure.Missing

// si3 formats v with three significant digits and an SI prefix, without the space.
func si3(v float64, unit string) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return rackNone
	}
	return strings.ReplaceAll(si.FormatDigits(v, unit, 3), " ", "")
}

// rackPct writes a fraction as a whole percentage.
func rackPct(p *float64) string {
	if p == nil || math.IsNaN(*p) {
		return rackNone
	}
	return strconv.FormatFloat(*p*100, 'f', 0, 64) + "%"
}

// rackCounts writes a count, with one decimal when it has a fraction.
func rackCounts(v float64) string {
	if v == math.Trunc(v) {
		return strconv.FormatFloat(v, 'f', 0, 64)
	}
	return strconv.FormatFloat(v, 'f', 1, 64)
}

// boardSettings is the compact board column: deadband (or two-state), ADC bits and the
// sample period, from the meta lines.
func boardSettings(s *analysis.Summary) string {
	if s == nil {
		return rackNone
	}
	var parts []string
	switch {
	case s.Board.Mode == "two-state":
		parts = append(parts, "2-st")
	case s.Board.DeadbandCounts != nil:
		parts = append(parts, "db "+rackCounts(*s.Board.DeadbandCounts))
	}
	if s.Board.ADCBits != nil {
		parts = append(parts, strconv.Itoa(*s.Board.ADCBits)+"b")
	}
	if s.SamplePeriodS != nil {
		parts = append(parts, si3(*s.SamplePeriodS, "s"))
	}
	if len(parts) == 0 {
		return rackNone
	}
	return strings.Join(parts, " ")
}

// tail keeps the last n cells of a sanitised name (the end of a port path says most).
func tail(s string, n int) string {
	s = telemetry.Sanitize([]byte(s))
	r := []rune(s)
	if len(r) <= n {
		return s
	}
	return "…" + string(r[len(r)-n+1:])
}

// fitCell pads or cuts s to w cells.
func fitCell(s string, w int, right bool) string {
	if lipgloss.Width(s) > w {
		s = ansi.Truncate(s, w-1, "") + "…"
	}
	pad := strings.Repeat(" ", max(w-lipgloss.Width(s), 0))
	if right {
		return pad + s
	}
	return s + pad
}

// sparkGlyphs are the eight heights of a sparkline cell.
var sparkGlyphs = []rune("▁▂▃▄▅▆▇█")

// sparkSpan is the time the sparkline covers, s.
const sparkSpan = 6.0

// sparkline draws the reading over the last sparkSpan seconds in width cells, each the
// mean of its points, scaled between the window's extremes.
func sparkline(ring *Ring, width int) string {
	last, ok := ring.Last()
	if !ok || width <= 0 {
		return strings.Repeat(" ", max(width, 0))
	}
	from := last.T - sparkSpan
	pts := ring.Slice(nil, from, last.T)
	sum := make([]float64, width)
	n := make([]int, width)
	for _, p := range pts {
		i := int((p.T - from) / sparkSpan * float64(width))
		i = min(max(i, 0), width-1)
		sum[i] += float64(p.PV)
		n[i]++
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for i := range sum {
		if n[i] > 0 {
			sum[i] /= float64(n[i])
			lo, hi = math.Min(lo, sum[i]), math.Max(hi, sum[i])
		}
	}
	var b strings.Builder
	for i := range sum {
		switch {
		case n[i] == 0:
			b.WriteByte(' ')
		case hi <= lo:
			b.WriteRune(sparkGlyphs[len(sparkGlyphs)/2])
		default:
			k := int((sum[i] - lo) / (hi - lo) * float64(len(sparkGlyphs)-1))
			b.WriteRune(sparkGlyphs[min(max(k, 0), len(sparkGlyphs)-1)])
		}
	}
	return b.String()
}

// View draws the table, or the opened board's screen under a line naming it.
func (r Rack) View() string {
	w, h := r.width, r.height
	if w < 20 || h < 6 {
		return "caploop: terminal too small"
	}
	if r.focus >= 0 {
		b := &r.boards[r.focus]
		head := fmt.Sprintf("rack · board %d of %d · %s · %s · esc: back to the rack",
			r.focus+1, len(r.boards), tail(b.m.src.Name(), 30), b.rowState(r.now(), r.opts.SilentAfter))
		return padRight(ansi.Truncate(head, w, "…"), w) + "\n" + b.m.View()
	}
	now := r.now()
	cols := fitColumns(r.columns(), w)
	used := 2
	for _, c := range cols {
		used += c.width + 1
	}
	sparkW := min(w-used, 24)
	var lines []string
	gates := "no gates"
	if r.opts.Gates != "" {
		gates = "gates: " + r.opts.Gates
	}
	fails := 0
	for _, b := range r.boards {
		if b.verdict.State == VerdictFail {
			fails++
		}
	}
	right := fmt.Sprintf("%d boards · %d failing", len(r.boards), fails)
	lines = append(lines, headerLine("caploop rack · "+gates, right, w))
	var head strings.Builder
	head.WriteString("  ")
	for _, c := range cols {
		head.WriteString(fitCell(c.head, c.width, c.right) + " ")
	}
	if sparkW >= 4 {
		head.WriteString("last " + strconv.FormatFloat(sparkSpan, 'f', -1, 64) + " s")
	}
	lines = append(lines, padRight(head.String(), w))
	for i := range r.boards {
		b := &r.boards[i]
		var row strings.Builder
		if i == r.sel {
			row.WriteString("> ")
		} else {
			row.WriteString("  ")
		}
		for _, c := range cols {
			cell := fitCell(c.cell(b, now), c.width, c.right)
			if c.head == "verdict" && b.verdict.State == VerdictFail && r.opts.Board.Color {
				cell = lipgloss.NewStyle().Bold(true).Reverse(true).Render(cell)
			}
			row.WriteString(cell + " ")
		}
		if sparkW >= 4 {
			row.WriteString(sparkline(b.m.plot.ring, sparkW))
		}
		lines = append(lines, padRight(ansi.Truncate(row.String(), w, ""), w))
	}
	// The selected board in words: its verdict in full, its last message and counters.
	if len(r.boards) > 0 {
		b := &r.boards[r.sel]
		lines = append(lines, "")
		lines = append(lines, padRight(ansi.Truncate(fmt.Sprintf("board %d: %s", r.sel+1, b.m.status.View()), w, "…"), w))
		if b.verdict.Detail != "" {
			lines = append(lines, padRight(ansi.Truncate("  "+b.verdict.Detail, w, "…"), w))
		}
		if b.m.message != "" {
			lines = append(lines, padRight(ansi.Truncate("  "+b.m.message, w, "…"), w))
		}
	}
	body := fitBlock(strings.Join(lines, "\n"), w, h-1)
	return body + "\n" + padRight("↑/↓ select · enter opens a board · esc returns · q quits", w)
}
