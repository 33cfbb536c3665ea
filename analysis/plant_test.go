package analysis

import (
	"encoding/json"
	"fmt"
	"math"
	"strings"
	"testing"

	"github.com/caploop/caploop/analysis/loop"
	"github.com/caploop/caploop/telemetry"
)

// capture is a text capture made from the loop model, with the truth beside it.
type capture struct {
	cfg   loop.Config
	steps []loop.Sample
	text  strings.Builder
	line  int64 // lines written so far
}

func (c *capture) println(format string, args ...any) {
	fmt.Fprintf(&c.text, format+"\n", args...)
	c.line++
}

// metaLine writes the meta lines a board running cfg sends at boot.
func (c *capture) metaLine() {
	cfg := c.cfg
	mode := "two-state"
	if cfg.Controller.Kind == loop.ThreeState {
		mode = fmt.Sprintf("three-state deadband=%d", cfg.Controller.Deadband)
	}
	c.println("# vref=%g adc_bits=%d period_us=%g mode=%s supply=%g r=%g c=%g",
		cfg.ADC.Vref, cfg.ADC.Bits, cfg.Period*1e6, mode, cfg.Circuit.Supply, cfg.Circuit.R, cfg.Circuit.C)
}

// run simulates n samples and writes their data lines; edit may change a line's pv or
// leave a field out (it gets the sample index k and returns the line's fields). t0 and
// n0 offset the board time (µs) and the sequence number.
func (c *capture) run(t *testing.T, sp func(k int64) int, n int64, t0, n0 int64, edit func(k int64, pv *int, fields *string)) {
	t.Helper()
	err := loop.Run(c.cfg, sp, n, func(st loop.Sample) {
		c.steps = append(c.steps, st)
		pv := st.PV
		fields := "t n sp pv u"
		if edit != nil {
			edit(st.K, &pv, &fields)
		}
		var b strings.Builder
		for _, f := range strings.Fields(fields) {
			switch f {
			case "t":
				fmt.Fprintf(&b, "t=%d ", t0+int64(st.T*1e6+0.5))
			case "n":
				fmt.Fprintf(&b, "n=%d ", n0+st.K)
			case "sp":
				fmt.Fprintf(&b, "sp=%d ", st.SP)
			case "pv":
				fmt.Fprintf(&b, "pv=%d ", pv)
			case "u":
				fmt.Fprintf(&b, "u=%d ", st.U)
			}
		}
		c.println("%s", strings.TrimSpace(b.String()))
	})
	if err != nil {
		t.Fatalf("loop.Run: %v", err)
	}
}

func (c *capture) summarize(t *testing.T) *Summary {
	t.Helper()
	sum, err := Summarize(telemetry.NewScanner(strings.NewReader(c.text.String())), Options{Source: "model"})
	if err != nil {
		t.Fatalf("Summarize: %v", err)
	}
	checkFigures(t, sum)
	return sum
}

// checkFigures checks that every null figure of the plant says why, and that the levels
// are physical: v_high within [0, supply + 2 LSB], v_low within [-2 LSB, v_high].
func checkFigures(t *testing.T, sum *Summary) {
	t.Helper()
	b, err := json.Marshal(sum.Plant)
	if err != nil {
		t.Fatal(err)
	}
	var m map[string]any
	if err := json.Unmarshal(b, &m); err != nil {
		t.Fatal(err)
	}
	for k, v := range m {
		if v != nil || strings.Contains(k, "_ci") {
			continue
		}
		if r, _ := m[k+"_reason"].(string); r == "" {
			t.Errorf("plant.%s is null without %s_reason", k, k)
		}
	}
	lsb := *sum.Board.VrefV / float64(int(1)<<*sum.Board.ADCBits)
	p := sum.Plant
	if p.VHighV != nil && (*p.VHighV < 0 || *p.VHighV > *sum.Board.SupplyV+2*lsb) {
		t.Errorf("v_high %g V outside [0, supply + 2 LSB]", *p.VHighV)
	}
	if p.VLowV != nil && (*p.VLowV < -2*lsb || (p.VHighV != nil && *p.VLowV > *p.VHighV)) {
		t.Errorf("v_low %g V outside [-2 LSB, v_high]", *p.VLowV)
	}
}

