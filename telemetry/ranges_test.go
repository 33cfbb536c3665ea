package telemetry

import (
	"errors"
	"math"
	"os"
	"strings"
	"testing"
)

func TestCheckRange(t *testing.T) {
	cases := []struct {
		key  string
		v    float64
		ok   bool
		want string
	}{
		{"vref", 5, true, ""},
		{"vref", 1e308, false, "ADC reference 1e+308 V is outside its range 100 mV to 10 V"},
		{"supply", 0, false, "supply 0 V is outside its range 500 mV to 1 kV"},
		{"supply", 48, true, ""},
		{"adc_bits", 32, false, "ADC resolution 32 bits is outside its range 4 bits to 24 bits"},
		{"period", 1e30, false, ""},
		{"r", 1e-300, false, ""},
		{"c", math.Inf(1), false, ""},
		{"load", 0, false, "load 0 Ω is outside its range: it must be above 0 Ω"},
		{"load", 1e12, true, ""},
		{"c", math.NaN(), false, ""},
		{"unknown_key", -5, true, ""},
	}
	for _, c := range cases {
		err := CheckRange(c.key, c.v)
		if (err == nil) != c.ok {
			t.Errorf("CheckRange(%s, %g) = %v, want ok=%v", c.key, c.v, err, c.ok)
			continue
		}
		if err != nil && !errors.Is(err, ErrOutOfRange) {
			t.Errorf("CheckRange(%s, %g): %v does not wrap ErrOutOfRange", c.key, c.v, err)
		}
		if c.want != "" && (err == nil || err.Error() != c.want) {
			t.Errorf("CheckRange(%s, %g) = %q, want %q", c.key, c.v, err, c.want)
		}
	}
}

func TestCheckDeadbandAndCount(t *testing.T) {
	if err := CheckDeadband(256, 10); err != nil {
		t.Errorf("deadband 256 of 10 bits: %v", err)
	}
	if err := CheckDeadband(5000, 10); err == nil {
		t.Error("deadband 5000 of 10 bits accepted")
	}
	if err := CheckCount("sp", 99999, 10); err == nil {
		t.Error("sp 99999 of 10 bits accepted")
	}
	if err := CheckCount("pv", 1023, 10); err != nil {
		t.Errorf("pv 1023 of 10 bits: %v", err)
	}
}

// TestReadmeRangeTable checks that the README's "Input ranges" table shows the bounds of
// the one range table (Ranges), so the two cannot drift apart.
func TestReadmeRangeTable(t *testing.T) {
	b, err := os.ReadFile("../README.md")
	if err != nil {
		t.Skipf("README not found: %v", err)
	}
	readme := string(b)
	for _, r := range Ranges {
		key := r.Key
		if key == "period" {
			key = "period_us"
		}
		var row string
		for _, l := range strings.Split(readme, "\n") {
			if strings.HasPrefix(l, "| `"+key+"` |") {
				row = l
			}
		}
		if row == "" {
			t.Errorf("README has no input range row for %s", key)
			continue
		}
		want := formatRangeValue(r.Min, r.Unit) + " to " + formatRangeValue(r.Max, r.Unit)
		if math.IsInf(r.Max, 1) {
			want = "above " + formatRangeValue(r.Min, r.Unit)
		}
		if !strings.Contains(row, want) {
			t.Errorf("README row %q lacks %q", row, want)
		}
	}
}
