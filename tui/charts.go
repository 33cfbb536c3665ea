package tui

import (
	"fmt"
	"math"
	"strings"

	tea "github.com/charmbracelet/bubbletea"
	"github.com/guptarohit/asciigraph"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/telemetry/si"
)

// ChartKind picks what a ChartModel draws.
type ChartKind int

// Chart kinds: the error histogram, the ripple spectrum, the last step response.
const (
	ChartSpread ChartKind = iota
	ChartRipple
	ChartStep
)

// ChartModel draws one of the summary's bounded traces: the error histogram, the ripple
// spectrum or the last step response with its fitted exponential.
type ChartModel struct {
	kind   ChartKind
	sum    *analysis.Summary
	color  bool
	width  int
	height int
}

// NewChart returns a chart model of the given kind.
func NewChart(kind ChartKind, color bool) ChartModel { return ChartModel{kind: kind, color: color} }

// SetSize sets the chart size.
func (m *ChartModel) SetSize(width, height int) { m.width, m.height = width, height }

// Update takes summary snapshots.
func (m ChartModel) Update(msg tea.Msg) (ChartModel, tea.Cmd) {
	if msg, ok := msg.(snapshotMsg); ok && msg.summary != nil {
		m.sum = msg.summary
	}
	return m, nil
}

// View renders the chart.
func (m ChartModel) View() string {
	var tr *analysis.Traces
	if m.sum != nil {
		tr = m.sum.Traces
	}
	switch m.kind {
	case ChartSpread:
		if tr == nil {
			return fitBlock("error spread: no steady data yet", m.width, m.height)
		}
		return RenderHistogram(tr.ErrBins, tr.ErrHist, m.width, m.height)
	case ChartRipple:
		if tr == nil {
			return fitBlock("ripple spectrum: no steady data yet", m.width, m.height)
		}
		return RenderSpectrum(tr.SpecFreq, tr.SpecAmp, m.width, m.height, m.color)
	}
	if tr == nil || len(tr.StepTraces) == 0 {
		if m.sum != nil && len(m.sum.Steps) > 0 {
			f := m.sum.Steps[len(m.sum.Steps)-1]
			return fitBlock(wrapLines([]string{fmt.Sprintf("last step at %s: %s → %s  rise %s  settle %s  overshoot %s",
				formatSeconds(f.AtS), fmtSI(f.FromV, "V"), fmtSI(f.ToV, "V"), fmtSI(f.RiseS, "s"), fmtSI(f.SettleS, "s"), fmtSI(f.OvershootV, "V")),
				"(the analysis kept no waveform of this step to draw)"}, m.width), m.width, m.height)
		}
		return fitBlock("last step: no setpoint step seen yet", m.width, m.height)
	}
	st := tr.StepTraces[len(tr.StepTraces)-1]
	var fig *analysis.StepFigures
	if st.Step >= 0 && st.Step < len(m.sum.Steps) {
		fig = &m.sum.Steps[st.Step]
	}
	return RenderStep(st, fig, tr.Volts, m.width, m.height, m.color)
}

// RenderHistogram draws the error histogram as horizontal bars, one row per bin (bins
// merged in groups when there are more than rows), with the bin centre in counts and the
// sample count. It is a pure function of its arguments.
func RenderHistogram(bins, counts []float64, width, height int) string {
	n := len(bins)
	if len(counts) < n {
		n = len(counts)
	}
	if n == 0 || height < 3 {
		return fitBlock("error spread: no steady data yet", width, height)
	}
	// Trim empty bins at both ends.
	lo, hi := 0, n-1
	for lo < hi && counts[lo] == 0 {
		lo++
	}
	for hi > lo && counts[hi] == 0 {
		hi--
	}
	rows := height - 1
	group := (hi - lo + rows) / rows
	type bar struct{ centre, count float64 }
	var bars []bar
	for i := lo; i <= hi; i += group {
		var c, wsum, csum float64
		for j := i; j < i+group && j <= hi; j++ {
			c += counts[j]
			wsum += bins[j] * counts[j]
			csum += bins[j]
		}
		centre := csum / float64(min(group, hi-i+1))
		if c > 0 {
			centre = wsum / c
		}
		bars = append(bars, bar{centre, c})
	}
	var max, total float64
	for _, b := range bars {
		max = math.Max(max, b.count)
		total += b.count
	}
	barW := width - 22
	if barW < 5 {
		barW = 5
	}
	var b strings.Builder
	fmt.Fprintf(&b, "error spread over steady parts (pv - sp, counts), %.0f samples", total)
	for _, r := range bars {
		w := 0
		if max > 0 {
			w = int(math.Round(r.count / max * float64(barW)))
		}
		fmt.Fprintf(&b, "\n%7.1f │%s %.0f", r.centre, strings.Repeat("█", w), r.count)
	}
	return fitBlock(b.String(), width, height)
}

