package telemetry

import (
	"errors"
	"fmt"
	"math"
	"reflect"
	"strings"
	"testing"
)

// scanned is everything a Scanner returned for one input.
type scanned struct {
	samples []Sample
	extras  [][]Extra
	metas   []Meta // merged meta at each meta record
	events  []Event
	stats   Stats
	err     error
}

func scanAll(t testing.TB, in string) scanned {
	t.Helper()
	sc := NewScanner(strings.NewReader(in))
	sc.Name = "in.txt"
	var got scanned
	for sc.Scan() {
		switch sc.Kind() {
		case RecSample:
			got.samples = append(got.samples, sc.Sample())
			got.extras = append(got.extras, append([]Extra(nil), sc.Extras()...))
		case RecMeta:
			got.metas = append(got.metas, sc.Meta())
		case RecEvent:
			got.events = append(got.events, sc.Event())
		default:
			t.Fatalf("Scan returned kind %v", sc.Kind())
		}
	}
	got.stats = sc.Stats()
	got.err = sc.Err()
	checkStats(t, got.stats)
	return got
}

// checkStats checks the invariants that hold for any input.
func checkStats(t testing.TB, st Stats) {
	t.Helper()
	sum := st.Samples + st.Metas + st.Comments + st.Blank + st.Headers + st.Events + st.Rejected
	if sum != st.Lines {
		t.Errorf("stats do not add up: %+v (sum %d, lines %d)", st, sum, st.Lines)
	}
	var byReason int64
	for _, rc := range st.RejectReasons() {
		byReason += rc.Count
		if st.Rejects(rc.Err) != rc.Count {
			t.Errorf("Rejects(%v) = %d, RejectReasons says %d", rc.Err, st.Rejects(rc.Err), rc.Count)
		}
	}
	if byReason != st.Rejected {
		t.Errorf("rejects by reason add up to %d, want %d", byReason, st.Rejected)
	}
	if st.Partial > st.Rejected {
		t.Errorf("partial %d > rejected %d", st.Partial, st.Rejected)
	}
	if want := min(st.Rejected, MaxRejectsKept); int64(len(st.FirstRejects)) != want {
		t.Errorf("kept %d rejects, want %d", len(st.FirstRejects), want)
	}
	for _, e := range st.FirstRejects {
		if !safeText(e.Text) || !safeText(e.Error()) {
			t.Errorf("reject text not sanitised: %q", e.Error())
		}
	}
	if want := min(st.Dropped, MaxRejectsKept); int64(len(st.FirstDrops)) != want {
		t.Errorf("kept %d drops, want %d", len(st.FirstDrops), want)
	}
	for _, e := range st.FirstDrops {
		if !e.Dropped || e.Field == "" || !safeText(e.Text) || !safeText(e.Error()) {
			t.Errorf("bad drop record %+v: %q", e, e.Error())
		}
	}
}

// rej is the part of a ParseError a test case checks.
type rej struct {
	line  int64
	field string
	err   error
}

