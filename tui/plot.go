package tui

import (
	"fmt"
	"math"
	"strings"

	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/x/ansi"
	"github.com/guptarohit/asciigraph"

	"github.com/caploop/caploop/tui/live"
)

// pointsMsg carries new points and marks to the plot; reset empties it first.
type pointsMsg struct {
	points []live.Point
	marks  []Mark
	reset  bool
}

// maxMarks bounds the marks kept; older ones go first.
const maxMarks = 256

// PlotModel is the trace plot: the ring of retained points, the marks, and the time
// window on screen with its zoom, scroll and freeze.
type PlotModel struct {
	ring   *Ring
	marks  []Mark
	buf    *[]live.Point // reused across frames (the model is copied by value)
	span   float64       // seconds shown
	end    float64       // right edge when not following the newest point
	follow bool
	volts  bool
	color  bool
	width  int
	height int
}

// NewPlot returns a plot that retains retain points and shows span seconds.
func NewPlot(retain int, span float64, color bool) PlotModel {
	return PlotModel{ring: NewRing(retain), buf: new([]live.Point), span: span, follow: true, color: color}
}

// SetSize sets the plot size in cells.
func (m *PlotModel) SetSize(width, height int) { m.width, m.height = width, height }

// Span returns the seconds shown.
func (m PlotModel) Span() float64 { return m.span }

// Update takes new points and marks, and the units from summary snapshots.
func (m PlotModel) Update(msg tea.Msg) (PlotModel, tea.Cmd) {
	switch msg := msg.(type) {
	case pointsMsg:
		if msg.reset {
			m.ring.Reset()
			m.marks = m.marks[:0]
		}
		for _, p := range msg.points {
			m.ring.Push(p)
		}
		m.marks = append(m.marks, msg.marks...)
		if len(m.marks) > maxMarks {
			m.marks = append(m.marks[:0:0], m.marks[len(m.marks)-maxMarks/2:]...)
		}
	case frameMsg:
		if s := msg.summary; s != nil {
			if s.Traces != nil {
				m.volts = s.Traces.Volts
			} else {
				m.volts = s.Board.VrefV != nil && s.Board.ADCBits != nil
			}
		}
	}
	return m, nil
}

// Latest returns the time of the newest point (0 when empty).
func (m PlotModel) Latest() float64 {
	if p, ok := m.ring.Last(); ok {
		return p.T
	}
	return 0
}

// Oldest returns the time of the oldest retained point (0 when empty).
func (m PlotModel) Oldest() float64 {
	if m.ring.Len() == 0 {
		return 0
	}
	return m.ring.At(0).T
}

// Zoom multiplies the span by f, between 5 ms and the retained duration.
func (m *PlotModel) Zoom(f float64) {
	lo := 0.005
	hi := math.Max(m.Latest()-m.Oldest(), 1)
	m.span = math.Min(math.Max(m.span*f, lo), math.Max(hi, lo))
}

// Scroll moves the window by frac spans (negative: back in time). Reaching the newest
// point follows it again unless held.
func (m *PlotModel) Scroll(frac float64, held bool) {
	if m.follow {
		m.end = m.Latest()
	}
	m.end += frac * m.span
	if m.end >= m.Latest() {
		m.end = m.Latest()
		if !held {
			m.follow = true
		}
		return
	}
	m.follow = false
	if m.end < m.Oldest()+m.span {
		m.end = m.Oldest() + m.span
	}
}

// Freeze stops following: the window stays where it is while points keep arriving.
func (m *PlotModel) Freeze() {
	m.end = m.Latest()
	m.follow = false
}

// Follow makes the window follow the newest point.
func (m *PlotModel) Follow() { m.follow = true }

// Window returns the time span on screen.
func (m PlotModel) Window() (from, to float64) {
	to = m.end
	if m.follow {
		to = m.Latest()
	}
	to = math.Max(to, m.span)
	return to - m.span, to
}

