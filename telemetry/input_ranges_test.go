package telemetry

import (
	"errors"
	"strings"
	"testing"
)

// TestInputRanges checks values that parse but cannot be: each case gives the exact
// messages of the values dropped, the lines rejected and the error that stops the scan.
// The ranges are the input range table (ranges.go, the README's "Input ranges").
func TestInputRanges(t *testing.T) {
	tests := []struct {
		name    string
		in      string
		samples int
		meta    Meta     // merged meta at the end
		drops   []string // Stats.FirstDrops
		rejects []string // Stats.FirstRejects
		err     string   // Err()
	}{
		{
			name:  "vref far too high drops only vref",
			in:    "# vref=1e308 adc_bits=10\n",
			meta:  Meta{ADCBits: 10, Set: FieldADCBits},
			drops: []string{`in.txt:1: telemetry: vref dropped: ADC reference 1e+308 V is outside its range 100 mV to 10 V: "# vref=1e308 adc_bits=10"`},
		},
		{
			name:  "capacitor far too large",
			in:    "# c=1e308 r=47k\n",
			meta:  Meta{R: 47e3, Set: FieldR},
			drops: []string{`in.txt:1: telemetry: c dropped: capacitor 1e+308 F is outside its range 1 pF to 1 F: "# c=1e308 r=47k"`},
		},
		{
			name:  "resistor far too small",
			in:    "# r=1e-300 c=1u\n",
			meta:  Meta{C: 1e-6, Set: FieldC},
			drops: []string{`in.txt:1: telemetry: r dropped: series resistor 1e-300 Ω is outside its range 1 Ω to 100 MΩ: "# r=1e-300 c=1u"`},
		},
		{
			name:  "deadband beyond a quarter of a 10-bit scale",
			in:    "# deadband=5000 adc_bits=10\n",
			meta:  Meta{ADCBits: 10, Set: FieldADCBits},
			drops: []string{`in.txt:1: telemetry: deadband dropped: deadband 5000 is outside its range 0 to 256 (counts, a quarter of the 10-bit full scale at most): "# deadband=5000 adc_bits=10"`},
		},
		{
			name:  "deadband said before the resolution is dropped when it comes",
			in:    "# deadband=300\n# adc_bits=10\n",
			meta:  Meta{ADCBits: 10, Set: FieldADCBits},
			drops: []string{`in.txt:2: telemetry: deadband dropped: deadband 300 is outside its range 0 to 256 (counts, a quarter of the 10-bit full scale at most): "# adc_bits=10"`},
		},
		{
			name:  "sample period far too long",
			in:    "# period_us=1e30 vref=5\n",
			meta:  Meta{Vref: 5, Set: FieldVref},
			drops: []string{`in.txt:1: telemetry: period_us dropped: sample period 1e+24 s is outside its range 1 µs to 10 s: "# period_us=1e30 vref=5"`},
		},
		{
			name: "unreadable and unknown values",
			in:   "# vref=abc mode=four-state adc_bits=9.5 supply=5\n",
			meta: Meta{Supply: 5, Set: FieldSupply},
			drops: []string{
				`in.txt:1: telemetry: vref dropped: bad meta value: "# vref=abc mode=four-state adc_bits=9.5 supply=5"`,
				`in.txt:1: telemetry: mode dropped: bad meta value: "# vref=abc mode=four-state adc_bits=9.5 supply=5"`,
				`in.txt:1: telemetry: adc_bits dropped: bad meta value: "# vref=abc mode=four-state adc_bits=9.5 supply=5"`,
			},
		},
		{
			name:  "resolution outside 4 to 24 bits",
			in:    "# adc_bits=32\n",
			drops: []string{`in.txt:1: telemetry: adc_bits dropped: ADC resolution 32 bits is outside its range 4 bits to 24 bits: "# adc_bits=32"`},
		},
		{
			name:    "sp and pv outside the 10-bit range",
			in:      "# adc_bits=10\nsp=99999 pv=500\nsp=500 pv=1024\nt=5 sp=500 pv=-1 u=1\nsp=1023 pv=0\n",
			samples: 1,
			meta:    Meta{ADCBits: 10, Set: FieldADCBits},
			rejects: []string{
				`in.txt:2: telemetry: sp 99999 is outside its range 0 to 1023 (counts of a 10-bit converter): "sp=99999 pv=500"`,
				`in.txt:3: telemetry: pv 1024 is outside its range 0 to 1023 (counts of a 10-bit converter): "sp=500 pv=1024"`,
				`in.txt:4: telemetry: pv -1 is outside its range 0 to 1023 (counts of a 10-bit converter): "t=5 sp=500 pv=-1 u=1"`,
			},
		},
		{
			name:    "sp and pv in a table outside the 12-bit range",
			in:      "# adc_bits=12\nsp,pv\n4096,1\n4095,4095\n",
			samples: 1,
			meta:    Meta{ADCBits: 12, Set: FieldADCBits},
			rejects: []string{`in.txt:3: telemetry: sp 4096 is outside its range 0 to 4095 (counts of a 12-bit converter): "4096,1"`},
		},
		{
			name:    "byte order mark at the start of a CSV export",
			in:      "\xEF\xBB\xBFt,sp,pv\r\n1,2,3\r\n",
			samples: 1,
		},
		{
			name:    "byte order mark before a data line",
			in:      "\xEF\xBB\xBFsp=1 pv=2\n",
			samples: 1,
		},
		{
			name:    "byte order mark later in the file is not skipped",
			in:      "sp=1 pv=2\n\xEF\xBB\xBFsp=1 pv=2\n",
			samples: 1,
			rejects: []string{`in.txt:2: telemetry: binary or control bytes: "\u{feff}sp=1 pv=2"`},
		},
		{
			name:    "extra with a key the parser cannot take",
			in:      "sp=1 pv=2 temp°C=21 hum=40\n",
			samples: 1,
			drops:   []string{`in.txt:1: telemetry: temp°C dropped: bad key: "sp=1 pv=2 temp°C=21 hum=40"`},
		},
		{
			name:    "extra with a value that is not a number",
			in:      "t=1 sp=1 pv=2 temp=warm u=1\n",
			samples: 1,
			drops:   []string{`in.txt:1: telemetry: temp dropped: bad number: "t=1 sp=1 pv=2 temp=warm u=1"`},
		},
		{
			name:    "extra column with a value that is not a number",
			in:      "sp,pv,temp\n1,2,warm\n",
			samples: 1,
			drops:   []string{`in.txt:2: telemetry: temp dropped: bad number: "1,2,warm"`},
		},
		{
			name:    "capture of an unknown version is refused",
			in:      "#caploop-capture v2 start=2026-12-01T00:00:00Z\n0.1 < sp=1 pv=2\n",
			rejects: []string{`in.txt:1: telemetry: capture format "v2" is not one this caploop reads (v1): "#caploop-capture v2 start=2026-12-01T00:00:00Z"`},
			err:     `in.txt:1: telemetry: capture format "v2" is not one this caploop reads (v1): "#caploop-capture v2 start=2026-12-01T00:00:00Z"`,
		},
		{
			name:    "capture header with a control byte keeps its reason",
			in:      "#caploop-capture\x03\n",
			rejects: []string{`in.txt:1: telemetry: capture format "#caploop-capture\x03" is not one this caploop reads (v1): "#caploop-capture\x03"`},
			err:     `in.txt:1: telemetry: capture format "#caploop-capture\x03" is not one this caploop reads (v1): "#caploop-capture\x03"`,
		},
		{
			name:    "capture without a version is refused",
			in:      "\xEF\xBB\xBF#caploop-capture\n0.1 < sp=1 pv=2\n",
			rejects: []string{`in.txt:1: telemetry: capture header names no format version; this caploop reads v1: "#caploop-capture"`},
			err:     `in.txt:1: telemetry: capture header names no format version; this caploop reads v1: "#caploop-capture"`,
		},
	}
	for _, tc := range tests {
		for _, noFast := range []bool{false, true} {
			t.Run(tc.name, func(t *testing.T) {
				sc := NewScanner(strings.NewReader(tc.in))
				sc.Name = "in.txt"
				sc.p.noFast = noFast
				n := 0
				for sc.Scan() {
					if sc.Kind() == RecSample {
						n++
					}
				}
				st := sc.Stats()
				checkStats(t, st)
				if n != tc.samples {
					t.Errorf("%d samples, want %d", n, tc.samples)
				}
				if m := sc.Meta(); !metasEqual([]Meta{m}, []Meta{tc.meta}) {
					t.Errorf("meta %+v, want %+v", m, tc.meta)
				}
				if got := messages(st.FirstDrops); !equalStrings(got, tc.drops) {
					t.Errorf("drops:\n got %q\nwant %q", got, tc.drops)
				}
				if st.Dropped != int64(len(tc.drops)) {
					t.Errorf("Dropped = %d, want %d", st.Dropped, len(tc.drops))
				}
				if got := messages(st.FirstRejects); !equalStrings(got, tc.rejects) {
					t.Errorf("rejects:\n got %q\nwant %q", got, tc.rejects)
				}
				var got string
				if err := sc.Err(); err != nil {
					got = err.Error()
				}
				if got != tc.err {
					t.Errorf("Err() = %q, want %q", got, tc.err)
				}
			})
		}
	}
}

