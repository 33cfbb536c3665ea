//go:build unix

package firmware

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/loop"
	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/wire"
)

var (
	buildOnce sync.Once
	buildDir  string
	buildProg string
	buildErr  error
)

func TestMain(m *testing.M) {
	code := m.Run()
	if buildDir != "" {
		os.RemoveAll(buildDir)
	}
	os.Exit(code)
}

// build compiles the reference firmware once for the tests, or skips the test: under
// -short, and when there is no C compiler (a failure when CI=true).
func build(t *testing.T) string {
	t.Helper()
	if testing.Short() {
		t.Skip("compiles and runs the C reference firmware with cc; skipped with -short")
	}
	buildOnce.Do(func() {
		src, err := FindSource(".")
		if err != nil {
			buildErr = err
			return
		}
		if buildDir, buildErr = os.MkdirTemp("", "caploop-firmware-"); buildErr != nil {
			return
		}
		ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
		defer cancel()
		buildProg, buildErr = Build(ctx, src, buildDir)
	})
	if errors.Is(buildErr, ErrNoCompiler) {
		if os.Getenv("CI") == "true" {
			t.Fatalf("CI=true and no C compiler: %v", buildErr)
		}
		t.Skipf("no C compiler, firmware in the loop not tested: %v", buildErr)
	}
	if buildErr != nil {
		t.Fatal(buildErr)
	}
	return buildProg
}

// plantConfig is the bench of these tests: a 5 V pin, 47 kΩ and 1 µF (tau 47 ms), a
// 1 MΩ load that makes the hold droop, a 10-bit converter on the supply, 1 ms samples,
// three-state with a band of 4 counts, starting from an empty capacitor.
func plantConfig(noise float64) loop.Config {
	return loop.Config{
		Circuit:    loop.Circuit{Supply: 5, R: 47e3, C: 1e-6, Load: 1e6},
		ADC:        loop.ADC{Vref: 5, Bits: 10, Noise: noise},
		Controller: loop.Controller{Kind: loop.ThreeState, Deadband: 4},
		Period:     1e-3,
		Seed:       7,
	}
}

// command is a host line sent while the plant holds the firmware before reading k.
type command struct {
	k    int64
	line string
}

// script walks the settings the firmware takes: a wider band, two-state, back to
// three-state at a shorter period, a new setpoint, info, and lines it must refuse.
var script = []command{
	{2000, "set deadband=9"},
	{3000, "set mode=two-state"},
	{3800, "set mode=three-state period_us=500"},
	{4600, "set sp=600"},
	{5000, "info"},
	{5200, "set deadband=999"},
	{5300, "reboot now"},
	{5400, "set sp=600 " + strings.Repeat("x", 80)},
}

const runSamples = 6000

// fil is what one firmware-in-the-loop run gave: the board's lines as read from the port,
// and the samples as the plant saw them.
type fil struct {
	lines [][]byte
	steps []loop.Sample
}

// runFirmware runs the firmware on cfg for runSamples readings with the script, reading
// the port through a telemetry.Link as caploop live does.
func runFirmware(t *testing.T, prog string, cfg loop.Config) fil {
	t.Helper()
	var out fil
	linkc := make(chan *wire.Link, 1)
	var link *wire.Link
	next := 0
	rig, err := Start(context.Background(), Options{
		Program: prog, Plant: cfg, SP: 512, Samples: runSamples,
		OnStep: func(st loop.Sample) { out.steps = append(out.steps, st) },
		BeforeRead: func(k int64) {
			if next >= len(script) || script[next].k != k {
				return
			}
			if link == nil {
				link = <-linkc
			}
			if err := link.Send(script[next].line); err != nil {
				t.Errorf("send %q: %v", script[next].line, err)
			}
			next++
			// Give the line time to reach the firmware's side of the port, so its
			// effect lands near sample k (the checks find where it landed anyway).
			time.Sleep(2 * time.Millisecond)
		},
	})
	if err != nil {
		t.Fatal(err)
	}
	defer rig.Close()
	capture := filepath.Join(t.TempDir(), "fil.cap")
	l := wire.Dial(wire.SerialConfig{Path: rig.Path()}, wire.LinkOptions{Poll: 20 * time.Millisecond, RecordPath: capture})
	defer l.Close()
	linkc <- l
	t0 := time.Now()
	defer func() { t.Logf("run took %v", time.Since(t0)) }()
	deadline := time.After(20 * time.Second)
	lastN := fmt.Sprintf(" n=%d ", runSamples-1)
	for {
		select {
		case batch, ok := <-l.Batches():
			if !ok {
				t.Fatalf("link closed: %v", l.Err())
			}
			end := false
			for _, ln := range batch {
				if ln.Dir == telemetry.FromBoard {
					out.lines = append(out.lines, append([]byte(nil), ln.Raw...))
					end = end || bytes.Contains(ln.Raw, []byte(lastN))
				}
			}
			if !end {
				continue
			}
			// The last sample's line: the firmware has ended the run and exited.
			select {
			case <-rig.Done():
			case <-time.After(5 * time.Second):
				t.Fatal("the firmware did not end after its last sample")
			}
			if err := rig.Close(); err != nil {
				t.Fatal(err)
			}
			if st := l.Stats(); st.Dropped != 0 || st.Cut != 0 || st.Partial != 0 {
				t.Errorf("link lost lines: %+v", st)
			}
			return out
		case <-deadline:
			t.Fatalf("no end of the run after 20 s; %d lines", len(out.lines))
		}
	}
}