// View decimates the visible part of the ring to at most two points per column (the
// column's lowest and highest pv), then draws it with RenderPlot.
func (m PlotModel) View() string {
	from, to := m.Window()
	cols := max(plotColumns(m.width), 1)
	pts := decimate(m.ring, from, to, cols, (*m.buf)[:0])
	*m.buf = pts
	var marks []Mark
	for _, mk := range m.marks {
		if mk.T >= from && mk.T < to {
			marks = append(marks, mk)
		}
	}
	return RenderPlot(Window{From: from, To: to, Points: pts, Marks: marks, Volts: m.volts, Color: m.color}, m.width, m.height)
}

// decimate appends to dst the points of r in [from, to), keeping for each of cols equal
// time columns only its lowest-pv and highest-pv points (in time order), so the plot of
// the result equals the plot of all points while the work per frame stays bounded.
func decimate(r *Ring, from, to float64, cols int, dst []live.Point) []live.Point {
	i := r.Search(from)
	n := r.Len()
	span := to - from
	cur := -1
	var lo, hi live.Point
	var loI, hiI int
	emit := func() {
		if cur < 0 {
			return
		}
		if loI == hiI {
			dst = append(dst, lo)
		} else if loI < hiI {
			dst = append(dst, lo, hi)
		} else {
			dst = append(dst, hi, lo)
		}
	}
	for ; i < n; i++ {
		p := r.At(i)
		if p.T >= to {
			break
		}
		c := int((p.T - from) / span * float64(cols))
		if c != cur {
			emit()
			cur, lo, hi, loI, hiI = c, p, p, i, i
			continue
		}
		if p.PV < lo.PV {
			lo, loI = p, i
		}
		if p.PV >= hi.PV {
			hi, hiI = p, i
		}
	}
	emit()
	return dst
}

// Mark is a moment shown on the plot as a dotted vertical line with a short label.
type Mark struct {
	T     float64 // seconds, same clock as live.Point.T
	Label string  // sanitised, short
}

// Window is what one plot shows: the points of a time span, the marks in it and the units.
type Window struct {
	From, To float64      // time span, s
	Points   []live.Point // in time order, inside [From, To)
	Marks    []Mark
	Volts    bool // values are volts (else counts)
	Color    bool // colour the series (false under NO_COLOR and in golden tests)
}

// RenderPlot draws w as a text plot exactly width columns wide and height rows high:
// the setpoint, the band edges (setpoint ± deadband) and the measurement, whose minimum
// and maximum per column are both drawn when a column holds several samples, so the
// ripple stays visible at any zoom. Marks become dotted columns labelled on the last row.
// It is a pure function of its arguments.
func RenderPlot(w Window, width, height int) string {
	if width < 20 || height < 4 {
		return fitBlock("(plot needs more room)", width, height)
	}
	if len(w.Points) == 0 || !(w.To > w.From) {
		return fitBlock("waiting for samples…", width, height)
	}
	unit := "V"
	prec := uint(3)
	if !w.Volts {
		unit = "counts"
		prec = 0
	}
	format := func(v float64) string { return fmt.Sprintf("%7.*f", prec, v) }
	// Body rows: height minus the x axis (2 rows) and the mark/legend row.
	bodyRows := height - 3
	plotW := plotColumns(width)
	out := plotOnce(w, plotW, bodyRows, prec, format)
	lines := strings.Split(strings.TrimRight(out, "\n"), "\n")
	// Marks: dotted columns in the body, labels on the bottom row.
	pad := 9 // 7-cell label, its cell and the axis glyph
	labels := []rune(strings.Repeat(" ", width))
	colOf := func(t float64) int {
		return int(math.Floor((t - w.From) / (w.To - w.From) * float64(plotW)))
	}
	for _, mk := range w.Marks {
		c := colOf(mk.T)
		if c < 0 || c >= plotW {
			continue
		}
		for i := 0; i <= bodyRows && i < len(lines); i++ {
			lines[i] = setBlankCell(lines[i], pad+c, "┊", w.Color)
		}
		// The label reads rightwards from the ▲; near the right edge it ends at the ▲.
		lab, at := []rune("▲"+mk.Label), pad+c
		if at+len(lab) > width && at+1 >= len(lab) {
			lab = []rune(mk.Label + "▲")
			at = pad + c - len(lab) + 1
		}
		for j, ch := range lab {
			if at+j < width {
				labels[at+j] = ch
			}
		}
	}
	// The legend shares the bottom row with the mark labels: at the left when there are
	// none, else at the right end when it fits after the last label.
	legend := []rune(fmt.Sprintf("sp ━ band ┄ pv ─ (%s)", unit))
	used := len([]rune(strings.TrimRight(string(labels), " ")))
	switch {
	case used == 0:
		copy(labels, legend)
	case used+2+len(legend) <= width:
		copy(labels[width-len(legend):], legend)
	}
	row := string(labels)
	if w.Color {
		// The legend's glyphs in their series colours.
		col := fmt.Sprintf("sp %s band %s pv %s (%s)", paint(colourSP, "━"), paint(colourBand, "┄"), paint(colourPV, "─"), unit)
		row = strings.Replace(row, string(legend), col, 1)
	}
	lines = append(lines, row)
	return fitBlock(strings.Join(lines, "\n"), width, height)
}

