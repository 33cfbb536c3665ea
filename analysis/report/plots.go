package report

import (
	"bytes"
	"fmt"
	"image/color"
	"math"
	"sort"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgsvg"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/telemetry/si"
)

// Colours of the plots: the screen's palette (tui/palette.go), so a series has one colour
// wherever it is drawn: setpoint violet, band grey, measurement orange, model blue; no
// two series told apart only by red against green.
var (
	colPV       = color.RGBA{R: 0xd7, G: 0x5f, B: 0x00, A: 0xff}
	colEnvelope = color.NRGBA{R: 0xf0, G: 0xb0, B: 0x80, A: 0xa0}
	colSP       = color.RGBA{R: 0xaf, G: 0x5f, B: 0xd7, A: 0xff}
	colBand     = color.NRGBA{R: 0x8a, G: 0x8a, B: 0x8a, A: 0x50}
	colBandLine = color.RGBA{R: 0x8a, G: 0x8a, B: 0x8a, A: 0xff}
	colFit      = color.RGBA{R: 0x00, G: 0x5f, B: 0xd7, A: 0xff}
	colDrive    = color.RGBA{R: 0x5a, G: 0x5a, B: 0x5a, A: 0xff}
	colBars     = color.RGBA{R: 0xd7, G: 0x5f, B: 0x00, A: 0xff}
	// palette tells captures apart when they share a plot.
	palette = []color.RGBA{
		{R: 0x1f, G: 0x5f, B: 0xa8, A: 0xff},
		{R: 0xc8, G: 0x3c, B: 0x1e, A: 0xff},
		{R: 0x2e, G: 0x8b, B: 0x3e, A: 0xff},
		{R: 0x8a, G: 0x4f, B: 0xa8, A: 0xff},
		{R: 0xb0, G: 0x7a, B: 0x10, A: 0xff},
	}
)

// chart is one picture of the report: a grid of plots drawn aligned on one canvas.
type chart struct {
	kind    string // overview, zoom, histogram, spectrum, step, ripple
	caption string
	w, h    vg.Length
	grid    [][]*plot.Plot
}

// draw draws the chart on dc.
func (c chart) draw(dc draw.Canvas) {
	if len(c.grid) == 1 && len(c.grid[0]) == 1 {
		c.grid[0][0].Draw(dc)
		return
	}
	tiles := draw.Tiles{Rows: len(c.grid), Cols: len(c.grid[0]), PadY: vg.Points(2)}
	cs := plot.Align(c.grid, tiles, dc)
	for i, row := range c.grid {
		for j, p := range row {
			if p != nil {
				p.Draw(cs[i][j])
			}
		}
	}
}

// svg renders the chart as an SVG element ready to sit inside HTML: the XML prelude is
// dropped and the element gets a role and a label.
func (c chart) svg() (string, error) {
	cv := vgsvg.New(c.w, c.h)
	c.draw(draw.New(cv))
	var buf bytes.Buffer
	if _, err := cv.WriteTo(&buf); err != nil {
		return "", fmt.Errorf("report: svg: %w", err)
	}
	s := buf.String()
	i := strings.Index(s, "<svg")
	if i < 0 {
		return "", fmt.Errorf("report: svg: no svg element")
	}
	s = s[i:]
	label := strings.NewReplacer("&", "&amp;", `"`, "&quot;", "<", "&lt;", ">", "&gt;").Replace(c.caption)
	return `<svg role="img" aria-label="` + label + `"` + s[len("<svg"):], nil
}