// greenhouse is the circuit of these tests: a greenhouse sensor bias from a 5 V pin
// through 47 kOhm into 1 uF, read by a 10-bit ADC every ms, with 0.7 LSB of noise.
func greenhouse(kind loop.Kind, load float64, seed uint64) loop.Config {
	db := 0
	if kind == loop.ThreeState {
		db = 6
	}
	return loop.Config{
		Circuit:    loop.Circuit{Supply: 5, R: 47e3, C: 1e-6, Load: load},
		ADC:        loop.ADC{Vref: 5, Bits: 10, Noise: 0.7},
		Controller: loop.Controller{Kind: kind, Deadband: db},
		Period:     1e-3,
		Seed:       seed,
	}
}

func kindOf(p Plant) string {
	if p.Kind == nil {
		return "null (" + p.KindReason + ")"
	}
	return *p.Kind
}

// TestLoadOrBuffer checks the decision between a load, a buffer and nothing against the
// circuits the captures were made with. Truth: a load R_L on the node is R_L / R times
// R (the parts), a follower's input is (beta + 1) R_E (emitter-follower input
// resistance, any electronics textbook) and its drop is V_BE.
func TestLoadOrBuffer(t *testing.T) {
	t.Parallel()
	follower := greenhouse(loop.ThreeState, 0, 5)
	follower.Circuit.Follower = loop.Follower{VBE: 0.65, Beta: 100, RE: 10e3}
	cases := []struct {
		name     string
		cfg      loop.Config
		kind     string  // "" = null
		load     float64 // ohm, 0 = must be null
		drop     float64 // V, 0 = must be null
		loadFrom string
		lo, hi   int // the square-wave setpoint, counts (0: 300 and 700)
	}{
		{"420k load, three-state", greenhouse(loop.ThreeState, 420e3, 1), KindLoad, 420e3, 0, "hold_droop", 0, 0},
		{"420k load, two-state", greenhouse(loop.TwoState, 420e3, 2), KindLoad, 420e3, 0, "v_high", 0, 0},
		{"no load, three-state", greenhouse(loop.ThreeState, 0, 3), KindNone, 0, 0, "", 0, 0},
		{"2M load, two-state (a drop within the supply tolerance)", greenhouse(loop.TwoState, 2e6, 4), "", 0, 0, "", 0, 0},
		// Low setpoints give long discharge runs, which pin down the asymptote below ground.
		{"follower, three-state", follower, KindBuffer, 101 * 10e3, 0.65, "hold_droop", 150, 600},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			c := &capture{cfg: tc.cfg.WithDefaults()}
			c.metaLine()
			// Many steps: every charge and discharge run sharpens the fits the hold
			// droop is balanced against.
			lo, hi := 300, 700
			if tc.lo > 0 {
				lo, hi = tc.lo, tc.hi
			}
			c.run(t, square(lo, hi, 400), 40000, 0, 0, nil)
			sum := c.summarize(t)
			p := sum.Plant
			k := ""
			if p.Kind != nil {
				k = *p.Kind
			}
			if k != tc.kind {
				t.Errorf("kind: got %s, want %q", kindOf(p), tc.kind)
			}
			if tc.kind == "" && p.KindReason == "" {
				t.Errorf("kind null without a reason")
			}
			if tc.load == 0 && p.LoadOhm != nil {
				t.Errorf("load: got %g ohm, want null", *p.LoadOhm)
			}
			if tc.load > 0 && (p.LoadOhm == nil || relErr(*p.LoadOhm, tc.load) > 0.05) {
				t.Errorf("load: got %v ohm (%s), want %g within 5 %%", deref(p.LoadOhm), p.LoadOhmReason, tc.load)
			}
			if tc.load > 0 && p.LoadFrom != tc.loadFrom {
				t.Errorf("load from %q, want %q", p.LoadFrom, tc.loadFrom)
			}
			lsb := 5.0 / 1024
			if tc.drop == 0 && p.SenseDropV != nil {
				t.Errorf("sense drop: got %g V, want null (a plain load only loads the node)", *p.SenseDropV)
			}
			if tc.drop > 0 && (p.SenseDropV == nil || math.Abs(*p.SenseDropV-tc.drop) > math.Max(0.1*tc.drop, 2*lsb)) {
				t.Errorf("sense drop: got %v V (%s), want %g within 10 %% or 2 LSB", deref(p.SenseDropV), p.SenseDropVReason, tc.drop)
			}
			pm := sum.Model()
			if pm.Kind != k || (p.LoadOhm != nil && pm.LoadOhm != *p.LoadOhm) || (tc.drop == 0 && pm.SenseDropV != 0) {
				t.Errorf("Model() %+v does not match the plant figures", pm)
			}
			t.Logf("kind %s load %v %v ratio %v from %s drop %v (%s) tau c %v h %v v_high %v v_low %v (%s)",
				kindOf(p), deref(p.LoadOhm), p.LoadOhmCI, deref(p.LoadRatio), p.LoadFrom, deref(p.SenseDropV), p.SenseDropVReason,
				deref(p.TauChargeS), p.TauHoldCIS, deref(p.VHighV), deref(p.VLowV), p.VLowVReason)
		})
	}
}

