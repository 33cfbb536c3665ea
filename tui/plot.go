package tui

import (
	"fmt"
	"math"
	"strings"

	"github.com/guptarohit/asciigraph"
)

// Mark is a moment shown on the plot as a dotted vertical line with a short label.
type Mark struct {
	T     float64 // seconds, same clock as Point.T
	Label string  // sanitised, short
}

// Window is what one plot shows: the points of a time span, the marks in it and the units.
type Window struct {
	From, To float64 // time span, s
	Points   []Point // in time order, inside [From, To)
	Marks    []Mark
	Volts    bool // values are volts (else counts)
	Color    bool // colour the series (false under NO_COLOR and in golden tests)
}

// Series colours (ANSI 256) when colour is on.
var (
	colourSP   = asciigraph.Goldenrod
	colourBand = asciigraph.DimGray
	colourPV   = asciigraph.DeepSkyBlue
	colourAxis = asciigraph.Gray
)

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
			r := []rune(lines[i])
			if pad+c < len(r) && r[pad+c] == ' ' {
				r[pad+c] = '┊'
				lines[i] = string(r)
			}
		}
		lab := []rune("▲" + mk.Label)
		for j, ch := range lab {
			if pad+c+j < width {
				labels[pad+c+j] = ch
			}
		}
	}
	legend := fmt.Sprintf("sp ─ band ┄ pv (%s)", unit)
	if strings.TrimSpace(string(labels)) == "" {
		lines = append(lines, padRight(legend, width))
	} else {
		lines = append(lines, string(labels))
	}
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
	chars := []asciigraph.CharSet{asciigraph.CreateCharSet("┄"), asciigraph.CreateCharSet("┄"), asciigraph.DefaultCharSet, asciigraph.DefaultCharSet}
	colours := []asciigraph.AnsiColor{colourBand, colourBand, colourSP, colourPV}
	if several {
		series = append(series, pvMax)
		chars = append(chars, asciigraph.DefaultCharSet)
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
		asciigraph.XAxisValueFormatter(func(v float64) string { return formatSeconds(v) }),
	}
	if w.Color {
		opts = append(opts, asciigraph.SeriesColors(colours...), asciigraph.AxisColor(colourAxis), asciigraph.LabelColor(colourAxis))
	}
	return asciigraph.PlotMany(series, opts...)
}

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