// parsed is one board line with the parser's verdict.
type parsed struct {
	rec  telemetry.Record
	text string
}

func parseAll(t *testing.T, lines [][]byte) (recs []parsed, samples []int) {
	t.Helper()
	var p telemetry.Parser
	for _, ln := range lines {
		r := p.Parse(ln)
		if r.Kind == telemetry.RecRejected {
			t.Errorf("the parser rejects firmware line %q: %v", telemetry.Sanitize(ln), p.LastError())
		}
		if r.Kind == telemetry.RecSample {
			samples = append(samples, len(recs))
		}
		recs = append(recs, parsed{rec: r, text: string(ln)})
	}
	return recs, samples
}

// TestFirmwareInTheLoop runs the C reference firmware against the loop model, noise-free
// and with 0.8 counts of noise, and checks that every drive it chose is the one the
// model's controller chooses for the same reading under the settings the firmware had
// announced, through a deadband, mode, period and setpoint change.
func TestFirmwareInTheLoop(t *testing.T) {
	prog := build(t)
	for _, noise := range []float64{0, 0.8} {
		t.Run(fmt.Sprintf("noise=%g", noise), func(t *testing.T) {
			t.Parallel()
			cfg := plantConfig(noise)
			run := runFirmware(t, prog, cfg)
			recs, samples := parseAll(t, run.lines)
			if len(samples) > 0 && len(samples) != runSamples {
				last := recs[samples[len(samples)-1]].rec.Sample.N
				t.Logf("last n=%d; last lines %q", last, run.lines[len(run.lines)-3:])
			}
			if len(samples) != runSamples || len(run.steps) != runSamples {
				t.Fatalf("%d data lines and %d plant steps, want %d", len(samples), len(run.steps), runSamples)
			}
			replay(t, cfg, recs, samples, run.steps)
			checkAnswers(t, recs)
			checkSummary(t, cfg, recs, samples)
		})
	}
}

