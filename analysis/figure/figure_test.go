package figure

import (
	"math"
	"testing"
)

func fp(v float64) *float64 { return &v }

func TestFormatters(t *testing.T) {
	cases := []struct{ got, want string }{
		{SI(nil, "V"), Missing},
		{SI(fp(math.NaN()), "V"), Missing},
		{SI(fp(0.0472), "V"), "47.2 mV"},
		{Value(math.Inf(1), "s"), Missing},
		{Pct(fp(0.253)), "25.3 %"},
		{Pct(nil), Missing},
		{Counts(fp(1)), "1 count"},
		{Counts(fp(12.5)), "12.5 counts"},
		{VoltsOrCounts(nil, fp(3)), "3 counts"},
		{VoltsOrCounts(fp(1.2), fp(3)), "1.2 V"},
		{SecondsOrSamples(nil, fp(1)), "1 sample"},
		{SecondsOrSamples(nil, fp(2.5)), "2.5 samples"},
		{Interval(&[2]float64{9.8e-3, 10.2e-3}, "s"), "[9.8 ms, 10.2 ms]"},
		{Interval(nil, "s"), Missing},
		{HalfWidth(fp(10), &[2]float64{9, 11}), "±10.0 %"},
		{HalfWidth(fp(0), &[2]float64{-1, 1}), ""},
		{Change(0.1, 0.06, "V"), "-40 mV (-40 %)"},
		{Change(0.05, 0.06, "V"), "+10 mV (+20 %)"},
		{List([]int{1, 2, 3}), "1, 2, 3"},
		{List(make([]int, 20)), "0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, ... (20 in all)"},
		{Count(1, "band jump"), "1 band jump"},
		{Count(0, "band jump"), "0 band jumps"},
		{Count(int64(3), "segment"), "3 segments"},
		{Bytes(1536), "1.5 KiB"},
		{Num(42), "42"},
		{Num(3.14159), "3.142"},
	}
	for i, c := range cases {
		if c.got != c.want {
			t.Errorf("case %d: got %q, want %q", i, c.got, c.want)
		}
	}
}