// newPlot makes a plot with the house style: title, axis labels, grid, legend on top.
func newPlot(title, x, y string) *plot.Plot {
	p := plot.New()
	for _, f := range []*font.Font{&p.Title.TextStyle.Font, &p.X.Label.TextStyle.Font, &p.Y.Label.TextStyle.Font,
		&p.X.Tick.Label.Font, &p.Y.Tick.Label.Font, &p.Legend.TextStyle.Font} {
		f.Variant = "Sans"
	}
	p.Title.Text = title
	p.Title.TextStyle.Font.Size = vg.Points(11)
	p.X.Label.Text = x
	p.Y.Label.Text = y
	p.X.Label.TextStyle.Font.Size = vg.Points(9)
	p.Y.Label.TextStyle.Font.Size = vg.Points(9)
	p.X.Tick.Label.Font.Size = vg.Points(8)
	p.Y.Tick.Label.Font.Size = vg.Points(8)
	p.X.Tick.Marker = niceTicks{}
	p.Y.Tick.Marker = niceTicks{}
	p.Legend.Top = true
	p.Legend.TextStyle.Font.Size = vg.Points(8)
	g := plotter.NewGrid()
	g.Vertical.Color = color.Gray{Y: 0xe0}
	g.Horizontal.Color = color.Gray{Y: 0xe0}
	p.Add(g)
	return p
}

// xys pairs x and y, dropping points where either is not finite. Extra values of the
// longer slice are ignored.
func xys(x, y []float64, fx func(float64) float64) plotter.XYs {
	n := min(len(x), len(y))
	pts := make(plotter.XYs, 0, n)
	for i := 0; i < n; i++ {
		xv := x[i]
		if fx != nil {
			xv = fx(xv)
		}
		if finite(xv) && finite(y[i]) {
			pts = append(pts, plotter.XY{X: xv, Y: y[i]})
		}
	}
	return pts
}

// line makes a line plotter, nil when there are fewer than two points.
func line(pts plotter.XYs, c color.Color, width vg.Length, dashes ...vg.Length) *plotter.Line {
	if len(pts) < 2 {
		return nil
	}
	l, err := plotter.NewLine(pts)
	if err != nil {
		return nil
	}
	l.Color = c
	l.Width = width
	l.Dashes = dashes
	return l
}

// timeScale picks a display unit for a time span in seconds.
func timeScale(span float64) (scale float64, unit string) {
	switch a := math.Abs(span); {
	case a > 0 && a < 2e-3:
		return 1e6, "µs"
	case a > 0 && a < 2:
		return 1e3, "ms"
	}
	return 1, "s"
}

// lsb returns the volts per count from the board's meta, or false.
func lsb(s *analysis.Summary) (float64, bool) {
	b := s.Board
	if b.VrefV == nil || b.ADCBits == nil || *b.ADCBits <= 0 || *b.ADCBits > 32 || !finite(*b.VrefV) || *b.VrefV <= 0 {
		return 0, false
	}
	return *b.VrefV / math.Ldexp(1, *b.ADCBits), true
}

// levelUnit is the unit name of the traces' values.
func levelUnit(tr *analysis.Traces) string {
	if tr.Volts {
		return "V"
	}
	return "counts"
}

// segmentLevel returns a segment's setpoint and deadband half-width in the traces' unit.
func segmentLevel(s *analysis.Summary, g analysis.Segment) (sp, db float64, hasDB bool) {
	db = math.NaN()
	dbc := g.DeadbandCounts
	if dbc == nil {
		dbc = s.Board.DeadbandCounts
	}
	if !s.Traces.Volts {
		if dbc != nil {
			db = *dbc
		}
		return g.SetpointCounts, db, dbc != nil
	}
	q, ok := lsb(s)
	switch {
	case g.SetpointV != nil:
		sp = *g.SetpointV
	case ok:
		sp = g.SetpointCounts * q
	default:
		sp = math.NaN()
	}
	if dbc != nil && ok {
		db = *dbc * q
	}
	return sp, db, dbc != nil && ok && finite(sp)
}