// replay runs the model's own controller over the run: sample i with the firmware's
// setpoint, the mode and deadband its meta lines had announced before line i, and the
// interval to the next sample that its clock shows (which must be the period it
// announced). Reading and drive must match line for line; the plant's record must
// match the lines (the firmware reports the drive it set).
func replay(t *testing.T, cfg loop.Config, recs []parsed, samples []int, steps []loop.Sample) {
	t.Helper()
	sim, err := loop.New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	period := cfg.Period
	for i, ri := range samples {
		r := recs[ri].rec
		s := r.Sample
		if s.N != int64(i) {
			t.Fatalf("line %q: n=%d, want %d", recs[ri].text, s.N, i)
		}
		if i+1 < len(samples) {
			nx := recs[samples[i+1]].rec
			dt := float64(nx.Sample.T-s.T) * 1e-6
			if math.Abs(dt-nx.Meta.Period) > 1e-9 {
				t.Fatalf("sample %d: the clock moved %g s, the meta lines say period %g s", i, dt, nx.Meta.Period)
			}
			if dt != period {
				c := sim.Config()
				c.Period, period = dt, dt
				if err := sim.SetConfig(c); err != nil {
					t.Fatal(err)
				}
			}
		}
		k := loop.Controller{Kind: loop.ThreeState, Deadband: int(r.Meta.Deadband)}
		if r.Meta.Mode == telemetry.TwoState {
			k.Kind = loop.TwoState
		}
		if err := sim.SetController(k); err != nil {
			t.Fatal(err)
		}
		want := sim.Next(int(s.SP))
		if int(s.PV) != want.PV || loop.Drive(s.U) != want.U {
			t.Fatalf("sample %d %q (%v, band %g): the model reads pv=%d and drives u=%d",
				i, recs[ri].text, r.Meta.Mode, r.Meta.Deadband, want.PV, want.U)
		}
		if st := steps[i]; st.PV != want.PV || st.U != want.U || st.K != int64(i) {
			t.Fatalf("sample %d: the plant saw pv=%d u=%d, the line says pv=%g u=%d", i, st.PV, st.U, s.PV, s.U)
		}
	}
}

// checkAnswers checks what the firmware said to each host line.
func checkAnswers(t *testing.T, recs []parsed) {
	t.Helper()
	var comments, texts []string
	var metas []telemetry.Record
	for _, p := range recs {
		switch {
		case p.rec.Kind == telemetry.RecMeta:
			metas = append(metas, p.rec)
			texts = append(texts, p.text)
		case strings.HasPrefix(p.text, "#"):
			comments = append(comments, p.text)
		}
	}
	wantComments := []string{
		"# reference loop start",
		"# setpoint 600 held",
		"# error: deadband wants counts from 0 to a quarter of full scale",
		"# error: unknown command, want set or info",
		"# error: line too long",
	}
	if strings.Join(comments, "\n") != strings.Join(wantComments, "\n") {
		t.Errorf("comments:\n%s\nwant:\n%s", strings.Join(comments, "\n"), strings.Join(wantComments, "\n"))
	}
	// Boot: two meta lines and accepts; then one answer per accepted set; info: three.
	want := []string{
		"# vref=5 adc_bits=10 period_us=1000 mode=three-state deadband=4",
		"# supply=5 r=47k c=1u load=1M",
		"# accepts=sp,mode,deadband,period_us",
		"# deadband=9",
		"# mode=two-state",
		"# period_us=500 mode=three-state",
		"# vref=5 adc_bits=10 period_us=500 mode=three-state deadband=9",
		"# supply=5 r=47k c=1u load=1M",
		"# accepts=sp,mode,deadband,period_us",
	}
	if strings.Join(texts, "\n") != strings.Join(want, "\n") {
		t.Fatalf("meta lines:\n%s\nwant:\n%s", strings.Join(texts, "\n"), strings.Join(want, "\n"))
	}
	m := metas[len(metas)-1].Meta
	if m.Vref != 5 || m.ADCBits != 10 || m.Period != 500e-6 || m.Mode != telemetry.ThreeState || m.Deadband != 9 ||
		m.Supply != 5 || m.R != 47e3 || math.Abs(m.C-1e-6) > 1e-18 || m.Load != 1e6 {
		t.Errorf("meta after info: %+v", m)
	}
	for _, k := range []string{"sp", "mode", "deadband", "period_us"} {
		if !m.AcceptsKey(k) {
			t.Errorf("info does not list %q in accepts (%q)", k, m.Accepts)
		}
	}
}

