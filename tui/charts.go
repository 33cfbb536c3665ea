package tui

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	tea "github.com/charmbracelet/bubbletea"
	"github.com/guptarohit/asciigraph"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/figure"
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
	if msg, ok := msg.(frameMsg); ok && msg.summary != nil {
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
		out := RenderHistogram(tr.ErrBins, tr.ErrHist, m.width, m.height)
		if m.color {
			out = paintBars(out)
		}
		return out
	case ChartRipple:
		if tr == nil {
			return fitBlock("ripple spectrum: no steady data yet", m.width, m.height)
		}
		return renderSpectrum(tr.SpecFreq, tr.SpecAmp, m.width, m.height, m.color, m.sum.SamplePeriodS == nil)
	}
	if tr == nil || len(tr.StepTraces) == 0 {
		if m.sum != nil && len(m.sum.Steps) > 0 {
			f := m.sum.Steps[len(m.sum.Steps)-1]
			return fitBlock(wrapLines([]string{fmt.Sprintf("last step at %s: %s → %s  rise %s  settle %s  overshoot %s",
				formatSeconds(f.AtS), figure.SI(f.FromV, "V"), figure.SI(f.ToV, "V"), figure.SI(f.RiseS, "s"), figure.SI(f.SettleS, "s"), figure.SI(f.OvershootV, "V")),
				"(the analysis kept no waveform of this step to draw)"}, m.width), m.width, m.height)
		}
		return fitBlock("last step: no setpoint step seen yet", m.width, m.height)
	}
	st := tr.StepTraces[len(tr.StepTraces)-1]
	return renderStep(st, stepFigures(m.sum, st), tr.Volts, m.width, m.height, m.color, m.sum.SamplePeriodS == nil)
}

// stepFigures finds the figures of the step a trace shows: the step that starts at the
// trace's first sample (StepTrace.Step numbers segments, not steps). Nil when none does.
func stepFigures(s *analysis.Summary, st analysis.StepTrace) *analysis.StepFigures {
	if s == nil || len(st.T) < 2 {
		return nil
	}
	tol := math.Abs(st.T[1]-st.T[0]) / 2
	var best *analysis.StepFigures
	for i := range s.Steps {
		if d := math.Abs(s.Steps[i].AtS - st.T[0]); d <= tol && (best == nil || d < math.Abs(best.AtS-st.T[0])) {
			best = &s.Steps[i]
		}
	}
	return best
}

// RenderHistogram draws the error histogram as horizontal bars, one row per bin (bins
// merged in groups when there are more than rows, labelled with their range), with the
// error in counts and the sample count. It is a pure function of its arguments.
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
	type bar struct {
		label string
		count float64
	}
	var bars []bar
	for i := lo; i <= hi; i += group {
		var c float64
		j := min(i+group-1, hi)
		for k := i; k <= j; k++ {
			c += counts[k]
		}
		// One bin: its value in counts; merged bins: their range.
		label := fmtBin(bins[i])
		if j > i {
			label = fmtBin(bins[i]) + "…" + fmtBin(bins[j])
		}
		bars = append(bars, bar{label, c})
	}
	var most, total float64
	for _, b := range bars {
		most = math.Max(most, b.count)
		total += b.count
	}
	labW := 0
	for _, r := range bars {
		labW = max(labW, len([]rune(r.label)))
	}
	labW = max(labW, 7)
	barW := max(width-labW-15, 5)
	var b strings.Builder
	b.WriteString("error spread over steady parts (pv - sp, counts), " + figure.CountText(fmt.Sprintf("%.0f", total), "sample"))
	for _, r := range bars {
		bar := ""
		if most > 0 {
			bar = strings.Repeat("█", int(math.Round(r.count/most*float64(barW))))
		}
		if bar == "" && r.count > 0 {
			bar = "▏" // a few samples: visible, not zero
		}
		fmt.Fprintf(&b, "\n%*s │%s %.0f", labW, r.label, bar, r.count)
	}
	return fitBlock(b.String(), width, height)
}

// fmtBin writes a histogram bin value in counts: whole counts without decimals.
func fmtBin(v float64) string {
	if v == math.Trunc(v) {
		return fmt.Sprintf("%.0f", v)
	}
	return fmt.Sprintf("%.1f", v)
}

// RenderSpectrum draws the ripple amplitude spectrum (counts against Hz) with the
// strongest line named in the title. It is a pure function of its arguments.
func RenderSpectrum(freq, amp []float64, width, height int, color bool) string {
	return renderSpectrum(freq, amp, width, height, color, false)
}

// plainFormat writes an axis value without a unit (samples, cycles per sample: the
// title names the unit when the sample period is unknown).
func plainFormat(v float64) string { return strconv.FormatFloat(v, 'g', 3, 64) }