// overviewChart is the setpoint and the measurement over the whole capture with the
// deadband and the min/max envelope of the measurement.
func overviewChart(s *analysis.Summary, title string) (chart, bool) {
	tr := s.Traces
	if tr == nil || len(tr.T) < 2 || len(tr.PV) < 2 {
		return chart{}, false
	}
	p := newPlot(title, "time (s)", "level ("+levelUnit(tr)+")")
	// The deadband: one rectangle per segment.
	var rings []plotter.XYs
	for _, g := range s.Segments {
		sp, db, ok := segmentLevel(s, g)
		if !ok || !finite(db) || g.EndS <= g.StartS {
			continue
		}
		rings = append(rings, plotter.XYs{{X: g.StartS, Y: sp - db}, {X: g.EndS, Y: sp - db}, {X: g.EndS, Y: sp + db}, {X: g.StartS, Y: sp + db}})
	}
	if len(rings) > 0 {
		rs := make([]plotter.XYer, len(rings))
		for i := range rings {
			rs[i] = rings[i]
		}
		if band, err := plotter.NewPolygon(rs...); err == nil {
			band.Color = colBand
			band.LineStyle.Width = 0
			p.Add(band)
			p.Legend.Add("deadband", band)
		}
	}
	// The envelope of pv in each bucket.
	if n := min(len(tr.T), len(tr.PVMin), len(tr.PVMax)); n > 1 {
		env := make(plotter.XYs, 0, 2*n)
		for i := 0; i < n; i++ {
			if finite(tr.T[i]) && finite(tr.PVMax[i]) && finite(tr.PVMin[i]) {
				env = append(env, plotter.XY{X: tr.T[i], Y: tr.PVMax[i]})
			}
		}
		for i := n - 1; i >= 0; i-- {
			if finite(tr.T[i]) && finite(tr.PVMax[i]) && finite(tr.PVMin[i]) {
				env = append(env, plotter.XY{X: tr.T[i], Y: tr.PVMin[i]})
			}
		}
		if len(env) > 2 {
			if poly, err := plotter.NewPolygon(env); err == nil {
				poly.Color = colEnvelope
				poly.LineStyle.Width = 0
				p.Add(poly)
				p.Legend.Add("measurement min–max", poly)
			}
		}
	}
	if l := line(xys(tr.T, tr.SP, nil), colSP, vg.Points(1), vg.Points(4), vg.Points(2)); l != nil {
		l.StepStyle = plotter.PostStep
		p.Add(l)
		p.Legend.Add("setpoint", l)
	}
	pv := line(xys(tr.T, tr.PV, nil), colPV, vg.Points(1))
	if pv == nil {
		return chart{}, false
	}
	p.Add(pv)
	p.Legend.Add("measurement", pv)
	headroom(p)
	return chart{kind: "overview", caption: title, w: 26 * vg.Centimeter, h: 9 * vg.Centimeter, grid: [][]*plot.Plot{{p}}}, true
}

// headroom raises the top of the y axis by a fifth of its range so that the legend,
// drawn in the top right corner, does not hide the data.
func headroom(p *plot.Plot) {
	if r := p.Y.Max - p.Y.Min; r > 0 && finite(r) {
		p.Y.Max += 0.2 * r
	}
}

// driveTicks label the drive axis.
var driveTicks = plot.ConstantTicks{{Value: -1, Label: "discharge"}, {Value: 0, Label: "hold"}, {Value: 1, Label: "charge"}}