func TestScannerLines(t *testing.T) {
	const tu = HasT | HasU
	long := strings.Repeat("x", 2000)
	pad := func(s string, n int) string { return s + strings.Repeat(" ", n-len(s)) }
	tests := []struct {
		name    string
		in      string
		samples []Sample
		extras  [][]Extra // nil: no extras expected on any sample
		metas   []Meta
		events  []Event
		rejects []rej
		partial int64
	}{
		{
			name:    "data line",
			in:      "t=123456 sp=512 pv=498 u=1\n",
			samples: []Sample{{Line: 1, T: 123456, SP: 512, PV: 498, U: Charge, Flags: tu}},
		},
		{
			name:    "tabs commas and extra spaces",
			in:      "  t=1\tsp=2,pv=3, u=0  \n",
			samples: []Sample{{Line: 1, T: 1, SP: 2, PV: 3, U: Hold, Flags: tu}},
		},
		{
			name: "crlf and last line without newline",
			in:   "sp=1 pv=2\r\nsp=3 pv=4",
			samples: []Sample{
				{Line: 1, SP: 1, PV: 2},
				{Line: 2, Index: 1, SP: 3, PV: 4},
			},
		},
		{
			name: "drive spellings",
			in:   "sp=0 pv=0 u=+\nsp=0 pv=0 u=-\nsp=0 pv=0 u=-1\nsp=0 pv=0 u=+1\nsp=0 pv=0 u=0\n",
			samples: []Sample{
				{Line: 1, U: Charge, Flags: HasU},
				{Line: 2, Index: 1, U: Discharge, Flags: HasU},
				{Line: 3, Index: 2, U: Discharge, Flags: HasU},
				{Line: 4, Index: 3, U: Charge, Flags: HasU},
				{Line: 5, Index: 4, U: Hold, Flags: HasU},
			},
		},
		{
			name:    "decimals exponents and signs",
			in:      "sp=512.25 pv=4.985e2\nsp=+1 pv=-3.5\nsp=.5 pv=0.000001\n",
			samples: []Sample{{Line: 1, SP: 512.25, PV: 498.5}, {Line: 2, Index: 1, SP: 1, PV: -3.5}, {Line: 3, Index: 2, SP: 0.5, PV: 1e-6}},
		},
		{
			name:    "keys in any order with n",
			in:      "u=-1 pv=7 n=42 sp=9 t=5\n",
			samples: []Sample{{Line: 1, T: 5, N: 42, SP: 9, PV: 7, U: Discharge, Flags: HasT | HasN | HasU}},
		},
		{
			name:    "extra channels",
			in:      "sp=1 pv=2 temp=21.5 i_load=0.3\nsp=1 pv=2 temp=22\n",
			samples: []Sample{{Line: 1, SP: 1, PV: 2}, {Line: 2, Index: 1, SP: 1, PV: 2}},
			extras:  [][]Extra{{{"temp", 21.5}, {"i_load", 0.3}}, {{"temp", 22}}},
		},
		{
			// 32-bit board clock: 4294967000, 4294967295, then 200 after the wrap is
			// 2^32 + 200 = 4294967496.
			name: "t wraps at 2^32",
			in:   "t=4294967000 sp=0 pv=0\nt=4294967295 sp=0 pv=0\nt=200 sp=0 pv=0\nt=1200 sp=0 pv=0\n",
			samples: []Sample{
				{Line: 1, T: 4294967000, Flags: HasT},
				{Line: 2, Index: 1, T: 4294967295, Flags: HasT},
				{Line: 3, Index: 2, T: 4294967496, Flags: HasT},
				{Line: 4, Index: 3, T: 4294968496, Flags: HasT},
			},
		},
		{
			name: "backward jump is not a wrap",
			in:   "t=1000000 sp=0 pv=0\nt=5 sp=0 pv=0\n",
			samples: []Sample{
				{Line: 1, T: 1000000, Flags: HasT},
				{Line: 2, Index: 1, T: 5, Flags: HasT},
			},
		},
		{
			name:    "64-bit board clock kept",
			in:      "t=5000000000 sp=0 pv=0\n",
			samples: []Sample{{Line: 1, T: 5000000000, Flags: HasT}},
		},
		{
			name:    "blank lines and comments",
			in:      "\n   \n# a note about the greenhouse bias\n#\nsp=1 pv=1\n",
			samples: []Sample{{Line: 5, SP: 1, PV: 1}},
		},
		{
			name: "meta line with SI values",
			in:   "# vref=5.0 adc_bits=10 period_us=1000 mode=three-state deadband=21 supply=5.0 r=47k c=1u load=1e6\n",
			metas: []Meta{{Vref: 5, ADCBits: 10, Period: 1e-3, Mode: ThreeState, Deadband: 21, Supply: 5, R: 47000, C: 1e-6, Load: 1e6,
				Set: FieldVref | FieldADCBits | FieldPeriod | FieldMode | FieldDeadband | FieldSupply | FieldR | FieldC | FieldLoad}},
		},
		{
			name: "meta prefixes and units",
			in:   "#r=4k7 c=4.7µ supply=3300mV mode=two-state load=1M,vref=5V period_us=1k\n",
			metas: []Meta{{R: 4700, C: 4.7e-6, Supply: 3.3, Mode: TwoState, Load: 1e6, Vref: 5, Period: 1e-3,
				Set: FieldR | FieldC | FieldSupply | FieldMode | FieldLoad | FieldVref | FieldPeriod}},
		},
		{
			name: "meta repeats mid-stream",
			in:   "# vref=5 deadband=21\nsp=1 pv=2\n# deadband=14\nsp=3 pv=4\n",
			metas: []Meta{
				{Vref: 5, Deadband: 21, Set: FieldVref | FieldDeadband},
				{Vref: 5, Deadband: 14, Set: FieldVref | FieldDeadband},
			},
			samples: []Sample{{Line: 2, SP: 1, PV: 2}, {Line: 4, Index: 1, SP: 3, PV: 4}},
		},
		{
			name:  "unknown meta key ignored",
			in:    "# firmware=1.2 vref=3.3\n",
			metas: []Meta{{Vref: 3.3, Set: FieldVref}},
		},
		{
			// A bad value drops its key (see TestInputRanges); a malformed word or a key
			// given twice rejects the line.
			name:    "bad meta values",
			in:      "# vref=abc\n# mode=four-state\n# adc_bits=40\n# r=-1\n# vref=5 vref=3\n# vref=5 stray\n",
			metas:   []Meta{{}, {}, {}, {}},
			rejects: []rej{{5, "vref", ErrDuplicateKey}, {6, "stray", ErrBadMeta}},
		},
		{
			name: "missing and bad fields",
			in:   "t=1 sp=5\nsp=5x2 pv=1\nsp=1 pv=2 u=2\nsp=NaN pv=1\nsp=1 pv=Inf\nsp= pv=1\nt=-5 sp=1 pv=2\nsp pv=1\nhello world\n",
			rejects: []rej{
				{1, "pv", ErrMissingField}, {2, "sp", ErrBadNumber}, {3, "u", ErrBadDrive},
				{4, "sp", ErrBadNumber}, {5, "pv", ErrBadNumber}, {6, "sp", ErrBadNumber},
				{7, "t", ErrBadNumber}, {8, "", ErrSyntax}, {9, "", ErrSyntax},
			},
		},
		{
			name: "number syntax outside the protocol",
			in:   "sp=0x1p3 pv=1\nsp=1_000 pv=1\nsp=inf pv=1\nsp=1e pv=1\nsp=--1 pv=1\nsp=1e400 pv=1\nsp=. pv=1\nsp=1.5e-3 pv=-2E+2\n",
			rejects: []rej{
				{1, "sp", ErrBadNumber}, {2, "sp", ErrBadNumber}, {3, "sp", ErrBadNumber}, {4, "sp", ErrBadNumber},
				{5, "sp", ErrBadNumber}, {6, "sp", ErrBadNumber}, {7, "sp", ErrBadNumber},
			},
			samples: []Sample{{Line: 8, SP: 1.5e-3, PV: -200}},
		},
		{
			name:    "duplicate key",
			in:      "sp=1 sp=2 pv=3\nsp=1 pv=2 x=1 x=2\n",
			rejects: []rej{{1, "sp", ErrDuplicateKey}, {2, "x", ErrDuplicateKey}},
			partial: 2,
		},
		{
			// A reset mid-line glues the start of one line to the next one.
			name:    "reset artefacts",
			in:      "t=1234 sp=51t=1235 sp=512 pv=498 u=1\npv=498 u=1\nt=1236 sp=512 pv=497 u=1\n",
			rejects: []rej{{1, "sp", ErrBadNumber}, {2, "sp", ErrMissingField}},
			samples: []Sample{{Line: 3, T: 1236, SP: 512, PV: 497, U: Charge, Flags: tu}},
			partial: 2,
		},
		{
			name:    "binary junk and escape sequences",
			in:      "\x00\x01\xff\xfe\n\x1b[2Jsp=1 pv=2\nsp=1 pv=2\x07\n# note \xff\nsp=1 pv=2 \x9b=1\n",
			rejects: []rej{{1, "", ErrBinary}, {2, "", ErrBinary}, {3, "", ErrBinary}, {4, "", ErrBinary}, {5, "", ErrBinary}},
		},
		{
			name: "csv table",
			in:   "t,sp,pv,u\n1000,512,498,1\n2000,512,499.5,-1\n",
			samples: []Sample{
				{Line: 2, T: 1000, SP: 512, PV: 498, U: Charge, Flags: tu},
				{Line: 3, Index: 1, T: 2000, SP: 512, PV: 499.5, U: Discharge, Flags: tu},
			},
		},
		{
			name:    "tsv table without t",
			in:      "sp\tpv\tu\r\n512\t498\t+\r\n",
			samples: []Sample{{Line: 2, SP: 512, PV: 498, U: Charge, Flags: HasU}},
		},
		{
			name:    "table with n and an extra column",
			in:      "n, sp, pv, temp\n7, 1, 2, 21.5\n",
			samples: []Sample{{Line: 2, N: 7, SP: 1, PV: 2, Flags: HasN}},
			extras:  [][]Extra{{{"temp", 21.5}}},
		},
		{
			name:    "table rows of the wrong length",
			in:      "sp,pv\n1,2,3\n1\n1,x\n",
			rejects: []rej{{2, "", ErrFieldCount}, {3, "", ErrFieldCount}, {4, "pv", ErrBadNumber}},
		},
		{
			name:    "numbers before any header",
			in:      "512,498,1\n",
			rejects: []rej{{1, "", ErrNoHeader}},
		},
		{
			name:    "header without pv",
			in:      "sp,u\nsp,sp,pv\n",
			rejects: []rej{{1, "pv", ErrMissingField}, {2, "sp", ErrDuplicateKey}},
		},
		{
			name:    "key=value lines still read after a header",
			in:      "sp,pv\n1,2\nsp=3 pv=4\n",
			samples: []Sample{{Line: 2, SP: 1, PV: 2}, {Line: 3, Index: 1, SP: 3, PV: 4}},
		},
		{
			name:    "too long line is cut and the next one read",
			in:      long + "\nsp=1 pv=2\n",
			rejects: []rej{{1, "", ErrTooLong}},
			samples: []Sample{{Line: 2, SP: 1, PV: 2}},
		},
		{
			name:    "line of exactly 1024 bytes with CRLF",
			in:      pad("sp=1 pv=2", 1024) + "\r\n" + pad("sp=3 pv=4", 1025) + "\n",
			samples: []Sample{{Line: 1, SP: 1, PV: 2}},
			rejects: []rej{{2, "", ErrTooLong}},
		},
		{
			name:    "too long last line without newline",
			in:      "sp=1 pv=2\n" + long,
			samples: []Sample{{Line: 1, SP: 1, PV: 2}},
			rejects: []rej{{2, "", ErrTooLong}},
		},
		{
			name: "capture",
			in: "#caploop-capture v1 start=2026-12-01T23:40:00.123456Z source=/dev/ttyUSB0\n" +
				"0.000100 < # vref=5 adc_bits=10\n" +
				"0.001000 < t=1000 sp=512 pv=498 u=1\r\n" +
				"0.002500 > set deadband=14\n" +
				"1.5 ! mark\n" +
				"2.000001 < t=2000 sp=512 pv=499 u=0\n" +
				"3.000000 < \n",
			metas: []Meta{{Vref: 5, ADCBits: 10, Set: FieldVref | FieldADCBits}},
			samples: []Sample{
				{Line: 3, T: 1000, Host: 1000000, SP: 512, PV: 498, U: Charge, Flags: tu | HasHost},
				{Line: 6, Index: 1, T: 2000, Host: 2000001000, SP: 512, PV: 499, U: Hold, Flags: tu | HasHost},
			},
			events: []Event{
				{Host: 2500000, Dir: ToBoard, Text: "set deadband=14", Line: 4},
				{Host: 1500000000, Dir: HostEvent, Text: "mark", Line: 5},
			},
		},
		{
			name: "capture keeps hostile text safe",
			in: "#caploop-capture v1\n" +
				"0.1 ! unplugged \x1b[2J\n" +
				"0.2 < \x00\x00\n" +
				"bad record\n" +
				"0.3 ? what\n",
			events:  []Event{{Host: 100000000, Dir: HostEvent, Text: `unplugged \x1b[2J`, Line: 2}},
			rejects: []rej{{3, "", ErrBinary}, {4, "", ErrBadCapture}, {5, "", ErrBadCapture}},
		},
		{
			name: "capture time prefixes",
			in: "#caploop-capture v1\n" +
				"123456789.999999999 < sp=1 pv=2\r\n" +
				"1234567890.5 < sp=1 pv=2\n" +
				"1.1234567891 < sp=1 pv=2\n" +
				"1. < sp=1 pv=2\n" +
				".5 < sp=1 pv=2\n" +
				"1.5 <sp=1 pv=2\n" +
				"1.5 <\n" +
				"2.25 < t=7 sp=1 pv=2 u=1 extra=3\n",
			samples: []Sample{
				{Line: 2, Host: 123456789999999999, SP: 1, PV: 2, Flags: HasHost},
				{Line: 9, Index: 1, T: 7, Host: 2250000000, SP: 1, PV: 2, U: Charge, Flags: HasT | HasU | HasHost},
			},
			extras:  [][]Extra{nil, {{"extra", 3}}},
			rejects: []rej{{3, "", ErrBadCapture}, {4, "", ErrBadCapture}, {5, "", ErrBadCapture}, {6, "", ErrBadCapture}, {7, "", ErrBadCapture}},
		},
		{
			name:    "capture header only counts on the first line",
			in:      "sp=1 pv=2\n#caploop-capture v1\n",
			samples: []Sample{{Line: 1, SP: 1, PV: 2}},
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got := scanAll(t, tc.in)
			if got.err != nil {
				t.Fatalf("Err() = %v, want nil", got.err)
			}
			if !reflect.DeepEqual(got.samples, tc.samples) {
				t.Errorf("samples:\n got %+v\nwant %+v", got.samples, tc.samples)
			}
			if tc.extras != nil && !reflect.DeepEqual(got.extras, tc.extras) {
				t.Errorf("extras = %v, want %v", got.extras, tc.extras)
			}
			if tc.extras == nil {
				for i, e := range got.extras {
					if len(e) != 0 {
						t.Errorf("sample %d has extras %v, want none", i, e)
					}
				}
			}
			if !metasEqual(got.metas, tc.metas) {
				t.Errorf("metas:\n got %+v\nwant %+v", got.metas, tc.metas)
			}
			if !reflect.DeepEqual(got.events, tc.events) {
				t.Errorf("events:\n got %+v\nwant %+v", got.events, tc.events)
			}
			var rejects []rej
			for _, e := range got.stats.FirstRejects {
				rejects = append(rejects, rej{e.Line, e.Field, reasons[reasonIndex(e.Err)]})
				if !errors.Is(e, e.Err) {
					t.Errorf("errors.Is(%v, its own sentinel) = false", e)
				}
			}
			if !reflect.DeepEqual(rejects, tc.rejects) {
				t.Errorf("rejects:\n got %v\nwant %v", rejects, tc.rejects)
			}
			if got.stats.Partial != tc.partial {
				t.Errorf("partial = %d, want %d", got.stats.Partial, tc.partial)
			}
		})
	}
}

