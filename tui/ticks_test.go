package tui

import (
	"math"
	"strings"
	"testing"

	"github.com/caploop/caploop/tui/live"
)

// stepPoints returns points every dt seconds in [from, to): a sine ripple of ±3 counts
// around a setpoint of 500 counts with a band of 2.
func stepPoints(from, to, dt float64) []live.Point {
	var pts []live.Point
	for k := 0; from+float64(k)*dt < to; k++ {
		tt := from + float64(k)*dt
		pts = append(pts, live.Point{T: tt, SP: 500, PV: float32(500 + 3*math.Sin(2*math.Pi*tt*40)), DB: 2})
	}
	return pts
}

// TestTickLabelsDiffer checks that neighbouring time-axis labels differ at every
// window, from 5 ms to an hour, wherever in the session the window sits.
func TestTickLabelsDiffer(t *testing.T) {
	for _, from := range []float64{0, 3.3, 42.7, 599.99, 754.321, 40000.5} {
		for _, span := range []float64{0.005, 0.02, 0.1, 0.25, 0.5, 1, 2, 8, 30, 120, 3600} {
			for _, n := range []int{2, 3, 7, 12} {
				f := tickFormatter(from, from+span, n)
				prev := ""
				for i := 0; i < n; i++ {
					l := f(from + float64(i)/float64(n-1)*span)
					if l == prev {
						t.Errorf("window %gs at %gs, %d ticks: label %d repeats %q", span, from, n, i, l)
					}
					prev = l
				}
			}
		}
	}
}

// TestPlotTicksShortWindow renders a plot of a 50 ms window at 42.7 s and checks the
// x-axis labels on screen are all different.
func TestPlotTicksShortWindow(t *testing.T) {
	w := Window{From: 42.70, To: 42.75, Points: stepPoints(42.70, 42.75, 1e-3)}
	out := RenderPlot(w, 120, 20)
	lines := strings.Split(out, "\n")
	axis := strings.Fields(lines[len(lines)-2])
	if len(axis) < 3 {
		t.Fatalf("x-axis labels %q: want several", axis)
	}
	seen := map[string]bool{}
	for _, l := range axis {
		if seen[l] {
			t.Errorf("label %q repeats on the axis %q", l, axis)
		}
		seen[l] = true
	}
}