// TestDeclaredLoadDisagrees checks the diagnostic when the meta lines declare a load the
// data do not show.
func TestDeclaredLoadDisagrees(t *testing.T) {
	t.Parallel()
	c := &capture{cfg: greenhouse(loop.ThreeState, 420e3, 6).WithDefaults()}
	c.metaLine()
	c.println("# load=100k")
	c.run(t, schedule(4000, 300, 700, 500), 12000, 0, 0, nil)
	sum := c.summarize(t)
	found := false
	for _, d := range sum.Diagnostics {
		if d.Code == DiagPlantMismatch && strings.Contains(d.Message, "100 kΩ") {
			found = true
		}
	}
	if !found {
		t.Errorf("no %s diagnostic for a declared 100k against a real 420k; got %v", DiagPlantMismatch, sum.Diagnostics)
	}
}

// TestTauTooShort checks that a tau far below the sample period is not shown as a fact:
// with tau = 0.1 T one period moves the level all the way, every reading sits on a rail.
func TestTauTooShort(t *testing.T) {
	t.Parallel()
	cfg := greenhouse(loop.TwoState, 0, 7)
	cfg.Circuit.R, cfg.Circuit.C = 1e3, 100e-9 // tau = 100 us, T = 1 ms
	c := &capture{cfg: cfg.WithDefaults()}
	c.metaLine()
	c.run(t, schedule(3000, 300, 700), 6000, 0, 0, nil)
	sum := c.summarize(t)
	if p := sum.Plant; p.TauChargeS != nil {
		t.Errorf("tau_charge: got %g s, want null (tau is 10 times shorter than the period)", *p.TauChargeS)
	} else if !strings.Contains(p.TauChargeSReason, "rail") {
		t.Errorf("tau_charge_s_reason %q does not say the samples sit on a rail", p.TauChargeSReason)
	} else {
		t.Logf("tau_charge_s_reason: %s", p.TauChargeSReason)
	}
}

// truthRipple returns the peak-to-peak of the model's noise-free sense voltage over
// samples [from, to).
func truthRipple(steps []loop.Sample, from, to int) float64 {
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, st := range steps[from:to] {
		lo, hi = math.Min(lo, st.Sense), math.Max(hi, st.Sense)
	}
	return hi - lo
}

