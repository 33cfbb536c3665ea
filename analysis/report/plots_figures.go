package report

import (
	"fmt"
	"image/color"
	"math"
	"sort"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/telemetry/si"
)

// Histogram, spectrum, step and ripple charts: the figures beside the traces.

// histogramChart is the distribution of the error pv - sp over the steady parts.
func histogramChart(s *analysis.Summary) (chart, bool) {
	tr := s.Traces
	if tr == nil {
		return chart{}, false
	}
	n := min(len(tr.ErrBins), len(tr.ErrHist))
	if n == 0 {
		return chart{}, false
	}
	width := 1.0
	if n > 1 {
		width = math.Inf(1)
		for i := 1; i < n; i++ {
			if d := tr.ErrBins[i] - tr.ErrBins[i-1]; d > 0 && d < width {
				width = d
			}
		}
		if math.IsInf(width, 1) {
			width = 1
		}
	}
	h := &plotter.Histogram{Width: width, FillColor: colBars}
	h.LineStyle.Width = vg.Points(0.5)
	h.LineStyle.Color = color.White
	total := 0.0
	for i := 0; i < n; i++ {
		c, w := tr.ErrBins[i], tr.ErrHist[i]
		if !finite(c) || !finite(w) {
			continue
		}
		h.Bins = append(h.Bins, plotter.HistogramBin{Min: c - width/2, Max: c + width/2, Weight: w})
		total += w
	}
	if len(h.Bins) == 0 || total <= 0 {
		return chart{}, false
	}
	title := "Error over the steady parts (measurement − setpoint)"
	p := newPlot(title, "error (counts)", "samples")
	p.Add(h)
	return chart{kind: "histogram", caption: title, w: 13 * vg.Centimeter, h: 8 * vg.Centimeter, grid: [][]*plot.Plot{{p}}}, true
}

// spectrumChart is the amplitude spectrum of the ripple of the longest steady part.
func spectrumChart(s *analysis.Summary) (chart, bool) {
	tr := s.Traces
	if tr == nil {
		return chart{}, false
	}
	pts := xys(tr.SpecFreq, tr.SpecAmp, nil)
	l := line(pts, colPV, vg.Points(1))
	if l == nil {
		return chart{}, false
	}
	title := "Ripple spectrum of the longest steady part"
	p := newPlot(title, "frequency (Hz)", "amplitude (counts)")
	p.Add(l)
	// Mark the strongest component.
	best := 0
	for i := range pts {
		if pts[i].X > 0 && (pts[best].X <= 0 || pts[i].Y > pts[best].Y) {
			best = i
		}
	}
	if pts[best].X > 0 {
		if sc, err := plotter.NewScatter(plotter.XYs{pts[best]}); err == nil {
			sc.GlyphStyle.Color = colFit
			sc.GlyphStyle.Radius = vg.Points(3)
			sc.GlyphStyle.Shape = draw.RingGlyph{}
			p.Add(sc)
			p.Legend.Add("strongest: "+si.Format(pts[best].X, "Hz"), sc)
		}
	}
	return chart{kind: "spectrum", caption: title, w: 13 * vg.Centimeter, h: 8 * vg.Centimeter, grid: [][]*plot.Plot{{p}}}, true
}

// stepChart is one step response with the exponential fitted to it.
func stepChart(s *analysis.Summary, st analysis.StepTrace) (chart, bool) {
	if len(st.T) < 2 || len(st.PV) < 2 {
		return chart{}, false
	}
	t0 := st.T[0]
	scale, unit := timeScale(st.T[len(st.T)-1] - t0)
	fx := func(t float64) float64 { return (t - t0) * scale }
	title := "Step"
	if k := matchStep(s, st); k >= 0 {
		f := s.Steps[k]
		title = fmt.Sprintf("Step %d: %s to %s", k+1, levelText(f.FromV, f.FromCounts), levelText(f.ToV, f.ToCounts))
	}
	p := newPlot(title, fmt.Sprintf("time (%s) from %s", unit, si.Format(t0, "s")), "level ("+levelUnit(s.Traces)+")")
	pts := xys(st.T, st.PV, fx)
	pv := line(pts, colPV, vg.Points(1))
	if pv == nil {
		return chart{}, false
	}
	p.Add(pv)
	p.Legend.Add("measurement", pv)
	if fit := line(xys(st.T, st.Fitted, fx), colFit, vg.Points(1.2), vg.Points(5), vg.Points(2)); fit != nil {
		p.Add(fit)
		p.Legend.Add("fitted exponential", fit)
	}
	headroom(p)
	return chart{kind: "step", caption: title, w: 13 * vg.Centimeter, h: 8 * vg.Centimeter, grid: [][]*plot.Plot{{p}}}, true
}