// plotColumns is the number of data columns of a plot width cells wide: the 7-cell
// label, its cell and the axis glyph on the left, 3 cells on the right for the last
// time label.
func plotColumns(width int) int { return width - 12 }

func plotOnce(w Window, plotW, bodyRows int, prec uint, format func(float64) string) string {
	sp := make([]float64, plotW)
	lo := make([]float64, plotW)
	hi := make([]float64, plotW)
	pvMin := make([]float64, plotW)
	pvMax := make([]float64, plotW)
	for i := range sp {
		sp[i], lo[i], hi[i], pvMin[i], pvMax[i] = math.NaN(), math.NaN(), math.NaN(), math.NaN(), math.NaN()
	}
	span := w.To - w.From
	several := false
	for _, p := range w.Points {
		c := int((p.T - w.From) / span * float64(plotW))
		if c < 0 || c >= plotW {
			continue
		}
		v := float64(p.PV)
		if math.IsNaN(pvMin[c]) {
			pvMin[c], pvMax[c] = v, v
		} else {
			several = true
			pvMin[c] = math.Min(pvMin[c], v)
			pvMax[c] = math.Max(pvMax[c], v)
		}
		sp[c] = float64(p.SP)
		if p.DB >= 0 {
			lo[c] = float64(p.SP - p.DB)
			hi[c] = float64(p.SP + p.DB)
		}
	}
	series := [][]float64{hi, lo, sp, pvMin}
	chars := []asciigraph.CharSet{glyphsBand, glyphsBand, glyphsSP, glyphsPV}
	colours := []asciigraph.AnsiColor{colourBand, colourBand, colourSP, colourPV}
	if several {
		series = append(series, pvMax)
		chars = append(chars, glyphsPV)
		colours = append(colours, colourPV)
	}
	opts := []asciigraph.Option{
		asciigraph.Height(bodyRows - 1),
		asciigraph.Offset(2),
		asciigraph.Precision(prec),
		asciigraph.YAxisValueFormatter(format),
		asciigraph.SeriesChars(chars...),
		asciigraph.XAxisRange(w.From, w.To),
		asciigraph.XAxisTickCount(tickCount(plotW)),
		asciigraph.XAxisValueFormatter(tickFormatter(w.From, w.To, min(tickCount(plotW), plotW))),
	}
	if w.Color {
		opts = append(opts, asciigraph.SeriesColors(colours...), asciigraph.AxisColor(colourAxis), asciigraph.LabelColor(colourAxis))
	}
	return plainAxis(asciigraph.PlotMany(series, opts...))
}

