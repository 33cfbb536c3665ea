package si

import (
	"errors"
	"math"
	"testing"
)

// Prefix values: SI Brochure, 9th edition (BIPM 2019), table 7. The "4k7" and "4R7"
// forms are the letter-and-digit code of IEC 60062 (from memory).
func TestParse(t *testing.T) {
	tests := []struct {
		in   string
		want float64
	}{
		{"47k", 47e3},
		{"47K", 47e3},
		{"4k7", 4.7e3},
		{"4R7", 4.7},
		{"0R1", 0.1},
		{"-4k7", -4.7e3},
		{"1u", 1e-6},
		{"4.7µ", 4.7e-6},
		{"4.7μ", 4.7e-6}, // Greek mu, U+03BC, as some keyboards type it
		{"4.7 µ", 4.7e-6},
		{"2.2n", 2.2e-9}, // exact: 2.2*1e-9 would be one ulp off
		{"33p", 33e-12},
		{"1.5M", 1.5e6},
		{"2G", 2e9},
		{"100m", 0.1},
		{"1e-6", 1e-6},
		{"-0.5m", -0.5e-3},
		{" 1000 ", 1000},
		{"1e3k", 1e6},
		{"+5", 5},
	}
	for _, tc := range tests {
		t.Run(tc.in, func(t *testing.T) {
			got, err := Parse(tc.in)
			if err != nil {
				t.Fatalf("Parse(%q) error %v", tc.in, err)
			}
			if got != tc.want {
				t.Errorf("Parse(%q) = %v, want %v", tc.in, got, tc.want)
			}
		})
	}
}

// TestParseUnitMarkOnlyForItsUnit: "3v3" reads as volts only where volts are asked for,
// and a unit letter in the middle is still refused for other units.
func TestParseUnitMarkOnlyForItsUnit(t *testing.T) {
	for _, tc := range []struct{ in, unit string }{{"3v3", ""}, {"3v3", "s"}, {"1s5", "s"}, {"3v3", "A"}, {"3v3v3", "V"}, {"v3", "V"}, {"3v", "F"}} {
		if v, err := ParseUnit(tc.in, tc.unit); err == nil {
			t.Errorf("ParseUnit(%q, %q) = %v, want an error", tc.in, tc.unit, v)
		}
	}
}

func TestParseUnit(t *testing.T) {
	tests := []struct {
		in, unit string
		want     float64
	}{
		{"100mV", "V", 0.1},
		{"5V", "V", 5},
		{"5", "V", 5},
		{"3300mV", "V", 3.3},
		{"47kΩ", "Ω", 47e3},
		{"47k ohm", "Ω", 47e3},
		{"47R", "Ω", 47},
		{"4.7 µF", "F", 4.7e-6},
		{"10pf", "F", 10e-12},
		{"1ms", "s", 1e-3},
		{"250us", "s", 250e-6},
		{"1kHz", "Hz", 1e3},
		// Rail names with the unit letter as the decimal point (common practice).
		{"3v3", "V", 3.3},
		{"3V3", "V", 3.3},
		{"1V8", "V", 1.8},
		{"5v0", "V", 5},
		{"1A5", "A", 1.5},
	}
	for _, tc := range tests {
		t.Run(tc.in, func(t *testing.T) {
			got, err := ParseUnit(tc.in, tc.unit)
			if err != nil {
				t.Fatalf("ParseUnit(%q, %q) error %v", tc.in, tc.unit, err)
			}
			if math.Abs(got-tc.want) > 1e-15*math.Abs(tc.want) {
				t.Errorf("ParseUnit(%q, %q) = %v, want %v", tc.in, tc.unit, got, tc.want)
			}
		})
	}
}

func TestParseErrors(t *testing.T) {
	for _, in := range []string{"", "  ", "k", "abc", "4k7k", "1..2", "NaN", "Inf", "-inf", "1e400", "4x7", "1 2"} {
		t.Run(in, func(t *testing.T) {
			got, err := Parse(in)
			if !errors.Is(err, ErrSyntax) {
				t.Errorf("Parse(%q) = %v, %v; want an error wrapping ErrSyntax", in, got, err)
			}
		})
	}
	if _, err := ParseUnit("5A", "V"); err == nil {
		t.Error(`ParseUnit("5A", "V") accepted a wrong unit`)
	}
}

func TestFormat(t *testing.T) {
	tests := []struct {
		v      float64
		unit   string
		digits int
		want   string
	}{
		{47000, "Ω", 3, "47 kΩ"},
		{4700, "Ω", 3, "4.7 kΩ"},
		{4.7e-6, "F", 3, "4.7 µF"},
		{0.1, "V", 3, "100 mV"},
		{1e-3, "s", 3, "1 ms"},
		{0, "V", 3, "0 V"},
		{0, "", 3, "0"},
		{-0.0047, "A", 3, "-4.7 mA"},
		// decades around each prefix boundary
		{1, "V", 3, "1 V"},
		{10, "V", 3, "10 V"},
		{100, "V", 3, "100 V"},
		{1000, "V", 3, "1 kV"},
		{1e-6, "F", 3, "1 µF"},
		{1e-9, "F", 3, "1 nF"},
		{1e6, "Ω", 3, "1 MΩ"},
		// rounding carries into the next prefix
		{999.96, "V", 3, "1 kV"},
		{0.99996, "V", 3, "1 V"},
		{999.4, "V", 3, "999 V"},
		{999.96e-6, "s", 3, "1 ms"},
		{999.96e9, "Hz", 3, "1000 GHz"}, // past the largest prefix, still 3 digits
		{1e12, "Hz", 3, "1000 GHz"},
		{1e-13, "F", 3, "0.1 pF"},
		{1234.5678, "Ω", 6, "1.23457 kΩ"},
		{4.7e-6, "F", 1, "5 µF"},
		{4.7e-6, "F", 0, "5 µF"},
		{math.NaN(), "V", 3, "n/a"},
		{math.Inf(1), "V", 3, "n/a"},
	}
	for _, tc := range tests {
		t.Run(tc.want, func(t *testing.T) {
			got := FormatDigits(tc.v, tc.unit, tc.digits)
			if got != tc.want {
				t.Errorf("FormatDigits(%v, %q, %d) = %q, want %q", tc.v, tc.unit, tc.digits, got, tc.want)
			}
		})
	}
}

func TestFormatParseRoundTrip(t *testing.T) {
	for _, v := range []float64{47e3, 4.7e-6, 0.1, 1e-3, 2.2e-9, 33e-12, 1.5e6, 100} {
		s := Format(v, "")
		got, err := Parse(s)
		if err != nil || math.Abs(got-v) > 1e-12*v {
			t.Errorf("Parse(Format(%v)) = Parse(%q) = %v, %v", v, s, got, err)
		}
	}
}