// RenderSpectrum draws the ripple amplitude spectrum (counts against Hz) with the
// strongest line named in the title. It is a pure function of its arguments.
func RenderSpectrum(freq, amp []float64, width, height int, color bool) string {
	n := min(len(freq), len(amp))
	if n < 2 || height < 6 || width < 30 {
		return fitBlock("ripple spectrum: no steady data yet", width, height)
	}
	peak := 1
	for i := 1; i < n; i++ {
		if amp[i] > amp[peak] {
			peak = i
		}
	}
	title := fmt.Sprintf("ripple spectrum (amplitude, counts): strongest %s at %s",
		fmtFloat(amp[peak]), si.Format(freq[peak], "Hz"))
	plotW := width - 13
	col := make([]float64, plotW)
	for i := range col {
		col[i] = math.NaN()
	}
	f0, f1 := freq[0], freq[n-1]
	for i := 0; i < n; i++ {
		c := int((freq[i] - f0) / (f1 - f0) * float64(plotW-1))
		if c < 0 || c >= plotW {
			continue
		}
		if math.IsNaN(col[c]) || amp[i] > col[c] {
			col[c] = amp[i]
		}
	}
	fillGaps(col)
	opts := []asciigraph.Option{
		asciigraph.Height(height - 5), asciigraph.Offset(2), asciigraph.Precision(2),
		asciigraph.YAxisValueFormatter(func(v float64) string { return fmt.Sprintf("%7.2f", v) }),
		asciigraph.XAxisRange(f0, f1), asciigraph.XAxisTickCount(tickCount(plotW)),
		asciigraph.XAxisValueFormatter(func(v float64) string { return si.Format(v, "Hz") }),
	}
	if color {
		opts = append(opts, asciigraph.SeriesColors(colourPV), asciigraph.AxisColor(colourAxis), asciigraph.LabelColor(colourAxis))
	}
	return fitBlock(title+"\n"+asciigraph.Plot(col, opts...), width, height)
}

// fillGaps repeats the previous value into empty columns so the line stays connected.
func fillGaps(col []float64) {
	last := math.NaN()
	for i, v := range col {
		if math.IsNaN(v) {
			col[i] = last
		} else {
			last = v
		}
	}
}

func fmtFloat(v float64) string {
	if math.Abs(v) >= 100 {
		return fmt.Sprintf("%.0f", v)
	}
	return fmt.Sprintf("%.2f", v)
}

// RenderStep draws the last step response with the fitted exponential over it, and the
// step's figures on the title line. It is a pure function of its arguments.
func RenderStep(st analysis.StepTrace, fig *analysis.StepFigures, volts bool, width, height int, color bool) string {
	n := min(len(st.T), len(st.PV), len(st.Fitted))
	if n < 2 || height < 6 || width < 30 {
		return fitBlock("last step: no setpoint step seen yet", width, height)
	}
	unit := "V"
	if !volts {
		unit = "counts"
	}
	title := "last step: pv ─ and fitted exponential ┄ (" + unit + ")"
	if fig != nil {
		title += fmt.Sprintf("  %s → %s  rise %s  settle %s  overshoot %s",
			fmtSI(fig.FromV, "V"), fmtSI(fig.ToV, "V"), fmtSI(fig.RiseS, "s"), fmtSI(fig.SettleS, "s"), fmtSI(fig.OvershootV, "V"))
	}
	plotW := width - 13
	pv := make([]float64, plotW)
	fit := make([]float64, plotW)
	for i := range pv {
		pv[i], fit[i] = math.NaN(), math.NaN()
	}
	t0, t1 := st.T[0], st.T[n-1]
	for i := 0; i < n; i++ {
		c := int((st.T[i] - t0) / (t1 - t0) * float64(plotW-1))
		if c < 0 || c >= plotW {
			continue
		}
		pv[c], fit[c] = st.PV[i], st.Fitted[i]
	}
	fillGaps(pv)
	fillGaps(fit)
	opts := []asciigraph.Option{
		asciigraph.Height(height - 5), asciigraph.Offset(2), asciigraph.Precision(3),
		asciigraph.YAxisValueFormatter(func(v float64) string { return fmt.Sprintf("%7.3f", v) }),
		asciigraph.SeriesChars(asciigraph.CreateCharSet("┄"), asciigraph.DefaultCharSet),
		asciigraph.XAxisRange(0, t1-t0), asciigraph.XAxisTickCount(tickCount(plotW)),
		asciigraph.XAxisValueFormatter(func(v float64) string { return si.Format(v, "s") }),
	}
	if color {
		opts = append(opts, asciigraph.SeriesColors(colourSP, colourPV), asciigraph.AxisColor(colourAxis), asciigraph.LabelColor(colourAxis))
	}
	return fitBlock(wrapLines([]string{title}, width)+"\n"+asciigraph.PlotMany([][]float64{fit, pv}, opts...), width, height)
}
