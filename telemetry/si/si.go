// Package si parses and formats numbers with SI prefixes and unit symbols, the way
// engineers write them on schematics and in flags: 47k, 4k7, 1u, 4.7µF, 100mV, 1ms.
//
// Inside caploop every quantity is a float64 in SI base units (volts, seconds, ohms,
// farads); this package is only used at the edges (flags, meta lines, text output).
//
//	si.Parse("47k")          // 47000
//	si.Parse("4k7")          // 4700
//	si.ParseUnit("100mV", "V") // 0.1
//	si.Format(4.7e-6, "F")   // "4.7 µF"
package si

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
)

// ErrSyntax is returned (wrapped) when a value cannot be read.
var ErrSyntax = errors.New("si: invalid value")

var prefixes = map[string]float64{
	"p": 1e-12, "n": 1e-9, "u": 1e-6, "µ": 1e-6, "μ": 1e-6, "m": 1e-3,
	"k": 1e3, "K": 1e3, "M": 1e6, "G": 1e9,
}

// scaled returns the decimal number num times mult, read in one rounding step
// ("2.2" and 1e-9 give the float64 nearest to 2.2e-9, where 2.2*1e-9 would be off by
// one unit in the last place).
func scaled(num string, mult float64) (float64, error) {
	if mult == 1 || strings.ContainsAny(num, "eExXpP_") {
		v, err := strconv.ParseFloat(num, 64)
		return v * mult, err
	}
	return strconv.ParseFloat(num+"e"+strconv.Itoa(int(math.Round(math.Log10(mult)))), 64)
}

// Parse reads a number with an optional SI prefix and no unit: "47k", "1u", "4.7µ", "4k7",
// "1e-6", "-0.5m". A bare "R" or "r" in the middle ("4R7") means a decimal point.
// With unit "V" or "A", the unit letter there does too: ParseUnit("3v3", "V") = 3.3.
func Parse(s string) (float64, error) {
	return ParseUnit(s, "")
}

// ParseUnit reads a number with an optional SI prefix and an optional unit symbol, which
// must match unit when present (case-insensitive; "Ω", "ohm" and "R" all match "Ω"):
// ParseUnit("100mV", "V") = 0.1, ParseUnit("47kΩ", "Ω") = 47000, ParseUnit("1ms", "s") = 0.001.
// White space between the number and the prefix is allowed ("4.7 µF").
func ParseUnit(s, unit string) (float64, error) {
	orig := s
	s = strings.TrimSpace(s)
	if s == "" {
		return 0, fmt.Errorf("%w %q: empty", ErrSyntax, orig)
	}
	if unit != "" {
		s = trimUnit(s, unit)
	}
	s = strings.TrimSpace(s)
	// Plain number first: the common case and the fast one.
	if v, err := strconv.ParseFloat(s, 64); err == nil {
		return check(v, orig)
	}
	// "4k7", "4R7": the prefix letter stands in for the decimal point.
	for i := 1; i < len(s)-1; i++ {
		c := s[i]
		if c >= '0' && c <= '9' || c == '.' || c == '-' || c == '+' || c == 'e' || c == 'E' {
			continue
		}
		p, rest := s[i:], ""
		mult, n := prefixAt(p)
		if n == 0 && (c == 'R' || c == 'r' || unitMark(c, unit)) {
			mult, n = 1, 1
		}
		if n == 0 {
			break
		}
		rest = p[n:]
		head := s[:i]
		if head[0] == '-' || head[0] == '+' {
			head = head[1:]
		}
		if !allDigits(rest) || !allDigits(head) {
			break
		}
		v, err := scaled(s[:i]+"."+rest, mult)
		if err != nil {
			break
		}
		return check(v, orig)
	}
	// Number then one prefix.
	for p, mult := range prefixes {
		if strings.HasSuffix(s, p) {
			num := strings.TrimSpace(strings.TrimSuffix(s, p))
			v, err := scaled(num, mult)
			if err != nil {
				continue
			}
			return check(v, orig)
		}
	}
	return 0, fmt.Errorf("%w %q", ErrSyntax, orig)
}

func check(v float64, orig string) (float64, error) {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, fmt.Errorf("%w %q: not a finite number", ErrSyntax, orig)
	}
	return v, nil
}

func prefixAt(s string) (float64, int) {
	for p, mult := range prefixes {
		if strings.HasPrefix(s, p) {
			return mult, len(p)
		}
	}
	return 0, 0
}

// unitMark reports whether c is the unit letter written in place of the decimal point,
// as supply rails are named on schematics: "3V3" is 3.3 V, "1V8" 1.8 V, "1A5" 1.5 A
// (common practice). Only volts and amperes: for seconds or farads a letter there is
// more likely a typing error.
func unitMark(c byte, unit string) bool {
	switch unit {
	case "V":
		return c == 'V' || c == 'v'
	case "A":
		return c == 'A' || c == 'a'
	}
	return false
}

func allDigits(s string) bool {
	if s == "" {
		return false
	}
	for i := 0; i < len(s); i++ {
		if s[i] < '0' || s[i] > '9' {
			return false
		}
	}
	return true
}

func trimUnit(s, unit string) string {
	aliases := []string{unit}
	switch unit {
	case "Ω", "ohm":
		aliases = []string{"Ω", "ohms", "ohm", "Ohm", "R"}
	case "F":
		aliases = []string{"F", "f"}
	case "Hz":
		aliases = []string{"Hz", "hz", "HZ"}
	case "A":
		aliases = []string{"A"}
	}
	for _, a := range aliases {
		if len(s) > len(a) && strings.EqualFold(s[len(s)-len(a):], a) {
			// Do not eat a prefix that happens to look like the unit ("m" in "1m" for unit "m").
			return s[:len(s)-len(a)]
		}
	}
	return s
}

var formatPrefixes = []struct {
	exp  int
	name string
}{{-12, "p"}, {-9, "n"}, {-6, "µ"}, {-3, "m"}, {0, ""}, {3, "k"}, {6, "M"}, {9, "G"}}

// Format writes v with an SI prefix and unit, three significant digits at most:
// Format(47000, "Ω") = "47 kΩ", Format(4.7e-6, "F") = "4.7 µF", Format(0.1, "V") = "100 mV".
// Zero is "0 V"; NaN is "n/a".
func Format(v float64, unit string) string {
	return FormatDigits(v, unit, 3)
}

// FormatDigits is Format with a chosen number of significant digits (1 to 15).
func FormatDigits(v float64, unit string, digits int) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "n/a"
	}
	if digits < 1 {
		digits = 1
	}
	if v == 0 {
		return strings.TrimSpace("0 " + unit)
	}
	a := math.Abs(v)
	exp := int(math.Floor(math.Log10(a)/3)) * 3
	// Rounding may carry into the next prefix: 999.96 -> 1000.
	scaled := a / math.Pow(10, float64(exp))
	r, _ := strconv.ParseFloat(strconv.FormatFloat(scaled, 'g', digits, 64), 64)
	if r >= 1000 {
		exp += 3
	}
	if exp < -12 {
		exp = -12
	}
	if exp > 9 {
		exp = 9
	}
	name := ""
	for _, p := range formatPrefixes {
		if p.exp == exp {
			name = p.name
		}
	}
	num := strconv.FormatFloat(v/math.Pow(10, float64(exp)), 'g', digits, 64)
	if strings.ContainsAny(num, "e") {
		// Past the largest or smallest prefix: plain digits, still rounded to digits.
		r, _ := strconv.ParseFloat(num, 64)
		num = strconv.FormatFloat(r, 'f', -1, 64)
	}
	return num + " " + name + unit
}
