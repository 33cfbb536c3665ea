// Package figure is the one text layer of caploop: how a figure, a missing figure, a
// percentage, an interval, a list and a count with its noun are written, the same in the
// summary text, the HTML report and the screen.
//
// A figure that does not apply or could not be measured is written as Missing. Values
// take three significant digits with an SI prefix and unit ("47.2 mV", "1.5 ms"), a
// fraction is written as a percentage with one decimal and a space ("25.3 %"), an
// interval as "[a, b]".
package figure

import (
	"math"
	"strconv"
	"strings"

	"github.com/caploop/caploop/telemetry/si"
)

// Missing is written where a figure does not apply or was not measured.
const Missing = "n/a"

// Digits is the number of significant digits of a figure in text.
const Digits = 3

// ListMax is the most items List writes before it says how many there are in all.
const ListMax = 12

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// Value writes v with its SI prefix and unit, Missing for NaN or infinity.
func Value(v float64, unit string) string {
	if !finite(v) {
		return Missing
	}
	return si.FormatDigits(v, unit, Digits)
}

// SI writes *p with its SI prefix and unit, Missing for nil.
func SI(p *float64, unit string) string {
	if p == nil {
		return Missing
	}
	return Value(*p, unit)
}

// Num writes a plain number: whole numbers as they are, others with 4 significant digits.
func Num(v float64) string {
	if !finite(v) {
		return Missing
	}
	if v == math.Trunc(v) && math.Abs(v) < 1e12 {
		return strconv.FormatFloat(v, 'f', 0, 64)
	}
	return strconv.FormatFloat(v, 'g', 4, 64)
}

// NumP is Num of *p, Missing for nil.
func NumP(p *float64) string {
	if p == nil {
		return Missing
	}
	return Num(*p)
}

// Counts writes ADC counts with the noun: "1 count", "12.5 counts".
func Counts(p *float64) string {
	if p == nil || !finite(*p) {
		return Missing
	}
	if *p == 1 {
		return "1 count"
	}
	return Num(*p) + " counts"
}

// VoltsOrCounts writes a level in volts when they are known, else in counts.
func VoltsOrCounts(v, counts *float64) string {
	if v != nil {
		return SI(v, "V")
	}
	return Counts(counts)
}

// SecondsOrSamples writes a time in seconds when known, else in sample periods.
func SecondsOrSamples(sec, samples *float64) string {
	switch {
	case sec != nil:
		return SI(sec, "s")
	case samples != nil && finite(*samples):
		return CountText(Num(*samples), "sample")
	}
	return Missing
}

// Pct writes a fraction as a percentage with one decimal: 0.253 -> "25.3 %".
func Pct(p *float64) string {
	if p == nil || !finite(*p) {
		return Missing
	}
	return strconv.FormatFloat(*p*100, 'f', 1, 64) + " %"
}

// Interval writes a confidence interval with its unit: "[9.8 ms, 10.2 ms]"; Missing for nil.
func Interval(p *[2]float64, unit string) string {
	if p == nil {
		return Missing
	}
	return "[" + Value(p[0], unit) + ", " + Value(p[1], unit) + "]"
}

// HalfWidth writes the half-width of an interval relative to its value: "±1.2 %", or ""
// when it cannot be told.
func HalfWidth(v *float64, ci *[2]float64) string {
	if v == nil || ci == nil || *v == 0 {
		return ""
	}
	h := (ci[1] - ci[0]) / 2 / math.Abs(*v)
	if !finite(h) {
		return ""
	}
	return "±" + strconv.FormatFloat(h*100, 'f', 1, 64) + " %"
}

// SIHalfWidth writes *p with its unit and, when known, the relative half-width of its
// interval: "32.1 ms ±4.8 %".
func SIHalfWidth(p *float64, ci *[2]float64, unit string) string {
	if h := HalfWidth(p, ci); h != "" && p != nil && finite(*p) {
		return SI(p, unit) + " " + h
	}
	return SI(p, unit)
}

// Change writes after - before with its sign and the relative change: "-12.5 mV (-40 %)".
func Change(before, after float64, unit string) string {
	if !finite(before) || !finite(after) {
		return Missing
	}
	d := after - before
	s := "+"
	if d < 0 {
		s = "-"
	}
	s += si.FormatDigits(math.Abs(d), unit, Digits)
	if before != 0 {
		s += " (" + strconv.FormatFloat(100*d/before, 'f', 0, 64) + " %)"
		if d >= 0 {
			s = strings.Replace(s, "(", "(+", 1)
		}
	}
	return s
}

// List writes up to ListMax integers, then how many there are in all:
// "3, 9, 27, ... (40 in all)".
func List(v []int) string {
	var b strings.Builder
	for i, x := range v {
		if i > 0 {
			b.WriteString(", ")
		}
		if i == ListMax {
			b.WriteString("... (" + strconv.Itoa(len(v)) + " in all)")
			break
		}
		b.WriteString(strconv.Itoa(x))
	}
	return b.String()
}

// Bytes writes a size in bytes with a binary prefix: "1.5 MiB".
func Bytes(n int64) string {
	switch {
	case n < 1<<10:
		return strconv.FormatInt(n, 10) + " B"
	case n < 1<<20:
		return strconv.FormatFloat(float64(n)/(1<<10), 'f', 1, 64) + " KiB"
	case n < 1<<30:
		return strconv.FormatFloat(float64(n)/(1<<20), 'f', 1, 64) + " MiB"
	}
	return strconv.FormatFloat(float64(n)/(1<<30), 'f', 2, 64) + " GiB"
}