// setBlankCell puts glyph in cell x of line when that cell is blank or past the line's
// end (asciigraph trims trailing blanks), counting cells (a coloured line holds ANSI
// escapes between them).
func setBlankCell(line string, x int, glyph string, color bool) string {
	if n := ansi.StringWidth(line); n <= x {
		line += strings.Repeat(" ", x+1-n)
	}
	if !color {
		r := []rune(line)
		if r[x] == ' ' {
			r[x] = []rune(glyph)[0]
		}
		return string(r)
	}
	if ansi.Strip(ansi.Cut(line, x, x+1)) != " " {
		return line
	}
	return ansi.Cut(line, 0, x) + glyph + ansi.Cut(line, x+1, ansi.StringWidth(line))
}

// paint wraps s in an ANSI 256-colour foreground.
func paint(c asciigraph.AnsiColor, s string) string {
	if s == "" {
		return s
	}
	return fmt.Sprintf("\x1b[38;5;%dm%s\x1b[0m", int(c), s)
}

// plainAxis turns asciigraph's first-value marks on the y axis (┼, one per series) into
// plain axis cells: on a plot with several series they read as stray ticks. No series
// glyph of these plots is a ┼, so the swap touches only the axis.
func plainAxis(plot string) string { return strings.ReplaceAll(plot, "┼", "┤") }

func tickCount(plotW int) int {
	n := plotW / 14
	if n < 2 {
		n = 2
	}
	return n
}

// formatSeconds writes a time-axis label: 12.5s, 1m02s, 1h03m.
func formatSeconds(v float64) string {
	switch {
	case math.Abs(v) < 10:
		return fmt.Sprintf("%.2fs", v)
	case math.Abs(v) < 600:
		return fmt.Sprintf("%.1fs", v)
	case math.Abs(v) < 36000:
		return fmt.Sprintf("%dm%02ds", int(v)/60, int(v)%60)
	}
	return fmt.Sprintf("%dh%02dm", int(v)/3600, int(v)%3600/60)
}

// tickFormatter returns the time-axis label writer for n ticks spread evenly over
// [from, to]: the decimals follow the spacing of the ticks, so that neighbouring labels
// differ however short the window ("42.70s 42.71s", not "42.7s 42.7s").
func tickFormatter(from, to float64, n int) func(float64) string {
	if n < 2 || !(to > from) {
		return formatSeconds
	}
	step := (to - from) / float64(n-1)
	// The fewest decimals that resolve the step: step·10^d ≥ 1 (with a little slack for
	// steps such as 0.1 that are not exact in binary).
	d := 0
	for d < 6 && step*math.Pow(10, float64(d)) < 1-1e-9 {
		d++
	}
	// hms splits a into whole hours, minutes and seconds with d decimals (truncated, so
	// 59.996 s stays in its minute), the seconds written with two integer digits.
	hms := func(a float64) (int, int, string) {
		p := math.Pow(10, float64(d))
		units := int64(math.Floor(a*p + 1e-6))
		whole := units / int64(p)
		sec := float64(units%(60*int64(p))) / p
		w := 2
		if d > 0 {
			w = d + 3
		}
		return int(whole / 3600), int(whole % 3600 / 60), fmt.Sprintf("%0*.*f", w, d, sec)
	}
	return func(v float64) string {
		a := math.Abs(v)
		switch {
		case a < 600:
			// As formatSeconds when the spacing allows, finer when it needs.
			base := 1
			if a < 10 {
				base = 2
			}
			return fmt.Sprintf("%.*fs", max(base, d), v)
		case a < 36000:
			h, m, sec := hms(a)
			return fmt.Sprintf("%dm%ss", 60*h+m, sec)
		case step >= 60:
			return formatSeconds(v)
		}
		h, m, sec := hms(a)
		return fmt.Sprintf("%dh%02dm%ss", h, m, sec)
	}
}
