package tui

import (
	"fmt"
	"math"
)

// fmtRate writes a sample rate on the status line (the shared formatters are in
// analysis/figure).
func fmtRate(r float64) string {
	switch {
	case r <= 0 || math.IsNaN(r):
		return "0 S/s"
	case r < 10000:
		return fmt.Sprintf("%.0f S/s", r)
	}
	return fmt.Sprintf("%.1f kS/s", r/1000)
}