// TestCutReadingIsGlitch cuts one reading (pv 850 read as 8, a valid-looking line) in a
// steady segment: it is a glitch with its line number, the ripple stays the model's, and
// the duty counts the drive that followed it.
func TestCutReadingIsGlitch(t *testing.T) {
	t.Parallel()
	cfg := greenhouse(loop.ThreeState, 1e6, 8)
	sp := schedule(4000, 300, 850)
	var cutLine int64
	mk := func(cut bool) (*capture, *Summary) {
		c := &capture{cfg: cfg.WithDefaults()}
		c.metaLine()
		c.run(t, sp, 8000, 0, 0, func(k int64, pv *int, _ *string) {
			if cut && k == 7000 {
				*pv = 8
				cutLine = c.line + 1
			}
		})
		return c, c.summarize(t)
	}
	c, sum := mk(true)
	_, clean := mk(false)
	if g := sum.Glitches; g.Count != 1 || len(g.Lines) != 1 || g.Lines[0] != cutLine {
		t.Fatalf("glitches: got %+v, want one at line %d", g, cutLine)
	}
	if clean.Glitches.Count != 0 {
		t.Errorf("clean capture: %d glitches, want 0", clean.Glitches.Count)
	}
	seg := sum.Segments[len(sum.Segments)-1]
	// Truth: the last half of the segment (samples 6000..8000), noise-free, plus noise;
	// the measured p-p includes noise, so allow 10 % or a few LSB of noise around it.
	lsb := 5.0 / 1024
	tr := truthRipple(c.steps, 6000, 8000)
	if seg.RipplePPV == nil || *seg.RipplePPV > tr+8*lsb {
		t.Errorf("ripple p-p: got %v V, want about %g V (noise-free) plus noise, not a cut reading's 4 V", deref(seg.RipplePPV), tr)
	}
	cs := clean.Segments[len(clean.Segments)-1]
	if seg.DutyCharge == nil || cs.DutyCharge == nil || math.Abs(*seg.DutyCharge-*cs.DutyCharge) > 0.002 {
		t.Errorf("duty charge: got %v, clean %v: the drive after a glitch stays in the duty", deref(seg.DutyCharge), deref(cs.DutyCharge))
	}
	if sum.Plant.TauChargeS == nil || relErr(*sum.Plant.TauChargeS, *clean.Plant.TauChargeS) > 0.01 {
		t.Errorf("tau_charge %v against %v without the cut: the glitch entered the fit", deref(sum.Plant.TauChargeS), deref(clean.Plant.TauChargeS))
	}
	t.Logf("glitch at line %d; ripple %.4g V (clean %.4g, noise-free truth %.4g)", cutLine, deref(seg.RipplePPV), deref(cs.RipplePPV), tr)
}

// TestResetIsEvent restarts the board mid-capture (t and n from 0, the boot comment and
// meta lines again, a new setpoint): a reset event, a new segment, and no step.
func TestResetIsEvent(t *testing.T) {
	t.Parallel()
	cases := []struct {
		name   string
		t0, n0 int64 // board time and sequence number after the restart
		sp2    int
	}{
		{"t and n restart", 0, 0, 400},
		{"t and n restart, same setpoint", 0, 0, 600},
		// The board keeps its clock but the banner comes with a 300 ms gap.
		{"banner and a gap", 3_300_000, 3300, 400},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			c := &capture{cfg: greenhouse(loop.ThreeState, 1e6, 9).WithDefaults()}
			c.metaLine()
			c.run(t, schedule(3000, 600), 3000, 0, 0, nil)
			c.println("# boot")
			c.metaLine()
			resetLine := c.line + 1
			c.cfg.Seed++
			c.run(t, schedule(3000, tc.sp2), 3000, tc.t0, tc.n0, nil)
			sum := c.summarize(t)
			if len(sum.Steps) != 0 {
				t.Errorf("steps: got %+v, want none (a reset is not a setpoint step)", sum.Steps)
			}
			var resets []Event
			for _, e := range sum.Events {
				if e.Kind == EventReset {
					resets = append(resets, e)
				}
			}
			if len(resets) != 1 || resets[0].Line != resetLine {
				t.Fatalf("events: got %+v, want one reset at line %d", sum.Events, resetLine)
			}
			if len(sum.Segments) != 2 {
				t.Errorf("segments: got %d, want 2 (the reset splits)", len(sum.Segments))
			}
			if at := resets[0].AtS; at == nil || math.Abs(*at-3.0) > 0.4 {
				t.Errorf("reset at %v s, want about 3 s", deref(at))
			}
		})
	}
}