// checkSummary summarises the firmware's telemetry up to the switch to two-state (one
// setpoint, band 4 then band 9) and the same stretch of a run of the loop model alone,
// with its own controller and the band changed at the same sample: duty, ripple and
// limit cycle must agree segment by segment. The wider band must hold longer and switch
// less often.
func checkSummary(t *testing.T, cfg loop.Config, recs []parsed, samples []int) {
	t.Helper()
	var at9, atTwo int = -1, -1
	for i, ri := range samples {
		m := recs[ri].rec.Meta
		if at9 < 0 && m.Deadband == 9 {
			at9 = i
		}
		if m.Mode == telemetry.TwoState {
			atTwo = i
			break
		}
	}
	if at9 < 0 || atTwo < 0 {
		t.Fatalf("no band 9 (%d) or two-state (%d) in the run", at9, atTwo)
	}
	var fw bytes.Buffer
	for _, p := range recs[:samples[atTwo]] {
		fw.WriteString(p.text + "\n")
	}

	var model bytes.Buffer
	sim, err := loop.New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	meta := telemetry.Meta{Vref: 5, ADCBits: 10, Period: cfg.Period, Mode: telemetry.ThreeState, Deadband: 4,
		Supply: 5, R: 47e3, C: 1e-6, Load: 1e6, Set: telemetry.FieldVref | telemetry.FieldADCBits | telemetry.FieldPeriod |
			telemetry.FieldMode | telemetry.FieldDeadband | telemetry.FieldSupply | telemetry.FieldR | telemetry.FieldC | telemetry.FieldLoad}
	model.Write(append(telemetry.AppendMeta(nil, meta), '\n'))
	for k := 0; k < atTwo; k++ {
		if k == at9 {
			sim.SetDeadband(9)
			model.WriteString("# deadband=9\n")
		}
		st := sim.Next(512)
		s := telemetry.Sample{T: int64(k+1) * 1000, N: int64(k), SP: 512, PV: float64(st.PV), U: telemetry.Drive(st.U),
			Flags: telemetry.HasT | telemetry.HasN | telemetry.HasU}
		model.Write(append(telemetry.AppendData(nil, s), '\n'))
	}

	sumFW := summarize(t, fw.Bytes())
	sumModel := summarize(t, model.Bytes())
	if len(sumFW.Segments) != 2 || len(sumModel.Segments) != 2 {
		t.Fatalf("segments: firmware %d, model %d, want 2 (band 4, band 9)", len(sumFW.Segments), len(sumModel.Segments))
	}
	for i := range sumFW.Segments {
		f, m := sumFW.Segments[i], sumModel.Segments[i]
		for _, c := range []struct {
			name string
			f, m *float64
		}{
			{"duty_charge", f.DutyCharge, m.DutyCharge}, {"duty_hold", f.DutyHold, m.DutyHold},
			{"duty_discharge", f.DutyDischarge, m.DutyDischarge}, {"ripple_pp_v", f.RipplePPV, m.RipplePPV},
			{"limit_cycle_period_s", f.LimitCyclePeriodS, m.LimitCyclePeriodS}, {"switching_hz", f.SwitchingHz, m.SwitchingHz},
		} {
			if c.f == nil || c.m == nil || math.Abs(*c.f-*c.m) > 1e-9*math.Abs(*c.m) {
				t.Errorf("segment %d %s: firmware %v, model %v", i, c.name, show(c.f), show(c.m))
			}
		}
		t.Logf("segment %d band %v: duty charge %.3f hold %.3f discharge %.3f, ripple %.1f mV, limit cycle %.1f ms, switching %.1f Hz",
			i, show(f.DeadbandCounts), val(f.DutyCharge), val(f.DutyHold), val(f.DutyDischarge), 1e3*val(f.RipplePPV),
			1e3*val(f.LimitCyclePeriodS), val(f.SwitchingHz))
	}
	b4, b9 := sumFW.Segments[0], sumFW.Segments[1]
	if val(b4.DeadbandCounts) != 4 || val(b9.DeadbandCounts) != 9 {
		t.Fatalf("bands %v, %v; want 4 then 9", show(b4.DeadbandCounts), show(b9.DeadbandCounts))
	}
	// A wider band lets the node droop further before a correction: more time in hold,
	// fewer switchings (three-state rule: hold while |pv - sp| <= deadband).
	if !(val(b9.DutyHold) > val(b4.DutyHold) && val(b9.SwitchingHz) < val(b4.SwitchingHz)) {
		t.Errorf("set deadband=9 did not widen the hold: hold %v -> %v, switching %v -> %v Hz",
			show(b4.DutyHold), show(b9.DutyHold), show(b4.SwitchingHz), show(b9.SwitchingHz))
	}
}

