package export

import (
	"math"
	"math/rand/v2"
	"strconv"
	"testing"
)

// TestAppendFixed compares the hand-written digits with strconv over a table and random
// values.
func TestAppendFixed(t *testing.T) {
	cases := []struct {
		v    int64
		dec  int
		want string
	}{
		{0, 6, "0.000000"},
		{1, 6, "0.000001"},
		{-1234567, 6, "-1.234567"},
		{4294967296000000, 6, "4294967296.000000"},
		{5, 9, "0.000000005"},
		{123456789012, 9, "123.456789012"},
		{99, 1, "9.9"},
		{-999999999999999999, 12, "-999999.999999999999"},
	}
	for _, c := range cases {
		if got := string(appendFixed(nil, c.v, c.dec)); got != c.want {
			t.Errorf("appendFixed(%d, %d) = %q, want %q", c.v, c.dec, got, c.want)
		}
	}
	r := rand.New(rand.NewPCG(1, 2))
	for range 20000 {
		dec := 1 + r.IntN(12)
		v := r.Int64N(1e15) - 5e14
		// strconv's exact decimal of v / 10^dec (both are exact in a big-enough format).
		want := strconv.FormatFloat(float64(v)/math.Pow(10, float64(dec)), 'f', dec, 64)
		got := string(appendFixed(nil, v, dec))
		if f1, _ := strconv.ParseFloat(got, 64); f1 != float64(v)/math.Pow(10, float64(dec)) || len(got) != len(want) {
			t.Fatalf("appendFixed(%d, %d) = %q, strconv gives %q", v, dec, got, want)
		}
	}
}

func TestAppendInt(t *testing.T) {
	for _, v := range []int64{0, 7, 9, 10, 99, 100, 12345, -1, -100, math.MaxInt64, math.MinInt64} {
		if got, want := string(appendInt(nil, v)), strconv.FormatInt(v, 10); got != want {
			t.Errorf("appendInt(%d) = %q, want %q", v, got, want)
		}
	}
}

func TestAppendCounts(t *testing.T) {
	// Every number reads back exactly, however it was written.
	r := rand.New(rand.NewPCG(3, 4))
	for range 100000 {
		v := float64(r.Int64N(2e9)-1e9) / pow10f[r.IntN(7)]
		if r.IntN(4) == 0 {
			v = r.NormFloat64() * math.Pow(10, float64(r.IntN(20)-10))
		}
		got := string(appendCounts(nil, v))
		if back, err := strconv.ParseFloat(got, 64); err != nil || back != v {
			t.Fatalf("appendCounts(%v) = %q reads back as %v", v, got, back)
		}
	}
	for _, c := range []struct {
		v    float64
		want string
	}{{512, "512"}, {-3, "-3"}, {511.5, "511.5"}, {1e-7, "1e-07"}, {1e20, "1e+20"}, {0.1, "0.1"},
		{-0.5, "-0.5"}, {21.25, "21.25"}, {0.000001, "0.000001"}, {1.0000001, "1.0000001"}} {
		if got := string(appendCounts(nil, c.v)); got != c.want {
			t.Errorf("appendCounts(%v) = %q, want %q", c.v, got, c.want)
		}
	}
}

// TestVoltsDecimals: 6 decimals keep a tenth of a step for common converters; finer
// ones get more, up to 12.
func TestVoltsDecimals(t *testing.T) {
	for _, c := range []struct {
		lsb  float64
		want int
	}{{5.0 / 1024, 6}, {3.3 / 4096, 6}, {5.0 / (1 << 16), 6}, {2.5 / (1 << 24), 8}, {0.1 / (1 << 24), 10}, {1e-15, 12}} {
		if got := voltsDecimals(c.lsb); got != c.want {
			t.Errorf("voltsDecimals(%g) = %d, want %d", c.lsb, got, c.want)
		}
	}
}

// TestHeaderName: untrusted names are sanitised and defused for spreadsheets.
func TestHeaderName(t *testing.T) {
	for _, c := range []struct{ in, want string }{
		{"temp_c", "temp_c"},
		{"=HYPERLINK(1)", "'=HYPERLINK(1)"},
		{"-x", "'-x"},
		{"a\x1b[31mb", `a\x1b[31mb`},
		{"bad\xffname", `bad\xffname`},
		{"", "extra"},
		{"tab\there", `tab\x09here`},
	} {
		if got := headerName(c.in); got != c.want {
			t.Errorf("headerName(%q) = %q, want %q", c.in, got, c.want)
		}
	}
}