// matchStep returns the index in s.Steps of the step a trace shows: the step whose time
// is nearest the trace's start, within a tenth of the trace's span (or one sample period).
// It returns -1 when none is near.
func matchStep(s *analysis.Summary, st analysis.StepTrace) int {
	if len(st.T) == 0 {
		return -1
	}
	tol := math.Abs(st.T[len(st.T)-1]-st.T[0]) / 10
	if s.SamplePeriodS != nil {
		tol = math.Max(tol, *s.SamplePeriodS)
	}
	best, bestD := -1, math.Inf(1)
	for i, f := range s.Steps {
		if d := math.Abs(f.AtS - st.T[0]); d <= tol && d < bestD {
			best, bestD = i, d
		}
	}
	return best
}

// steadyZoom returns the zoom trace of the segment with the most steady samples.
func steadyZoom(s *analysis.Summary) (analysis.ZoomTrace, bool) {
	if s == nil || s.Traces == nil || len(s.Traces.Zoom) == 0 {
		return analysis.ZoomTrace{}, false
	}
	zs := append([]analysis.ZoomTrace(nil), s.Traces.Zoom...)
	steady := func(z analysis.ZoomTrace) int64 {
		if z.Segment >= 0 && z.Segment < len(s.Segments) {
			return s.Segments[z.Segment].SteadySamples
		}
		return 0
	}
	sort.SliceStable(zs, func(i, j int) bool { return steady(zs[i]) > steady(zs[j]) })
	for _, z := range zs {
		if len(z.T) > 1 && len(z.PV) > 1 {
			return z, true
		}
	}
	return analysis.ZoomTrace{}, false
}

// rippleChart overlays the steady ripple of several captures, mean removed, in counts
// (or in volts when every capture is in volts).
func rippleChart(docs []Capture) (chart, bool) {
	allVolts := true
	for _, d := range docs {
		if d.Summary == nil || d.Summary.Traces == nil || !d.Summary.Traces.Volts {
			allVolts = false
		}
	}
	unit := "counts"
	if allVolts {
		unit = "V"
	}
	type series struct {
		name string
		pts  plotter.XYs
	}
	var all []series
	span := 0.0
	for _, d := range docs {
		z, ok := steadyZoom(d.Summary)
		if !ok {
			continue
		}
		k := 1.0
		if d.Summary.Traces.Volts && !allVolts {
			q, ok := lsb(d.Summary)
			if !ok {
				continue
			}
			k = 1 / q
		}
		if on := chargeOnsets(z.U); len(on) > 0 && on[0] < min(len(z.T), len(z.PV))-2 {
			z.T, z.PV = z.T[on[0]:], z.PV[on[0]:]
		}
		pts := xys(z.T, z.PV, nil)
		if len(pts) < 2 {
			continue
		}
		mean := 0.0
		for _, p := range pts {
			mean += p.Y
		}
		mean /= float64(len(pts))
		t0 := pts[0].X
		for i := range pts {
			pts[i].X -= t0
			pts[i].Y = (pts[i].Y - mean) * k
		}
		span = math.Max(span, pts[len(pts)-1].X)
		all = append(all, series{clean(d.Name), pts})
	}
	if len(all) < 2 {
		return chart{}, false
	}
	// Cut every series to the shortest window so that they cover the same time.
	for _, sr := range all {
		span = math.Min(span, sr.pts[len(sr.pts)-1].X)
	}
	for i := range all {
		n := len(all[i].pts)
		for n > 2 && all[i].pts[n-1].X > span {
			n--
		}
		all[i].pts = all[i].pts[:n]
	}
	scale, tunit := timeScale(span)
	title := "Steady ripple of each capture, mean removed"
	p := newPlot(title, "time ("+tunit+") from a charge onset", "ripple ("+unit+")")
	for i, sr := range all {
		for j := range sr.pts {
			sr.pts[j].X *= scale
		}
		if l := line(sr.pts, palette[i%len(palette)], vg.Points(1.2)); l != nil {
			p.Add(l)
			p.Legend.Add(sr.name, l)
		}
	}
	headroom(p)
	return chart{kind: "ripple", caption: title, w: 18 * vg.Centimeter, h: 9 * vg.Centimeter, grid: [][]*plot.Plot{{p}}}, true
}