// metasEqual compares metas with a relative tolerance of 1e-12 on the float fields.
func metasEqual(a, b []Meta) bool {
	if len(a) != len(b) {
		return false
	}
	near := func(x, y float64) bool { return math.Abs(x-y) <= 1e-12*math.Max(math.Abs(x), math.Abs(y)) }
	for i := range a {
		x, y := a[i], b[i]
		if x.Set != y.Set || x.ADCBits != y.ADCBits || x.Mode != y.Mode ||
			!near(x.Vref, y.Vref) || !near(x.Period, y.Period) || !near(x.Deadband, y.Deadband) ||
			!near(x.Supply, y.Supply) || !near(x.R, y.R) || !near(x.C, y.C) || !near(x.Load, y.Load) {
			return false
		}
	}
	return true
}

func TestParseErrorMessage(t *testing.T) {
	tests := []struct {
		name string
		err  *ParseError
		want string
	}{
		{"with file and field", &ParseError{Name: "run.txt", Line: 12, Field: "sp", Text: "sp=5x pv=1", Err: ErrBadNumber},
			`run.txt:12: telemetry: bad number in sp: "sp=5x pv=1"`},
		{"without file", &ParseError{Line: 3, Err: ErrTooLong}, `line 3: telemetry: line too long`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if got := tc.err.Error(); got != tc.want {
				t.Errorf("Error() = %q, want %q", got, tc.want)
			}
		})
	}
}

