package tui

import (
	"math"
	"testing"
)

// TestNiceAxis checks the round axis ends of the spectrum and step plots (worked by hand
// from the 1, 2, 2.5, 5 × 10^k steps).
func TestNiceAxis(t *testing.T) {
	cases := []struct {
		name          string
		span          float64
		maxIntervals  int
		wantTop       float64
		wantIntervals int
	}{
		{"nyquist 500 Hz, 3 intervals", 500, 3, 500, 2},
		{"nyquist 500 Hz, 6 intervals", 500, 6, 500, 5},
		{"84 ms step, 6 intervals", 0.084, 6, 0.1, 5},
		{"47 ms step, 3 intervals", 0.047, 3, 0.05, 2},
		{"255 ms step, 6 intervals", 0.255, 6, 0.3, 6},
		{"one interval only", 7, 1, 10, 1},
		{"zero span", 0, 4, 1, 4},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			top, k := niceAxis(c.span, c.maxIntervals)
			if math.Abs(top-c.wantTop) > 1e-9*c.wantTop || k != c.wantIntervals {
				t.Errorf("niceAxis(%g, %d) = %g, %d; want %g, %d", c.span, c.maxIntervals, top, k, c.wantTop, c.wantIntervals)
			}
			if top < c.span {
				t.Errorf("top %g is below the span %g", top, c.span)
			}
		})
	}
}