// TestMetaChangeEvent sends "deadband=9" half way: an event with its line and text,
// and a new segment without a step.
func TestMetaChangeEvent(t *testing.T) {
	t.Parallel()
	c := &capture{cfg: greenhouse(loop.ThreeState, 1e6, 10).WithDefaults()}
	c.metaLine()
	c.run(t, schedule(3000, 600), 3000, 0, 0, nil)
	c.println("# deadband=9")
	line := c.line
	c.cfg.Controller.Deadband = 9
	c.run(t, schedule(3000, 600), 3000, 3_000_000, 3000, nil)
	sum := c.summarize(t)
	if len(sum.Events) != 1 || sum.Events[0].Kind != EventMeta || sum.Events[0].Line != line || !strings.Contains(sum.Events[0].Text, "deadband=9 (was 6)") {
		t.Fatalf("events: got %+v, want one meta event at line %d saying deadband=9 (was 6)", sum.Events, line)
	}
	if len(sum.Segments) != 2 || len(sum.Steps) != 0 {
		t.Errorf("segments %d, steps %d: want 2 and 0", len(sum.Segments), len(sum.Steps))
	}
}

// TestCaptureCommandEvent checks a line the host sent to the board, in a capture.
func TestCaptureCommandEvent(t *testing.T) {
	t.Parallel()
	in := telemetry.CaptureMagic + " v1\n" +
		"0.000000 < # vref=5 adc_bits=10 period_us=1000 mode=three-state deadband=6\n" +
		"0.001000 < t=1000 sp=500 pv=480 u=1\n" +
		"0.002000 < t=2000 sp=500 pv=490 u=1\n" +
		"0.002500 > set deadband=9\n" +
		"0.003000 < t=3000 sp=500 pv=497 u=0\n" +
		"0.004000 ! unplugged\n" +
		"0.504000 ! reconnected\n" +
		"0.505000 < t=1000 sp=500 pv=300 u=1\n"
	sum, err := Summarize(telemetry.NewScanner(strings.NewReader(in)), Options{})
	if err != nil {
		t.Fatal(err)
	}
	var kinds []string
	for _, e := range sum.Events {
		kinds = append(kinds, e.Kind)
	}
	// The board time restarts after the replug: a reset too.
	if got, want := strings.Join(kinds, " "), "command unplug reconnect reset"; got != want {
		t.Fatalf("event kinds: got %q, want %q (%+v)", got, want, sum.Events)
	}
	if e := sum.Events[0]; e.Text != "set deadband=9" || e.Line != 5 {
		t.Errorf("command: got %+v, want set deadband=9 at line 5", e)
	}
	if len(sum.Segments) != 3 || len(sum.Steps) != 0 {
		t.Errorf("segments %d, steps %d: want 3 and 0 (a sent command and an unplug split, without a step)", len(sum.Segments), len(sum.Steps))
	}
}

// TestSuspectLine leaves u off one data line of many.
func TestSuspectLine(t *testing.T) {
	t.Parallel()
	c := &capture{cfg: greenhouse(loop.ThreeState, 1e6, 11).WithDefaults()}
	c.metaLine()
	var line int64
	c.run(t, schedule(3000, 600), 3000, 0, 0, func(k int64, _ *int, fields *string) {
		if k == 1500 {
			*fields = "t n sp pv"
			line = c.line + 1
		}
	})
	sum := c.summarize(t)
	if s := sum.SuspectLines; s.Count != 1 || len(s.Lines) != 1 || s.Lines[0] != line {
		t.Errorf("suspect_lines: got %+v, want line %d", s, line)
	}
}

// TestDecidePlantSupplyLimited checks the rule on v_high alone: a drop inside the
// supply's tolerance is not a load, beyond it is.
func TestDecidePlantSupplyLimited(t *testing.T) {
	base := plantEvidence{tauC: interval{45, 44, 46}, tauH: unknown(), supply: 5, supplyTol: 0.05, r: 47e3, lsb: 5.0 / 1024,
		vLow: interval{0, -0.01, 0.01}}
	d := base
	d.vHigh = interval{4.85, 4.84, 4.86} // 3 % below
	got := decidePlant(d)
	if got.load.known() || got.loadReason != reasonSupplyLimited || got.kind != "" {
		t.Errorf("3 %% drop: got kind %q load %v (%s), want null and %q", got.kind, got.load.v, got.loadReason, reasonSupplyLimited)
	}
	d.supplyTol = 0.01
	got = decidePlant(d)
	// Truth: v_high = Vs R_L/(R+R_L), so R_L = R v_high/(Vs - v_high) = 47k * 4.85/0.15.
	if want := 47e3 * 4.85 / 0.15; got.kind != KindLoad || relErr(got.load.v, want) > 1e-9 {
		t.Errorf("3 %% drop with a 1 %% supply: got kind %q load %g, want load %g", got.kind, got.load.v, want)
	}
}