func TestParserParse(t *testing.T) {
	var p Parser
	p.Name = "/dev/ttyACM0"
	r := p.ParseReceived([]byte("t=10 sp=512 pv=498 u=1 temp=20\r\n"), 123)
	want := Sample{Line: 1, T: 10, Host: 123, SP: 512, PV: 498, U: Charge, Flags: HasT | HasU | HasHost}
	if r.Kind != RecSample || r.Sample != want {
		t.Errorf("Parse = %v %+v, want sample %+v", r.Kind, r.Sample, want)
	}
	if len(r.Extras) != 1 || r.Extras[0] != (Extra{"temp", 20}) {
		t.Errorf("extras = %v, want [temp 20]", r.Extras)
	}
	r = p.ParseReceived([]byte("# deadband=14"), 200)
	if r.Kind != RecMeta || r.Delta.Deadband != 14 || r.Meta.Deadband != 14 {
		t.Errorf("Parse(meta) = %v %+v", r.Kind, r)
	}
	r = p.ParseReceived([]byte("sp=1"), 300)
	if r.Kind != RecRejected || r.Err == nil || !errors.Is(r.Err, ErrMissingField) || r.Err.Line != 3 || r.Err.Name != "/dev/ttyACM0" {
		t.Errorf("Parse(bad) = %v %v", r.Kind, r.Err)
	}
	// Extra names are interned: the same key gives the same string without allocating.
	line := []byte("sp=1 pv=2 temp=21 hum=40")
	if n := testing.AllocsPerRun(100, func() { p.Parse(line) }); n != 0 {
		t.Errorf("Parse of a data line with extras allocates %v times, want 0", n)
	}
}

func TestExtraNamesBounded(t *testing.T) {
	var b strings.Builder
	for k := range maxExtraNames + 44 {
		fmt.Fprintf(&b, "sp=1 pv=2 ch%d=%d\n", k, k)
	}
	got := scanAll(t, b.String())
	// Every sample is kept; the 44 extras past the table are dropped and counted.
	if len(got.samples) != maxExtraNames+44 || got.stats.Rejected != 0 || got.stats.Dropped != 44 {
		t.Errorf("%d samples, %d rejected, %d dropped; want %d, 0 and 44",
			len(got.samples), got.stats.Rejected, got.stats.Dropped, maxExtraNames+44)
	}
	if n := len(got.extras[maxExtraNames]); n != 0 {
		t.Errorf("sample past the table has %d extras, want 0", n)
	}
	// Names already known keep working.
	if got := scanAll(t, b.String()+"sp=1 pv=2 ch7=3\n"); got.extras[len(got.extras)-1][0] != (Extra{"ch7", 3}) {
		t.Errorf("known name after the table filled: %v", got.extras[len(got.extras)-1])
	}
}
