package virtual

import (
	"bytes"
	"context"
	"io"
	"math"
	"strconv"
	"strings"
	"testing"

	"github.com/caploop/caploop/telemetry"
)

type dataLine struct{ t, n, sp, pv, u int }

// parseData reads a data line exactly as the board writes it: t= n= sp= pv= u=, all
// whole numbers, nothing else.
func parseData(l string) (dataLine, bool) {
	f := strings.Split(l, " ")
	if len(f) != 5 {
		return dataLine{}, false
	}
	var d dataLine
	dst := []*int{&d.t, &d.n, &d.sp, &d.pv, &d.u}
	for i, key := range []string{"t=", "n=", "sp=", "pv=", "u="} {
		v, ok := strings.CutPrefix(f[i], key)
		if !ok {
			return dataLine{}, false
		}
		x, err := strconv.Atoi(v)
		if err != nil {
			return dataLine{}, false
		}
		*dst[i] = x
	}
	return d, true
}

// runBoard runs sc as fast as possible and returns the output and the board.
func runBoard(t *testing.T, sc Scenario) (string, *Board) {
	t.Helper()
	b, err := NewBoard(sc)
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := b.Run(context.Background(), &buf, false); err != nil {
		t.Fatal(err)
	}
	return buf.String(), b
}

func splitLines(s string) []string {
	return strings.Split(strings.TrimSuffix(s, "\n"), "\n")
}

// TestRunProtocol checks the boot and the data lines of the demo scenario, line by line.
func TestRunProtocol(t *testing.T) {
	sc := DefaultScenario()
	sc.Samples = 4000
	out, b := runBoard(t, sc)
	lines := splitLines(out)
	head := []string{
		Banner,
		"# vref=5 adc_bits=10 period_us=1000 mode=three-state deadband=4",
		"# supply=5 r=47000 c=1e-06 load=1000000",
	}
	for i, w := range head {
		if lines[i] != w {
			t.Errorf("line %d = %q, want %q", i+1, lines[i], w)
		}
	}
	data := lines[len(head):]
	if got := int64(len(data)); got != sc.Samples || b.Lines() != sc.Samples {
		t.Fatalf("%d data lines (Lines() = %d), want %d", got, b.Lines(), sc.Samples)
	}
	for i, l := range data {
		d, ok := parseData(l)
		if !ok {
			t.Fatalf("data line %d: %q does not read as t= n= sp= pv= u=", i, l)
		}
		if d.t != 1000*i || d.n != i {
			t.Fatalf("data line %d: t=%d n=%d, want t=%d n=%d", i, d.t, d.n, 1000*i, i)
		}
		// Setpoint profile: 1.2 V for 3 s, then 2.0 V; counts = round(V * 1024 / 5).
		wantSP := 246
		if i >= 3000 {
			wantSP = 410
		}
		if d.sp != wantSP {
			t.Fatalf("data line %d: sp=%d, want %d", i, d.sp, wantSP)
		}
		e, want := d.pv-d.sp, 0
		if e > 4 {
			want = -1
		} else if e < -4 {
			want = 1
		}
		if d.u != want {
			t.Fatalf("data line %d %q: u=%d, want %d from the three-state rule, deadband 4", i, l, d.u, want)
		}
	}
}

