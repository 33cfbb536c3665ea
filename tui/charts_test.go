package tui

import (
	"strings"
	"testing"

	"github.com/charmbracelet/x/ansi"

	"github.com/caploop/caploop/analysis"
)

// TestStepFigures checks that the step view takes the figures of the step its trace
// starts at: StepTrace.Step numbers segments, so indexing Steps with it picks the wrong
// step whenever a segment without a step (the first one) comes before.
func TestStepFigures(t *testing.T) {
	sum := &analysis.Summary{Steps: []analysis.StepFigures{{AtS: 3}, {AtS: 6}, {AtS: 9}}}
	cases := []struct {
		name   string
		t0     float64
		wantAt float64 // 0: none
	}{
		{"second step", 6, 6},
		{"last step", 9, 9},
		{"half a period late", 9.0004, 9},
		{"no step there", 7.5, 0},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			st := analysis.StepTrace{Step: 2, T: []float64{c.t0, c.t0 + 1e-3}, PV: []float64{1, 2}}
			got := stepFigures(sum, st)
			switch {
			case c.wantAt == 0 && got != nil:
				t.Errorf("got the step at %g, want none", got.AtS)
			case c.wantAt != 0 && (got == nil || got.AtS != c.wantAt):
				t.Errorf("got %v, want the step at %g", got, c.wantAt)
			}
		})
	}
}

// TestRenderStepShowsBoth checks that the fitted model stays visible beside pv: pv as
// dots, the model as line glyphs, and the time axis from the step on round values.
func TestRenderStepShowsBoth(t *testing.T) {
	var st analysis.StepTrace
	for k := 0; k < 100; k++ {
		tt := float64(k) * 1e-3
		st.T = append(st.T, tt)
		fit := 1 - 1/(1+tt*50)
		st.Fitted = append(st.Fitted, fit)
		st.PV = append(st.PV, fit+0.2*float64(k%2)) // pv well off the model every other sample
	}
	out := RenderStep(st, nil, true, 80, 24, false)
	lines := strings.Split(out, "\n")
	var dots, line int
	for _, l := range lines[1 : len(lines)-2] {
		_, plot, _ := strings.Cut(l, "┤")
		dots += strings.Count(plot, "•")
		line += strings.Count(plot, "─") + strings.Count(plot, "│") + strings.Count(plot, "╮") + strings.Count(plot, "╯")
	}
	if dots < 20 {
		t.Errorf("%d pv dots drawn, want at least 20:\n%s", dots, out)
	}
	if line < 20 {
		t.Errorf("%d model line cells drawn, want at least 20:\n%s", line, out)
	}
	if axis := lines[len(lines)-1]; !strings.Contains(axis, "0 s") || !strings.Contains(axis, "100 ms") {
		t.Errorf("time axis %q, want it from 0 s to 100 ms", axis)
	}
	checkGrid(t, out, 80, 24)
}

// TestDiagnosticShortForms checks the shorter forms of diagnostics used under the trace.
func TestDiagnosticShortForms(t *testing.T) {
	long := "Setpoint 2 V (segments 2, 5): 289 band jumps (a charge followed directly by a discharge or the reverse) with a deadband of ±4 counts (9 counts wide); so the band needs at least 7 counts (step plus 3 sigma of noise)."
	cases := []struct {
		name         string
		d            analysis.Diagnostic
		wantShort    string
		wantHeadline string
	}{
		{"long brackets dropped, short kept", analysis.Diagnostic{Code: "band_too_narrow", Message: long},
			"Setpoint 2 V (segments 2, 5): 289 band jumps with a deadband of ±4 counts (9 counts wide); so the band needs at least 7 counts.",
			"band too narrow: Setpoint 2 V (segments 2, 5)"},
		{"subject already names the kind", analysis.Diagnostic{Code: "band_too_narrow", Message: "The band of ±2 counts is too narrow: 37 band jumps in 1.5 s."},
			"The band of ±2 counts is too narrow: 37 band jumps in 1.5 s.",
			"The band of ±2 counts is too narrow"},
		{"no colon", analysis.Diagnostic{Code: "band_too_narrow", Message: "The same (band too narrow) at 1 more setpoints."},
			"The same (band too narrow) at 1 more setpoints.",
			"The same (band too narrow) at 1 more setpoints."},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			if got := shortSentence(c.d.Message); got != c.wantShort {
				t.Errorf("shortSentence = %q, want %q", got, c.wantShort)
			}
			if got := headline(c.d); got != c.wantHeadline {
				t.Errorf("headline = %q, want %q", got, c.wantHeadline)
			}
		})
	}
}

// TestColourSameText checks that colour only adds escapes: the colour plots, stripped of
// them, equal the plain plots cell for cell, and keep the grid.
func TestColourSameText(t *testing.T) {
	sum := fixtureSummary()
	st := sum.Traces.StepTraces[0]
	pts := fixturePoints(t)
	win := func(color bool) Window {
		return Window{From: 1, To: 3, Points: pts[1000:], Marks: []Mark{{T: 1.5, Label: "fan on"}, {T: 2.5, Label: "door"}}, Volts: true, Color: color}
	}
	cases := []struct {
		name         string
		plain, color string
	}{
		{"step", RenderStep(st, &sum.Steps[0], true, 80, 24, false), RenderStep(st, &sum.Steps[0], true, 80, 24, true)},
		{"trace", RenderPlot(win(false), 80, 16), RenderPlot(win(true), 80, 16)},
		{"spectrum", RenderSpectrum(sum.Traces.SpecFreq, sum.Traces.SpecAmp, 80, 20, false), RenderSpectrum(sum.Traces.SpecFreq, sum.Traces.SpecAmp, 80, 20, true)},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			if c.color == c.plain {
				t.Fatalf("colour output has no colour")
			}
			if c.name == "trace" && !strings.Contains(c.plain, "┊") {
				t.Errorf("no dotted mark column in the trace:\n%s", c.plain)
			}
			if got := ansi.Strip(c.color); got != c.plain {
				t.Errorf("colour text differs from plain:\n%s\nwant:\n%s", got, c.plain)
			}
			h := strings.Count(c.plain, "\n") + 1
			checkGrid(t, c.color, 80, h)
		})
	}
}