// renderSpectrum is RenderSpectrum; perSample: freq is in cycles per sample (the sample
// period is unknown).
func renderSpectrum(freq, amp []float64, width, height int, color, perSample bool) string {
	xfmt := func(v float64) string { return si.Format(v, "Hz") }
	unit := ""
	if perSample {
		xfmt, unit = plainFormat, " cycles/sample"
	}
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
		fmtFloat(amp[peak]), xfmt(freq[peak])+unit)
	plotW := width - 13
	col := make([]float64, plotW)
	for i := range col {
		col[i] = math.NaN()
	}
	// The axis starts at 0 Hz and ends on a round frequency at or above the last line.
	top, ticks := niceAxis(freq[n-1], tickCount(plotW)-1)
	for i := 0; i < n; i++ {
		c := int(math.Round(freq[i] / top * float64(plotW-1)))
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
		asciigraph.XAxisRange(0, top), asciigraph.XAxisTickCount(ticks + 1),
		asciigraph.XAxisValueFormatter(xfmt),
	}
	if color {
		opts = append(opts, asciigraph.SeriesColors(colourPV), asciigraph.AxisColor(colourAxis), asciigraph.LabelColor(colourAxis))
	}
	return fitBlock(title+"\n"+plainAxis(asciigraph.Plot(col, opts...)), width, height)
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

// stepMinSamples is the fewest samples the step plot shows when it zooms onto the rise.
const stepMinSamples = 48

// RenderStep draws the last step response: the samples of pv as dots over the response
// of the identified plant driven by the same recorded drives (the fitted model) as a
// line, with the step's figures under the title. The time axis runs from the step to
// four settling times (at least stepMinSamples samples, at most the whole trace) so the
// rise fills the plot. Dots stand at least two columns apart (samples in between are
// left out) so the line stays visible between them whatever the colours. It is a pure
// function of its arguments.
func RenderStep(st analysis.StepTrace, fig *analysis.StepFigures, volts bool, width, height int, color bool) string {
	return renderStep(st, fig, volts, width, height, color, false)
}

