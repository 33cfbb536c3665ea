package advice

import (
	"math"
	"testing"
)

// The series tables: IEC 60063 (values written from memory; E96 cross-read against a
// transcription of the standard's table). Structure of the standard: E6 is every other
// E12 value, E12 every other E24 value.
func TestSeriesTables(t *testing.T) {
	for _, c := range []struct {
		name string
		n    int
	}{{"E6", 6}, {"E12", 12}, {"E24", 24}, {"E96", 96}, {"e12", 12}} {
		t.Run(c.name, func(t *testing.T) {
			s := Series(c.name)
			if len(s) != c.n {
				t.Fatalf("len = %d, want %d", len(s), c.n)
			}
			for i := 1; i < len(s); i++ {
				if !(s[i] > s[i-1]) || s[0] != 1 || s[len(s)-1] >= 10 {
					t.Fatalf("not ascending in [1, 10): %v", s)
				}
			}
		})
	}
	for _, c := range []struct{ coarse, fine string }{{"E6", "E12"}, {"E12", "E24"}} {
		co, fi := Series(c.coarse), Series(c.fine)
		for i, v := range co {
			if fi[2*i] != v {
				t.Errorf("%s[%d] = %g, want %s[%d] = %g", c.coarse, i, v, c.fine, 2*i, fi[2*i])
			}
		}
	}
	if Series("E7") != nil {
		t.Errorf("Series(E7) = non-nil, want nil")
	}
}

// E96 follows the published formula round(10^(i/96)) to three significant digits at every
// position; E24 does not: 2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7 and 8.2 are the standard's
// historical values where the formula gives 2.6, 2.9, 3.2, 3.5, 3.8, 4.2, 4.6 and 8.3
// (IEC 60063, from memory).
func TestSeriesFormula(t *testing.T) {
	formula := func(n, i int, digits float64) float64 {
		p := math.Pow(10, digits-1)
		return math.Round(math.Pow(10, float64(i)/float64(n))*p) / p
	}
	for i, v := range Series("E96") {
		if want := formula(96, i, 3); math.Abs(v-want) > 1e-9 {
			t.Errorf("E96[%d] = %g, formula gives %g", i, v, want)
		}
	}
	var off []float64
	for i, v := range Series("E24") {
		if math.Abs(v-formula(24, i, 2)) > 1e-9 {
			off = append(off, v)
		}
	}
	want := []float64{2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 8.2}
	if len(off) != len(want) {
		t.Fatalf("E24 values off the formula = %v, want %v", off, want)
	}
	for i := range want {
		if off[i] != want[i] {
			t.Errorf("E24 off-formula[%d] = %g, want %g", i, off[i], want[i])
		}
	}
}

func TestSnap(t *testing.T) {
	for _, c := range []struct {
		name   string
		v      float64
		series string
		want   float64
	}{
		{"decade top 9.9 E12", 9.9, "E12", 10},
		{"decade bottom 0.98", 0.98, "E12", 1.0},
		{"just under a decade 0.0091", 0.0091, "E12", 0.01},
		{"9.1 nearer 10 than 8.2 in log", 9.1, "E12", 10},
		{"8.9 nearer 8.2 in log", 8.9, "E12", 8.2},
		{"ohms 4.6k", 4600, "E12", 4700},
		{"5.0 -> 4.7 (log, not linear)", 5.0, "E12", 4.7},
		{"1.05 E12", 1.05, "E12", 1.0},
		{"E6 0.82 -> 0.68", 0.82, "E6", 0.68},
		{"E24 2.9 -> 3.0", 2.9, "E24", 3.0},
		{"E96 9.9 -> 10.0", 9.9, "E96", 10},
		{"E96 49.9k exact", 49.9e3, "E96", 49.9e3},
		{"microfarads 0.9u -> 820n (log)", 0.9e-6, "E12", 0.82e-6},
		{"microfarads 0.95u -> 1u", 0.95e-6, "E12", 1e-6},
		{"worked example 50k in E24", 50e3, "E24", 51e3},
		{"exact value stays", 2.2e-6, "E6", 2.2e-6},
	} {
		t.Run(c.name, func(t *testing.T) {
			got := Snap(c.v, c.series)
			if math.Abs(got-c.want) > 1e-9*c.want {
				t.Errorf("Snap(%g, %s) = %g, want %g", c.v, c.series, got, c.want)
			}
		})
	}
	for _, c := range []struct {
		name   string
		v      float64
		series string
	}{{"negative", -1, "E12"}, {"zero", 0, "E12"}, {"nan", math.NaN(), "E12"}, {"unknown series", 1, "E5"}} {
		t.Run(c.name, func(t *testing.T) {
			if got := Snap(c.v, c.series); !math.IsNaN(got) {
				t.Errorf("Snap(%g, %s) = %g, want NaN", c.v, c.series, got)
			}
		})
	}
}

func TestValuesAndParts(t *testing.T) {
	v, err := Values("E12", 1e3, 1e4)
	if err != nil {
		t.Fatal(err)
	}
	if len(v) != 13 || v[0] != 1e3 || v[12] != 1e4 || v[6] != 3.3e3 {
		t.Errorf("Values(E12, 1k, 10k) = %v, want 13 values 1k..10k", v)
	}
	if _, err := Values("E13", 1, 10); err == nil {
		t.Errorf("Values(E13) err = nil, want an error")
	}
	for _, c := range []struct {
		name, spec string
		want       []float64
		series     string
		bad        bool
	}{
		{name: "list", spec: "100n 470n 1u 2.2u", want: []float64{100e-9, 470e-9, 1e-6, 2.2e-6}},
		{name: "commas and units", spec: "2.2uF,100nF", want: []float64{100e-9, 2.2e-6}},
		{name: "series", spec: "e24", series: "E24"},
		{name: "bad value", spec: "10n x", bad: true},
		{name: "negative", spec: "-1u", bad: true},
		{name: "empty", spec: " ", bad: true},
	} {
		t.Run(c.name, func(t *testing.T) {
			p, err := ParseParts(c.spec, "F")
			if c.bad {
				if err == nil {
					t.Fatalf("ParseParts(%q) err = nil, want an error", c.spec)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if p.Series != c.series || len(p.List) != len(c.want) {
				t.Fatalf("ParseParts(%q) = %+v, want series %q list %v", c.spec, p, c.series, c.want)
			}
			for i := range c.want {
				if math.Abs(p.List[i]-c.want[i]) > 1e-15 {
					t.Errorf("List[%d] = %g, want %g", i, p.List[i], c.want[i])
				}
			}
		})
	}
}