// zoomChart is a short full-rate window of one segment's steady part: the measurement
// with the setpoint and the band above, the drive below.
func zoomChart(s *analysis.Summary, z analysis.ZoomTrace) (chart, bool) {
	z = trimZoom(z)
	if len(z.T) < 2 || len(z.PV) < 2 {
		return chart{}, false
	}
	t0 := z.T[0]
	scale, unit := timeScale(z.T[len(z.T)-1] - t0)
	fx := func(t float64) float64 { return (t - t0) * scale }
	title := fmt.Sprintf("Segment %d, steady ripple", z.Segment+1)
	if len(chargeOnsets(z.U)) > 0 {
		title = fmt.Sprintf("Segment %d, %d limit cycles", z.Segment+1, zoomCycles)
	}
	var sp, db float64 = math.NaN(), math.NaN()
	hasBand := false
	if z.Segment >= 0 && z.Segment < len(s.Segments) {
		g := s.Segments[z.Segment]
		sp, db, hasBand = segmentLevel(s, g)
		title += " at setpoint " + setpointText(g)
	}
	xlabel := fmt.Sprintf("time (%s) from %s", unit, si.Format(t0, "s"))
	top := newPlot(title, "", "level ("+levelUnit(s.Traces)+")")
	pts := xys(z.T, z.PV, fx)
	pv := line(pts, colPV, vg.Points(1))
	if pv == nil {
		return chart{}, false
	}
	x0, x1 := pts[0].X, pts[len(pts)-1].X
	if finite(sp) {
		if l := line(plotter.XYs{{X: x0, Y: sp}, {X: x1, Y: sp}}, colSP, vg.Points(1), vg.Points(4), vg.Points(2)); l != nil {
			top.Add(l)
			top.Legend.Add("setpoint", l)
		}
	}
	if hasBand && finite(db) {
		for i, y := range []float64{sp - db, sp + db} {
			if l := line(plotter.XYs{{X: x0, Y: y}, {X: x1, Y: y}}, colBandLine, vg.Points(0.8), vg.Points(2), vg.Points(2)); l != nil {
				top.Add(l)
				if i == 0 {
					top.Legend.Add("deadband", l)
				}
			}
		}
	}
	top.Add(pv)
	top.Legend.Add("measurement", pv)
	headroom(top)
	grid := [][]*plot.Plot{{top}}
	h := 8 * vg.Centimeter
	if u := line(xys(z.T, z.U, fx), colDrive, vg.Points(1)); u != nil {
		u.StepStyle = plotter.PostStep
		bottom := newPlot("", xlabel, "drive")
		bottom.Y.Min, bottom.Y.Max = -1.3, 1.3
		bottom.Y.Tick.Marker = driveTicks
		bottom.Add(u)
		grid = append(grid, []*plot.Plot{bottom})
		h = 11 * vg.Centimeter
	} else {
		top.X.Label.Text = xlabel
	}
	return chart{kind: "zoom", caption: title, w: 18 * vg.Centimeter, h: h, grid: grid}, true
}

// zoomCycles is how many limit cycles a zoom shows.
const zoomCycles = 3

// chargeOnsets returns the indices where the drive turns to charge.
func chargeOnsets(u []float64) []int {
	var on []int
	for i := 1; i < len(u); i++ {
		if u[i] > 0.5 && u[i-1] <= 0.5 {
			on = append(on, i)
		}
	}
	return on
}

// trimZoom cuts a zoom window to zoomCycles limit cycles, from one charge onset to the
// one zoomCycles later, keeping at least 20 samples. Without the drive, or with too few
// onsets, the window is left as it is.
func trimZoom(z analysis.ZoomTrace) analysis.ZoomTrace {
	n := min(len(z.T), len(z.PV), len(z.U))
	on := chargeOnsets(z.U[:n])
	if len(on) <= zoomCycles {
		return z
	}
	from := on[0]
	to := min(max(on[zoomCycles]+1, from+20), n)
	z.T, z.PV, z.U = z.T[from:to], z.PV[from:to], z.U[from:to]
	return z
}

// zoomsBySetpoint picks, for each distinct setpoint, the zoom of the segment with the
// most steady samples, in the order the setpoints first appear; repeated visits to one
// setpoint would only repeat the picture.
func zoomsBySetpoint(s *analysis.Summary) []analysis.ZoomTrace {
	best := map[float64]int{}
	var order []float64
	steady := func(z analysis.ZoomTrace) int64 {
		if z.Segment >= 0 && z.Segment < len(s.Segments) {
			return s.Segments[z.Segment].SteadySamples
		}
		return -1
	}
	sp := func(z analysis.ZoomTrace) float64 {
		if z.Segment >= 0 && z.Segment < len(s.Segments) {
			return s.Segments[z.Segment].SetpointCounts
		}
		return math.NaN()
	}
	var out []analysis.ZoomTrace
	for i, z := range s.Traces.Zoom {
		k := sp(z)
		if math.IsNaN(k) {
			out = append(out, z) // no segment to group it with: keep it
			continue
		}
		j, ok := best[k]
		if !ok {
			best[k] = i
			order = append(order, k)
		} else if steady(z) > steady(s.Traces.Zoom[j]) {
			best[k] = i
		}
	}
	for _, k := range order {
		out = append(out, s.Traces.Zoom[best[k]])
	}
	sort.SliceStable(out, func(a, b int) bool { return out[a].Segment < out[b].Segment })
	return out
}