func messages(errs []*ParseError) []string {
	var out []string
	for _, e := range errs {
		out = append(out, e.Error())
	}
	return out
}

func equalStrings(a, b []string) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// TestInputRangeSentinels checks that the new reasons are counted and found by errors.Is.
func TestInputRangeSentinels(t *testing.T) {
	got := scanAll(t, "# adc_bits=10 vref=1e308\nsp=99999 pv=1\n")
	if got.stats.Rejects(ErrCountRange) != 1 {
		t.Errorf("Rejects(ErrCountRange) = %d, want 1", got.stats.Rejects(ErrCountRange))
	}
	r := got.stats.FirstRejects[0]
	if !errors.Is(r, ErrCountRange) || !errors.Is(r, ErrOutOfRange) || r.Field != "sp" {
		t.Errorf("reject %v: field %q, want sp, ErrCountRange and ErrOutOfRange", r, r.Field)
	}
	if d := got.stats.FirstDrops[0]; !errors.Is(d, ErrOutOfRange) || d.Field != "vref" {
		t.Errorf("drop %v: field %q, want vref and ErrOutOfRange", d, d.Field)
	}
	got = scanAll(t, "#caploop-capture v9\n")
	if got.stats.Rejects(ErrCaptureVersion) != 1 || !errors.Is(got.err, ErrCaptureVersion) {
		t.Errorf("v9 capture: %d refused, Err %v", got.stats.Rejects(ErrCaptureVersion), got.err)
	}
}
