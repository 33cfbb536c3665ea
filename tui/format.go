package tui

import (
	"fmt"
	"math"

	"github.com/caploop/caploop/telemetry/si"
)

// Small formatters shared by the views. A nil pointer prints as "–" (not measured).

const dash = "–"

func fmtSI(p *float64, unit string) string {
	if p == nil || math.IsNaN(*p) {
		return dash
	}
	return si.Format(*p, unit)
}

func fmtPct(p *float64) string {
	if p == nil || math.IsNaN(*p) {
		return dash
	}
	return fmt.Sprintf("%.0f%%", *p*100)
}

func fmtCounts(p *float64) string {
	if p == nil || math.IsNaN(*p) {
		return dash
	}
	if math.Abs(*p) >= 100 || *p == math.Trunc(*p) {
		return fmt.Sprintf("%.0f", *p)
	}
	return fmt.Sprintf("%.1f", *p)
}

// fmtCI writes the half-width of a confidence interval relative to the value: "±1.2%".
func fmtCI(v *float64, ci *[2]float64) string {
	if v == nil || ci == nil || *v == 0 {
		return ""
	}
	h := (ci[1] - ci[0]) / 2 / math.Abs(*v) * 100
	if math.IsNaN(h) || math.IsInf(h, 0) {
		return ""
	}
	return fmt.Sprintf(" ±%.1f%%", h)
}

func fmtBytes(n int64) string {
	switch {
	case n < 1<<10:
		return fmt.Sprintf("%d B", n)
	case n < 1<<20:
		return fmt.Sprintf("%.1f KiB", float64(n)/(1<<10))
	case n < 1<<30:
		return fmt.Sprintf("%.1f MiB", float64(n)/(1<<20))
	}
	return fmt.Sprintf("%.2f GiB", float64(n)/(1<<30))
}

func fmtRate(r float64) string {
	switch {
	case r <= 0 || math.IsNaN(r):
		return "0 S/s"
	case r < 10000:
		return fmt.Sprintf("%.0f S/s", r)
	}
	return fmt.Sprintf("%.1f kS/s", r/1000)
}
