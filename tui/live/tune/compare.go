package tune

import (
	"fmt"
	"math"
	"strings"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/figure"
)

// Comparison is the before/after of the passes at the same setpoints: the last segment
// at each setpoint of each pass.
type Comparison struct {
	JumpsBefore        int64    `json:"band_jumps_before"`
	JumpsAfter         int64    `json:"band_jumps_after"`
	SwitchingBeforeHz  *float64 `json:"switching_before_hz"`
	SwitchingAfterHz   *float64 `json:"switching_after_hz"`
	RippleBeforeV      *float64 `json:"ripple_pp_before_v"`
	RippleAfterV       *float64 `json:"ripple_pp_after_v"`
	StaticErrorBeforeV *float64 `json:"static_error_before_v"`
	StaticErrorAfterV  *float64 `json:"static_error_after_v"`
	Line               string   `json:"line"`
}

// passFigures folds the last segment at each setpoint of one pass.
type passFigures struct {
	jumps     int64
	switching *float64 // mean over the segments that have it
	ripple    *float64 // largest
	staticErr *float64 // the largest in size, with its sign
}

func foldPass(s *analysis.Summary, sps []int) passFigures {
	var f passFigures
	if s == nil {
		return f
	}
	var sw float64
	var nsw int
	for _, sp := range sps {
		var seg *analysis.Segment
		for i := range s.Segments {
			if int(math.Round(s.Segments[i].SetpointCounts)) == sp {
				seg = &s.Segments[i]
			}
		}
		if seg == nil {
			continue
		}
		f.jumps += seg.BandJumps
		if seg.SwitchingHz != nil {
			sw += *seg.SwitchingHz
			nsw++
		} else if seg.Rests {
			nsw++ // a resting segment switches at 0 Hz
		}
		if v := seg.RipplePPV; v != nil && (f.ripple == nil || *v > *f.ripple) {
			x := *v
			f.ripple = &x
		}
		if v := seg.MeanErrorV; v != nil && (f.staticErr == nil || math.Abs(*v) > math.Abs(*f.staticErr)) {
			x := *v
			f.staticErr = &x
		}
	}
	if nsw > 0 {
		x := sw / float64(nsw)
		f.switching = &x
	}
	return f
}

// Compare gives the before/after of two passes over the setpoints sps, with the one-line
// verdict: "band jumps 103 -> 0, switching 290 -> 62 Hz, ripple 78 -> 31 mV, static
// error +7 mV".
func Compare(before, after *analysis.Summary, sps []int) *Comparison {
	b, a := foldPass(before, sps), foldPass(after, sps)
	c := &Comparison{JumpsBefore: b.jumps, JumpsAfter: a.jumps, SwitchingBeforeHz: b.switching, SwitchingAfterHz: a.switching,
		RippleBeforeV: b.ripple, RippleAfterV: a.ripple, StaticErrorBeforeV: b.staticErr, StaticErrorAfterV: a.staticErr}
	parts := []string{fmt.Sprintf("band jumps %d -> %d", b.jumps, a.jumps)}
	parts = append(parts, "switching "+pair(b.switching, a.switching, 1, "Hz"))
	parts = append(parts, "ripple "+pair(b.ripple, a.ripple, 1e-3, "mV"))
	if a.staticErr != nil {
		parts = append(parts, fmt.Sprintf("static error %+.0f mV", *a.staticErr*1e3))
	} else {
		parts = append(parts, "static error n/a")
	}
	c.Line = strings.Join(parts, ", ")
	return c
}

// pair writes "290 -> 62 Hz", values divided by scale; n/a for a missing one.
func pair(x, y *float64, scale float64, unit string) string {
	f := func(v *float64) string {
		if v == nil {
			return figure.Missing
		}
		q := *v / scale
		if math.Abs(q) < 10 && q != math.Trunc(q) {
			return fmt.Sprintf("%.1f", q)
		}
		return fmt.Sprintf("%.0f", q)
	}
	return f(x) + " -> " + f(y) + " " + unit
}