func summarize(t *testing.T, text []byte) *analysis.Summary {
	t.Helper()
	sum, err := analysis.Summarize(telemetry.NewScanner(bytes.NewReader(text)), analysis.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if sum.RejectedLines != 0 {
		t.Fatalf("summary rejected %d lines: %+v", sum.RejectedLines, sum.FirstRejects)
	}
	return sum
}

func val(p *float64) float64 {
	if p == nil {
		return math.NaN()
	}
	return *p
}

func show(p *float64) string {
	if p == nil {
		return "null"
	}
	return fmt.Sprint(*p)
}

// TestFirmwareHostLines writes raw bytes to the firmware's port as a terminal program
// would (CRLF, blank lines, the short "?", a bare set) and checks each answer, with the
// plant paced at 20 times real time.
func TestFirmwareHostLines(t *testing.T) {
	prog := build(t)
	t.Parallel()
	rig, err := Start(context.Background(), Options{Program: prog, Plant: plantConfig(0), SP: 300, Samples: 2000, Speed: 20})
	if err != nil {
		t.Fatal(err)
	}
	defer rig.Close()
	src, err := wire.OpenSerial(wire.SerialConfig{Path: rig.Path()})
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	lines := make(chan string, 4096)
	go func() {
		defer close(lines)
		sc := bufio.NewScanner(src)
		for sc.Scan() {
			lines <- sc.Text()
		}
	}()
	// want waits for a line with the prefix and returns the lines up to it.
	want := func(prefix string) []string {
		t.Helper()
		var seen []string
		timeout := time.After(10 * time.Second)
		for {
			select {
			case l, ok := <-lines:
				if !ok {
					t.Fatalf("port closed waiting for %q", prefix)
				}
				seen = append(seen, l)
				if strings.HasPrefix(l, prefix) {
					return seen
				}
			case <-timeout:
				t.Fatalf("no %q in 10 s", prefix)
			}
		}
	}
	want("# accepts=")
	want("t=")
	w := src.(*wire.SerialSource)
	for _, c := range []struct{ send, answer string }{
		{"set deadband=6\r\n", "# deadband=6"},
		{"\r\n\n  \nset\n", "# error: set wants key=value"},
		{"?\r\n", "# accepts=sp,mode,deadband,period_us"},
		{"set sp=x\n", "# error: sp wants counts"},
		{"set sp=1024\n", "# error: sp wants counts"},
		{"set mode=open\n", "# error: mode wants two-state or three-state"},
		{"set period_us=49 deadband=5\n", "# deadband=5"},
		{"set sp=700 mode=two-state\n", "# mode=two-state"},
	} {
		if _, err := w.Write([]byte(c.send)); err != nil {
			t.Fatal(err)
		}
		seen := want(c.answer)
		for _, l := range seen[:len(seen)-1] {
			if strings.HasPrefix(l, "#") && !strings.HasPrefix(l, "# error: period_us") &&
				!strings.HasPrefix(l, "# setpoint 700") && !strings.HasPrefix(l, "# vref=") && !strings.HasPrefix(l, "# supply=") {
				t.Errorf("%q: unexpected %q before %q", c.send, l, c.answer)
			}
		}
	}
	// The new setpoint, and two-state: no sample holds from here on.
	var first telemetry.Sample
	var firstAt time.Time
	for i := 0; i < 200; i++ {
		l := want("t=")
		var p telemetry.Parser
		r := p.Parse([]byte(l[len(l)-1]))
		if r.Kind != telemetry.RecSample || r.Sample.SP != 700 || r.Sample.U == telemetry.Hold {
			t.Fatalf("after set sp=700 mode=two-state: %q", l[len(l)-1])
		}
		if i == 0 {
			first, firstAt = r.Sample, time.Now()
		} else if i == 199 {
			// Paced at 20 times real time: 1 ms samples come every 50 µs of real time. The
			// host HAL sends its telemetry every 5 ms of board time, and lines already
			// waiting in the pseudo-terminal when the first one is read arrive at once, so
			// allow up to 100 ms of board time of them (unpaced, the whole 199 ms would
			// come in well under a millisecond).
			board := time.Duration(r.Sample.T-first.T) * time.Microsecond
			if real, min := time.Since(firstAt), (board-100*time.Millisecond)/20; real < min {
				t.Errorf("%v of board time in %v, faster than 20 times real time", board, real)
			}
		}
	}
}