// TestSetCommands sends host lines at fixed times and checks each answer and its effect.
func TestSetCommands(t *testing.T) {
	tests := []struct {
		name   string
		line   string
		answer []string
		check  func(t *testing.T, after []dataLine)
	}{
		{"deadband", "set deadband=9", []string{"# deadband=9"}, func(t *testing.T, after []dataLine) {
			for _, d := range after {
				if e := d.pv - d.sp; (d.u == 0) != (e >= -9 && e <= 9) {
					t.Fatalf("%+v breaks the deadband-9 rule", d)
				}
			}
		}},
		{"mode", "set mode=two-state", []string{"# mode=two-state"}, func(t *testing.T, after []dataLine) {
			for _, d := range after {
				if want := map[bool]int{true: 1, false: -1}[d.pv < d.sp]; d.u != want {
					t.Fatalf("%+v: u=%d, want %d from the two-state rule", d, d.u, want)
				}
			}
		}},
		{"period", "set period_us=500", []string{"# period_us=500"}, func(t *testing.T, after []dataLine) {
			for i := 1; i < len(after); i++ {
				if dt := after[i].t - after[i-1].t; dt != 500 {
					t.Fatalf("t step %d after set period_us=500, want 500", dt)
				}
			}
		}},
		{"setpoint", "set sp=600", []string{"# setpoint 600 held"}, func(t *testing.T, after []dataLine) {
			for _, d := range after {
				if d.sp != 600 {
					t.Fatalf("sp=%d after set sp=600", d.sp)
				}
			}
		}},
		{"two keys", "set deadband=7 mode=three-state", []string{"# mode=three-state deadband=7"}, nil},
		{"info", "info", []string{"# vref=5 adc_bits=10 period_us=1000 mode=three-state deadband=4", "# supply=5 r=47000 c=1e-06 load=1000000", "# accepts=sp,mode,deadband,period_us"}, nil},
		{"unknown key", "set gain=3", []string{`# error: unknown key "gain", want deadband, mode, period_us or sp`}, nil},
		{"bad value", "set deadband=-1", []string{"# error: deadband wants a whole number of counts 0 to 1023"}, nil},
		{"bad mode", "set mode=fast", []string{"# error: mode wants two-state or three-state"}, nil},
		{"not a command", "reboot\x1b[2J", []string{`# error: unknown command "reboot??2J", want set or info`}, nil},
		{"no pair", "set deadband", []string{`# error: set wants key=value, got "deadband"`}, nil},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			sc := DefaultScenario()
			sc.Samples = 1500
			sc.Script = []Command{{At: 0.5, Line: tc.line}}
			out, _ := runBoard(t, sc)
			lines := splitLines(out)
			var before, after []dataLine
			var answers []string
			for _, l := range lines[3:] {
				if d, ok := parseData(l); ok {
					if answers == nil {
						before = append(before, d)
					} else {
						after = append(after, d)
					}
					continue
				}
				answers = append(answers, l)
			}
			if len(before) != 500 {
				t.Errorf("answer after %d data lines, want 500 (at 0.5 s)", len(before))
			}
			if strings.Join(answers, "\n") != strings.Join(tc.answer, "\n") {
				t.Errorf("answer\n%s\nwant\n%s", strings.Join(answers, "\n"), strings.Join(tc.answer, "\n"))
			}
			for _, a := range answers {
				if bytes.ContainsFunc([]byte(a), func(r rune) bool { return r < ' ' || r > '~' }) {
					t.Errorf("answer %q has bytes outside printable ASCII", a)
				}
			}
			if tc.check != nil {
				tc.check(t, after)
			}
		})
	}
}

// TestSendBeforeRun: lines sent from another goroutine before and during a run are read
// by the firmware before its next sample.
func TestSendBeforeRun(t *testing.T) {
	sc := DefaultScenario()
	sc.Samples = 10
	b, err := NewBoard(sc)
	if err != nil {
		t.Fatal(err)
	}
	b.Send("set deadband=12\r\n")
	var buf bytes.Buffer
	if err := b.Run(context.Background(), &buf, false); err != nil {
		t.Fatal(err)
	}
	if l := splitLines(buf.String())[3]; l != "# deadband=12" {
		t.Errorf("first line after boot = %q, want the answer # deadband=12", l)
	}
	if err := b.Run(context.Background(), &buf, false); err == nil {
		t.Error("second Run: no error, want one (a board runs once)")
	}
}