// TestGapEvent leaves 300 periods out of the board time without a banner: a gap event,
// not a reset.
func TestGapEvent(t *testing.T) {
	t.Parallel()
	c := &capture{cfg: greenhouse(loop.ThreeState, 1e6, 12).WithDefaults()}
	c.metaLine()
	c.run(t, schedule(3000, 600), 3000, 0, 0, nil)
	line := c.line + 1
	c.run(t, schedule(3000, 600), 3000, 3_300_000, 3300, nil)
	sum := c.summarize(t)
	if len(sum.Events) != 1 || sum.Events[0].Kind != EventGap || sum.Events[0].Line != line {
		t.Fatalf("events: got %+v, want one gap at line %d", sum.Events, line)
	}
}

// TestNoGlitchWhenTauShort cuts a reading in a loop with tau = 1.5 T: one period can move
// the level most of the way, so by the rule no reading is a glitch.
func TestNoGlitchWhenTauShort(t *testing.T) {
	t.Parallel()
	cfg := greenhouse(loop.ThreeState, 0, 13)
	cfg.Circuit.R = 1.5e3 // tau = 1.5 ms, T = 1 ms
	c := &capture{cfg: cfg.WithDefaults()}
	c.metaLine()
	c.run(t, square(300, 700, 200), 6000, 0, 0, func(k int64, pv *int, _ *string) {
		if k == 5000 {
			*pv = 8
		}
	})
	sum := c.summarize(t)
	if sum.Glitches.Count != 0 {
		t.Errorf("glitches: got %+v, want none with tau <= 2 T", sum.Glitches)
	}
	t.Logf("tau charge %v samples (%s)", deref(sum.Plant.TauChargeSamples), sum.Plant.TauChargeSamplesReason)
}

// TestDecidePlantUnresolvedDroop: a hold whose droop the fit cannot resolve (its tau_h
// interval reaches from below the load that v_high implies up to infinity) does not say
// "no load", so a drop of the top beyond the supply tolerance is a load, not a buffer;
// a hold whose interval lies above that load does rule it out (then the drop is a buffer's).
func TestDecidePlantUnresolvedDroop(t *testing.T) {
	t.Parallel()
	// Truth: R 30 kOhm, R_L 300 kOhm, C 1 uF, T 1 ms, Vs 5 V: v_high = Vs R_L/(R+R_L)
	// = 4.5455 V, tau_c = C (R || R_L) = 27.27 samples, tau_h = R_L C = 300 samples.
	ev := plantEvidence{tauC: interval{27.27, 27.0, 27.5}, tauH: interval{900, 150, math.Inf(1)}, holdPairs: 3000,
		supply: 5, supplyTol: 0.05, r: 30e3, lsb: 5.0 / 1024, vHigh: interval{4.5455, 4.54, 4.55}, vLow: unknown()}
	got := decidePlant(ev)
	if want := 30e3 * 4.5455 / (5 - 4.5455); got.kind != KindLoad || relErr(got.load.v, want) > 1e-9 || got.drop.known() {
		t.Errorf("unresolved droop: got kind %q load %g drop %g, want a load of %g and no drop", got.kind, got.load.v, got.drop.v, want)
	}
	ev.tauH = interval{5000, 400, math.Inf(1)} // the hold rules out tau_h = 300 samples
	if got = decidePlant(ev); got.kind != KindBuffer {
		t.Errorf("droop ruled out: got kind %q, want %q", got.kind, KindBuffer)
	}
}
