package report

import (
	"math"

	"github.com/caploop/caploop/telemetry"
)

// maxText is the longest text from a capture shown in the report, in bytes.
const maxText = 600

// clean makes text from a capture safe to show with telemetry.SanitizeN: invalid UTF-8,
// control characters and unprintable runes (bidi overrides included) become \xNN or
// \u{NNNN} escapes, and the text is cut to maxText bytes. HTML escaping is left to the
// template.
func clean(s string) string { return telemetry.SanitizeN([]byte(s), maxText) }

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

func yesNo(b bool) string {
	if b {
		return "yes"
	}
	return "no"
}