// TestMisbehaviour checks that each fault shows in the stream as it claims.
func TestMisbehaviour(t *testing.T) {
	binary := func(l string) bool {
		for i := 0; i < len(l); i++ {
			if l[i] < ' ' || l[i] > '~' {
				return true
			}
		}
		return false
	}
	t.Run("garbage", func(t *testing.T) {
		sc := DefaultScenario()
		sc.Duration = 2
		sc.Faults.GarbageEvery = 0.1
		out, b := runBoard(t, sc)
		bad := 0
		for _, l := range splitLines(out) {
			if binary(l) {
				bad++
				continue
			}
			if _, ok := parseData(l); !ok && !strings.HasPrefix(l, "#") {
				t.Errorf("line %q is neither garbage, data nor a comment", l)
			}
		}
		ev := 0
		for _, e := range b.Events() {
			if e.Kind == EvGarbage {
				ev++
			}
		}
		if ev != 19 || bad != ev {
			t.Errorf("%d garbage events (want 19, one per 0.1 s after the first), %d lines with hostile bytes; want equal", ev, bad)
		}
		if b.Lines() != 2000-int64(countKind(b, EvGarbage, "inline")) {
			t.Errorf("%d clean data lines counted, want 2000 minus the inline ones", b.Lines())
		}
	})
	t.Run("reset", func(t *testing.T) {
		sc := DefaultScenario()
		sc.Duration = 1
		sc.Faults.ResetAfter = 0.4
		out, b := runBoard(t, sc)
		lines := splitLines(out)
		cut := -1
		for i, l := range lines {
			if strings.HasSuffix(l, Banner) && l != Banner {
				if cut >= 0 {
					t.Fatal("two cut lines")
				}
				cut = i
				partial := strings.TrimSuffix(l, Banner)
				if full := "t=400000 n=400 sp=246 pv="; len(partial) < 2 || !strings.HasPrefix(full, partial) {
					t.Errorf("partial line %q: want a start of %q (cut before the pv value)", partial, full)
				}
			}
		}
		if cut < 0 {
			t.Fatal("no partial line followed by the boot banner")
		}
		if d, ok := parseData(lines[cut-1]); !ok || d.t != 399000 {
			t.Errorf("line before the cut %q, want the data line of t=399000", lines[cut-1])
		}
		if !strings.HasPrefix(lines[cut+1], "# vref=") {
			t.Errorf("line after the banner %q, want the meta line", lines[cut+1])
		}
		if d, ok := parseData(lines[cut+3]); !ok || d.t != 0 || d.n != 0 || d.sp != 246 {
			t.Errorf("first data line after the reset %q, want t=0 n=0 sp=246 (clock and profile restart)", lines[cut+3])
		}
		// 0.4 s before, 50 ms of boot and the partial sample lost after.
		if got, want := b.Lines(), int64(400+1000-400-50-1); got != want {
			t.Errorf("%d data lines, want %d", got, want)
		}
	})
	t.Run("reset loses set", func(t *testing.T) {
		sc := DefaultScenario()
		sc.Duration = 1
		sc.Script = []Command{{At: 0.1, Line: "set deadband=9"}}
		sc.Faults.ResetAfter = 0.4
		out, _ := runBoard(t, sc)
		if n := strings.Count(out, "deadband=4\n"); n != 2 {
			t.Errorf("%d meta lines with deadband=4, want 2 (boot and reboot)", n)
		}
	})
	t.Run("unplug", func(t *testing.T) {
		sc := DefaultScenario()
		sc.Duration = 2
		sc.Faults.UnplugAfter = 0.5
		sc.Faults.ReplugAfter = 0.7
		out, b := runBoard(t, sc)
		var kinds []string
		for _, e := range b.Events() {
			kinds = append(kinds, string(e.Kind)+"@"+strconv.FormatFloat(e.At, 'f', 3, 64))
		}
		if got, want := strings.Join(kinds, " "), "boot@0.000 partial@0.500 unplug@0.501 replug@1.201 boot@1.251"; got != want {
			t.Errorf("events %s, want %s", got, want)
		}
		if n := strings.Count(out, Banner); n != 2 {
			t.Errorf("%d boot banners, want 2", n)
		}
	})
	t.Run("noise burst", func(t *testing.T) {
		sc := DefaultScenario()
		sc.Profile, sc.Levels = Const, []float64{2.5}
		sc.Deadband = 60 // hold almost always: pv shows the noise
		sc.Circuit.Load = 0
		sc.V0 = 2.5
		sc.Duration = 2
		sc.Faults.BurstEvery, sc.Faults.BurstLen, sc.Faults.BurstNoise = 0.5, 0.1, 12
		out, _ := runBoard(t, sc)
		var quiet, loud []float64
		for _, l := range splitLines(out) {
			d, ok := parseData(l)
			if !ok {
				continue
			}
			ph := math.Mod(float64(d.t)/1e6, 0.5)
			switch {
			case d.t >= 500000 && ph < 0.1:
				loud = append(loud, float64(d.pv))
			case ph > 0.15 && ph < 0.45:
				quiet = append(quiet, float64(d.pv))
			}
		}
		sq, sl := diffRMS(quiet), diffRMS(loud)
		// Sample-to-sample differences of white noise have sqrt(2) times its rms.
		if sl < 12*math.Sqrt2*0.8 || sl > 12*math.Sqrt2*1.2 || sq > 2 {
			t.Errorf("rms of pv differences: %.2f in bursts (want about %.1f), %.2f outside (want below 2)", sl, 12*math.Sqrt2, sq)
		}
	})
	t.Run("drops", func(t *testing.T) {
		sc := DefaultScenario()
		sc.Duration = 2
		sc.DropRate = 0.05
		out, _ := runBoard(t, sc)
		gaps, prev := 0, -1
		for _, l := range splitLines(out) {
			if d, ok := parseData(l); ok {
				if d.n != prev+1 {
					gaps += d.n - prev - 1
					if d.t-1000*d.n != 0 {
						t.Fatalf("t=%d at n=%d", d.t, d.n)
					}
				}
				prev = d.n
			}
		}
		if gaps < 60 || gaps > 140 {
			t.Errorf("%d lost samples out of 2000, want about 100 (5 %%)", gaps)
		}
	})
	t.Run("clock wrap", func(t *testing.T) {
		sc := DefaultScenario()
		sc.Samples = 10
		sc.T0 = math.MaxUint32 - 4500
		out, _ := runBoard(t, sc)
		var ts []int
		for _, l := range splitLines(out) {
			if d, ok := parseData(l); ok {
				ts = append(ts, d.t)
			}
		}
		if ts[4] != math.MaxUint32-500 || ts[5] != 499 {
			t.Errorf("t = %v, want a wrap from 4294966795 to 499", ts)
		}
	})
}

