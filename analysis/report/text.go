package report

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/si"
)

// maxText is the longest text from a capture shown in the report, in bytes.
const maxText = 600

// clean makes text from a capture safe to show with telemetry.SanitizeN: invalid UTF-8,
// control characters and unprintable runes (bidi overrides included) become \xNN or
// \u{NNNN} escapes, and the text is cut to maxText bytes. HTML escaping is left to the
// template.
func clean(s string) string { return telemetry.SanitizeN([]byte(s), maxText) }

// na is what a table shows for a figure that does not apply or was not measured.
const na = "n/a"

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// fmtSI formats a pointer to an SI value with its unit, n/a for nil or non-finite.
func fmtSI(p *float64, unit string) string {
	if p == nil || !finite(*p) {
		return na
	}
	return si.Format(*p, unit)
}

// fmtNum formats a plain number with up to 4 significant digits.
func fmtNum(v float64) string {
	if !finite(v) {
		return na
	}
	if v == math.Trunc(v) && math.Abs(v) < 1e12 {
		return strconv.FormatFloat(v, 'f', 0, 64)
	}
	return strconv.FormatFloat(v, 'g', 4, 64)
}

// fmtNumP formats a pointer to a plain number, n/a for nil.
func fmtNumP(p *float64) string {
	if p == nil {
		return na
	}
	return fmtNum(*p)
}

// fmtCounts formats counts: "12.5 counts".
func fmtCounts(p *float64) string {
	if p == nil || !finite(*p) {
		return na
	}
	return fmtNum(*p) + " counts"
}

// fmtPct formats a fraction as a percentage: 0.253 -> "25.3 %".
func fmtPct(p *float64) string {
	if p == nil || !finite(*p) {
		return na
	}
	return strconv.FormatFloat(*p*100, 'f', 1, 64) + " %"
}

// fmtCI formats a confidence interval with its unit: "[9.8 ms, 10.2 ms]".
func fmtCI(p *[2]float64, unit string) string {
	if p == nil {
		return na
	}
	return "[" + si.Format(p[0], unit) + ", " + si.Format(p[1], unit) + "]"
}

// fmtInts lists up to 12 integers, then how many more.
func fmtInts(v []int) string {
	if len(v) == 0 {
		return "none"
	}
	var parts []string
	for i, x := range v {
		if i == 12 {
			parts = append(parts, fmt.Sprintf("and %d more", len(v)-12))
			break
		}
		parts = append(parts, strconv.Itoa(x))
	}
	return strings.Join(parts, ", ")
}

func yesNo(b bool) string {
	if b {
		return "yes"
	}
	return "no"
}