// renderStep is RenderStep; perSample: st.T counts samples (the sample period is unknown).
func renderStep(st analysis.StepTrace, fig *analysis.StepFigures, volts bool, width, height int, color, perSample bool) string {
	xfmt := func(v float64) string { return si.Format(v, "s") }
	if perSample {
		xfmt = plainFormat
	}
	n := min(len(st.T), len(st.PV))
	if n < 2 || height < 6 || width < 30 {
		return fitBlock("last step: no setpoint step seen yet", width, height)
	}
	hasFit := len(st.Fitted) >= n
	unit := "V"
	if !volts {
		unit = "counts"
	}
	title := "last step (" + unit + "): pv samples •, fitted model ─ (identified plant, same drives)"
	if !hasFit {
		title = "last step (" + unit + "): pv ─ (no fitted model yet: the plant is not identified)"
	}
	lines := []string{title}
	if perSample {
		lines = append(lines, "time in samples (the sample period is unknown)")
	}
	if fig != nil {
		lines = append(lines, fmt.Sprintf("step at %s: %s → %s  rise %s  settle %s  overshoot %s", formatSeconds(fig.AtS),
			figure.SI(fig.FromV, "V"), figure.SI(fig.ToV, "V"), figure.SI(fig.RiseS, "s"), figure.SI(fig.SettleS, "s"), figure.SI(fig.OvershootV, "V")))
	}
	head := wrapLines(lines, width)
	headRows := strings.Count(head, "\n") + 1
	t0 := st.T[0]
	// Zoom onto the rise: four settling times, never fewer than stepMinSamples samples.
	last := n - 1
	if fig != nil && fig.SettleS != nil && *fig.SettleS > 0 {
		end := t0 + 4**fig.SettleS
		k := last
		for k > 0 && st.T[k] > end {
			k--
		}
		last = min(max(k, stepMinSamples-1), n-1)
	}
	if !(st.T[last] > t0) {
		return fitBlock(head+"\n(the step trace has no time span)", width, height)
	}
	plotW := width - 13
	// The axis ends on a round time; the samples up to it are drawn.
	span, ticks := niceAxis(st.T[last]-t0, tickCount(plotW)-1)
	for last < n-1 && st.T[last+1]-t0 <= span {
		last++
	}
	t1 := t0 + span
	pv := make([]float64, plotW)
	fit := make([]float64, plotW)
	for i := range pv {
		pv[i], fit[i] = math.NaN(), math.NaN()
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	line := fit
	for i := 0; i <= last; i++ {
		c := int(math.Round((st.T[i] - t0) / (t1 - t0) * float64(plotW-1)))
		if c < 0 || c >= plotW {
			continue
		}
		pv[c] = st.PV[i]
		lo, hi = math.Min(lo, st.PV[i]), math.Max(hi, st.PV[i])
		if hasFit {
			fit[c] = st.Fitted[i]
			lo, hi = math.Min(lo, st.Fitted[i]), math.Max(hi, st.Fitted[i])
		}
	}
	if !hasFit {
		line = pv
	}
	fillGaps(line)
	prec := uint(3)
	yfmt := "%7.3f"
	if !volts {
		prec, yfmt = 0, "%7.0f"
	}
	rowsH := max(height-3-headRows, 2)
	out := asciigraph.Plot(line,
		asciigraph.Height(rowsH), asciigraph.Offset(2), asciigraph.Precision(prec),
		asciigraph.LowerBound(lo), asciigraph.UpperBound(hi),
		asciigraph.YAxisValueFormatter(func(v float64) string { return fmt.Sprintf(yfmt, v) }),
		asciigraph.XAxisRange(0, span), asciigraph.XAxisTickCount(ticks+1),
		asciigraph.XAxisValueFormatter(xfmt),
	)
	grid := strings.Split(plainAxis(out), "\n")
	if hasFit {
		overlayDots(grid, pv, lo, hi, rowsH)
	}
	if color {
		colourStep(grid)
		if hasFit {
			head = strings.Replace(head, "•", paint(colourPV, "•"), 1)
			head = strings.Replace(head, "model ─", "model "+paint(colourFit, "─"), 1)
		}
	}
	return fitBlock(head+"\n"+strings.Join(grid, "\n"), width, height)
}

// overlayDots puts a • for each sample of pv (NaN: none) on a plain asciigraph plot of
// the same columns and bounds, using asciigraph's row arithmetic (rows = height, value v
// on row round(v·ratio) − round(lo·ratio) from the bottom). Dots stand at least two
// columns apart (samples in between are left out) so the line shows between them.
func overlayDots(grid []string, pv []float64, lo, hi float64, height int) {
	ratio := 1.0
	if hi > lo {
		ratio = float64(height) / (hi - lo)
	}
	min2 := int(math.Round(lo * ratio))
	rows := int(math.Abs(float64(int(math.Round(hi*ratio)) - min2)))
	if rows >= len(grid) {
		return
	}
	lastDot := -2
	for x, v := range pv {
		if math.IsNaN(v) || x < lastDot+2 {
			continue
		}
		r := rows - (int(math.Round(v*ratio)) - min2)
		if r < 0 || r > rows {
			continue
		}
		line := []rune(grid[r])
		axis := strings.IndexFunc(string(line), func(c rune) bool { return c == '┤' || c == '┼' })
		if axis < 0 {
			continue
		}
		axis = len([]rune(string(line)[:axis]))
		// Point x sits between asciigraph's segments x-1 and x; draw it on segment x-1
		// (the first point on the first segment).
		c := axis + max(x, 1)
		for len(line) <= c {
			line = append(line, ' ')
		}
		line[c] = '•'
		grid[r] = string(line)
		lastDot = x
	}
}

// colourStep colours a plain step plot: labels and axes grey, the model line and pv dots
// in their series colours.
func colourStep(grid []string) {
	for i, l := range grid {
		r := []rune(l)
		axis := -1
		for j, c := range r {
			if c == '┤' || c == '┼' {
				axis = j
				break
			}
		}
		if axis < 0 {
			grid[i] = paint(colourAxis, l)
			continue
		}
		var b strings.Builder
		b.WriteString(paint(colourAxis, string(r[:axis+1])))
		for j := axis + 1; j < len(r); {
			k := j
			dot := r[j] == '•'
			for k < len(r) && (r[k] == '•') == dot {
				k++
			}
			if dot {
				b.WriteString(paint(colourPV, string(r[j:k])))
			} else {
				b.WriteString(paint(colourFit, string(r[j:k])))
			}
			j = k
		}
		grid[i] = b.String()
	}
}

// niceAxis picks the end of an axis that starts at 0 and must reach span: a multiple of
// a 1, 2, 2.5 or 5 × 10^k tick step, with at most maxIntervals intervals (at least 2
// when allowed), as near span as it can. It returns the end and the interval count.
func niceAxis(span float64, maxIntervals int) (top float64, intervals int) {
	if !(span > 0) || math.IsInf(span, 0) {
		return 1, max(maxIntervals, 1)
	}
	maxIntervals = max(maxIntervals, 1)
	minIntervals := min(2, maxIntervals)
	top = math.Inf(1)
	e := math.Pow(10, math.Floor(math.Log10(span/float64(maxIntervals))))
	for _, scale := range []float64{e, e * 10} {
		for _, m := range []float64{1, 2, 2.5, 5} {
			step := m * scale
			k := int(math.Ceil(span/step - 1e-9))
			k = max(k, minIntervals)
			if k > maxIntervals {
				continue
			}
			t := step * float64(k)
			if t < top*(1-1e-9) || (math.Abs(t-top) <= 1e-9*top && k > intervals) {
				top, intervals = t, k
			}
		}
	}
	if math.IsInf(top, 1) {
		return span, maxIntervals
	}
	return top, intervals
}

// paintBars colours the bars of a histogram (runs of █ and ▏) in the measurement's colour.
func paintBars(s string) string {
	lines := strings.Split(s, "\n")
	for i, l := range lines {
		start := strings.IndexAny(l, "█▏")
		if start < 0 {
			continue
		}
		end := start
		for end < len(l) {
			r := []rune(l[end:])[0]
			if r != '█' && r != '▏' {
				break
			}
			end += len(string(r))
		}
		lines[i] = l[:start] + paint(colourPV, l[start:end]) + l[end:]
	}
	return strings.Join(lines, "\n")
}