func countKind(b *Board, k EventKind, detail string) int {
	n := 0
	for _, e := range b.Events() {
		if e.Kind == k && e.Detail == detail {
			n++
		}
	}
	return n
}

func diffRMS(x []float64) float64 {
	var s float64
	n := 0
	for i := 1; i < len(x); i++ {
		d := x[i] - x[i-1]
		s += d * d
		n++
	}
	return math.Sqrt(s / float64(n))
}

// TestDeterministic: the same scenario and seed give the same bytes; another seed does not.
func TestDeterministic(t *testing.T) {
	sc := DefaultScenario()
	sc.Duration = 3
	sc.DropRate, sc.Jitter = 0.01, 20e-6
	sc.Faults = Faults{BurstEvery: 1, BurstLen: 0.2, BurstNoise: 5, GarbageEvery: 0.3, ResetAfter: 1.5, UnplugAfter: 2, ReplugAfter: 0.2}
	a, _ := runBoard(t, sc)
	b, _ := runBoard(t, sc)
	if a != b {
		t.Error("two runs of one scenario differ")
	}
	sc.Seed++
	c, _ := runBoard(t, sc)
	if a == c {
		t.Error("another seed gave the same stream")
	}
}

// TestScannerReadsBoard feeds a dirty stream to the project's own Scanner: every data line
// the board claims to have written is read, every fault line is rejected, nothing more.
func TestScannerReadsBoard(t *testing.T) {
	sc := DefaultScenario()
	sc.Duration = 3
	sc.Faults = Faults{GarbageEvery: 0.25, ResetAfter: 1.1, UnplugAfter: 2, ReplugAfter: 0.3}
	sc.Script = []Command{{At: 0.7, Line: "set deadband=9"}}
	out, b := runBoard(t, sc)
	s := telemetry.NewScanner(strings.NewReader(out))
	var samples int64
	for s.Scan() {
		if s.Kind() == telemetry.RecSample {
			samples++
		}
	}
	if err := s.Err(); err != nil {
		t.Fatal(err)
	}
	st := s.Stats()
	faults := int64(countKind(b, EvGarbage, "line") + countKind(b, EvGarbage, "inline") + len(eventsOf(b, EvPartial)))
	if samples != b.Lines() || st.Rejected != faults {
		t.Errorf("scanner: %d samples, %d rejected; board: %d data lines, %d fault lines", samples, st.Rejected, b.Lines(), faults)
	}
	if m := s.Meta(); m.Deadband != 4 || m.R != 47e3 {
		t.Errorf("final meta deadband %g r %g, want 4 (the boot after the unplug) and 47000", m.Deadband, m.R)
	}
}

func eventsOf(b *Board, k EventKind) []Event {
	var r []Event
	for _, e := range b.Events() {
		if e.Kind == k {
			r = append(r, e)
		}
	}
	return r
}

// BenchmarkRunFast measures how fast the board writes data lines as fast as possible (the
// speed of making captures): one op is one data line.
func BenchmarkRunFast(bm *testing.B) {
	sc := DefaultScenario()
	sc.Samples = int64(bm.N)
	b, err := NewBoard(sc)
	if err != nil {
		bm.Fatal(err)
	}
	bm.ReportAllocs()
	bm.ResetTimer()
	if err := b.Run(context.Background(), io.Discard, false); err != nil {
		bm.Fatal(err)
	}
	bm.ReportMetric(float64(bm.N)/bm.Elapsed().Seconds()/1e6, "Mlines/s")
}
