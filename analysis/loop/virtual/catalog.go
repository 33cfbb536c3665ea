package virtual

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"time"

	"github.com/caploop/caploop/analysis/loop"
	"github.com/caploop/caploop/telemetry"
)

// Capture is one of the demo and test captures in the repository's testdata directory:
// a scenario, the file it is written to and a note of what it shows.
type Capture struct {
	File     string // file name in testdata: .txt plain telemetry, .cap a caploop capture
	Note     string // what the capture shows, one or two sentences
	Scenario Scenario
}

// CaptureStart is the start time written into the header of generated .cap captures, so
// that regenerating them gives the same bytes.
var CaptureStart = time.Date(2026, 3, 1, 9, 0, 0, 0, time.UTC)

// HostLatency is the delay between a board line's sample instant and its host time in
// generated .cap captures.
const HostLatency = 0.002

// greenhouse is the demo circuit with a sound deadband: the base of several captures.
func greenhouse() Scenario {
	sc := DefaultScenario()
	sc.Deadband = 9
	sc.Dwell = 2
	sc.Duration = 6
	return sc
}

// Captures lists the testdata captures, in the order of testdata/README.md.
func Captures() []Capture {
	var cs []Capture

	sc := greenhouse()
	sc.Name, sc.Seed = "three-state-good", 11
	cs = append(cs, Capture{File: "three-state-good.txt", Scenario: sc,
		Note: "Greenhouse sensor bias at 1.2, 2.0 and 2.8 V, 2 s each: three-state, 47 kΩ, 1 µF, " +
			"1 MΩ sensor load, deadband 9. The band is wider than the largest step near each " +
			"setpoint (about 16 counts at 1.2 V), so the loop settles into hold with a short " +
			"top-up charge now and then."})

	sc = DefaultScenario()
	sc.Name, sc.Seed = "three-state-chatter", 12
	sc.Circuit = loop.Circuit{Supply: 5, R: 22e3, RPin: 25, C: 1e-6}
	sc.Deadband = 3
	sc.Levels, sc.Dwell, sc.Duration = []float64{2.5, 1.5}, 3, 6
	sc.ADC.Noise = 0.7
	cs = append(cs, Capture{File: "three-state-chatter.txt", Scenario: sc,
		Note: "Bench reference at 2.5 V then 1.5 V: three-state, 22 kΩ, 1 µF, no load, deadband 3. " +
			"One period's step near 2.5 V is about 23 counts, far more than the band of 7, so the " +
			"loop jumps across it and chatters between charge and discharge like a two-state loop. " +
			"At 1.5 V it happens to land inside the band and, with nothing to droop the node, stays."})

	sc = DefaultScenario()
	sc.Name, sc.Seed = "two-state-ramp", 13
	sc.Circuit = loop.Circuit{Supply: 3.3, R: 10e3, RPin: 25, C: 10e-6}
	sc.ADC = loop.ADC{Vref: 3.3, Bits: 12, Noise: 1}
	sc.Mode, sc.Deadband = telemetry.TwoState, 0
	sc.Profile, sc.Levels, sc.Dwell, sc.Duration = Ramp, []float64{0.5, 2.8}, 3, 6
	sc.V0 = 0.5
	cs = append(cs, Capture{File: "two-state-ramp.txt", Scenario: sc,
		Note: "Bench reference with a 12-bit ADC at 3.3 V: two-state, 10 kΩ, 10 µF (tau 0.1 s), " +
			"the setpoint ramps from 0.5 V to 2.8 V and back over 6 s. The charge duty follows " +
			"the setpoint (about Vsp / 3.3 V) and the limit cycle changes with it."})

	sc = greenhouse()
	sc.Name, sc.Seed = "loaded-droop", 14
	sc.Circuit.Load = 100e3
	sc.MetaLoad = -1
	sc.Levels = []float64{1.0, 2.0, 3.0}
	cs = append(cs, Capture{File: "loaded-droop.txt", Scenario: sc,
		Note: "The greenhouse board with a 100 kΩ load it does not declare (no load= in the meta " +
			"lines): hold droops with tau 0.1 s (several counts per sample near 3 V), the charge " +
			"level sags to 3.4 V and tau shrinks to 32 ms. Setpoints 1.0, 2.0 and 3.0 V."})

	sc = greenhouse()
	sc.Name, sc.Seed = "follower-limit", 15
	sc.Circuit.Load = 0
	sc.Circuit.Follower = loop.Follower{VBE: 0.65, Beta: 100, RE: 10e3}
	sc.Deadband = 6
	sc.Levels = []float64{2.0, 3.5, 4.6}
	cs = append(cs, Capture{File: "follower-limit.txt", Scenario: sc,
		Note: "An emitter follower (VBE 0.65 V, beta 100, RE 10 kΩ) between the capacitor and the " +
			"ADC: the sensed level is the node minus VBE, so the 4.6 V setpoint cannot be reached " +
			"(the sense tops out near 4.16 V) and the loop charges for ever there. Near the ceiling " +
			"the charge step shrinks (about 3 counts per period at 3.5 V against 19 for discharge)."})

	sc = greenhouse()
	sc.Name, sc.Seed = "noisy-sine", 16
	sc.ADC.Noise = 3
	sc.Deadband = 12
	sc.Profile, sc.Levels, sc.Dwell = Sine, []float64{1.5, 3.5}, 4
	sc.Faults.BurstEvery, sc.Faults.BurstLen, sc.Faults.BurstNoise = 1.5, 0.3, 15
	cs = append(cs, Capture{File: "noisy-sine.txt", Scenario: sc,
		Note: "The greenhouse circuit with 3 counts rms of ADC noise and a 0.3 s burst of 15 counts " +
			"rms every 1.5 s; the setpoint follows a slow sine between 1.5 and 3.5 V (period 4 s), " +
			"deadband 12."})

	sc = greenhouse()
	sc.Name, sc.Seed = "dirty-stream", 17
	sc.T0 = math.MaxUint32 - 1_500_000 + 1 // the clock wraps 1.5 s after boot
	sc.DropRate, sc.Jitter = 0.005, 30e-6
	sc.Faults.GarbageEvery = 0.4
	sc.Faults.ResetAfter = 2.2
	sc.Faults.UnplugAfter, sc.Faults.ReplugAfter = 3.7, 0.5
	cs = append(cs, Capture{File: "dirty-stream.txt", Scenario: sc,
		Note: "The good greenhouse loop over a bad line: garbage bytes (NUL, ESC, invalid UTF-8) every " +
			"0.4 s, alone or inside a data line; 0.5 % of lines lost (gaps in n); 30 µs rms jitter; " +
			"the board clock t wraps at 2^32 1.5 s after boot; a reset at 2.2 s cuts a line (the " +
			"boot comment follows on the same line) and restarts t, n and the profile; an unplug " +
			"at 3.7 s cuts another line and the board boots again 0.5 s later."})

	sc = DefaultScenario()
	sc.Name, sc.Seed = "tuned-capture", 18
	sc.Levels, sc.Dwell, sc.Duration = []float64{1.2, 2.0}, 1.25, 5
	sc.Script = []Command{{At: 2.5, Line: "set deadband=9"}}
	cs = append(cs, Capture{File: "tuned.cap", Scenario: sc,
		Note: "A caploop capture (host times, direction marks) of the demo board: deadband 4 " +
			"chatters a little at 1.2 V; at 2.5 s the host sends `set deadband=9` (a `>` record), " +
			"the board answers `# deadband=9` and the same two setpoints run again with the wider " +
			"band: a before/after pair in one file."})
	return cs
}

// Truth is the sidecar file of a capture (NAME.truth.json): the true circuit and
// controller behind it and figures derived from them, for checking the analysis. Every
// key carries its unit as a suffix.
type Truth struct {
	File     string       `json:"file"`
	Note     string       `json:"note"`
	Scenario string       `json:"scenario"` // the scenario in scenario-file form
	Seed     uint64       `json:"seed"`
	Circuit  TruthCircuit `json:"circuit"`
	ADC      TruthADC     `json:"adc"`
	Mode     string       `json:"mode"`
	Deadband int          `json:"deadband_counts"`
	PeriodS  float64      `json:"period_s"`
	JitterS  float64      `json:"jitter_s"`
	DropRate float64      `json:"drop_rate"`
	MetaSays string       `json:"meta_says"` // the boot meta lines, joined by " | "
	Derived  TruthDerived `json:"derived"`
	Profile  TruthProfile `json:"profile"`
	Lines    int64        `json:"data_lines"` // clean data lines in the file
	Duration float64      `json:"duration_s"`
	Events   []Event      `json:"events"`
}

// TruthCircuit is the true circuit in SI units.
type TruthCircuit struct {
	SupplyV       float64  `json:"supply_v"`
	ROhm          float64  `json:"r_ohm"`
	RDischargeOhm float64  `json:"r_discharge_ohm"`
	RPinOhm       float64  `json:"r_pin_ohm"`
	CF            float64  `json:"c_f"`
	LoadOhm       float64  `json:"load_ohm"` // 0 = none
	LeakOhm       float64  `json:"leak_ohm"` // 0 = none
	FollowerVBEV  *float64 `json:"follower_vbe_v"`
	FollowerBeta  *float64 `json:"follower_beta"`
	FollowerREOhm *float64 `json:"follower_re_ohm"`
}

// TruthADC is the true converter.
type TruthADC struct {
	VrefV          float64 `json:"vref_v"`
	VrefError      float64 `json:"vref_error"`
	Bits           int     `json:"bits"`
	GainError      float64 `json:"gain_error"`
	OffsetCounts   float64 `json:"offset_counts"`
	NoiseRMSCounts float64 `json:"noise_rms_counts"`
}

// TruthDerived are figures of the true circuit from analysis/loop's closed forms.
type TruthDerived struct {
	TauChargeS    float64  `json:"tau_charge_s"`
	TauDischargeS float64  `json:"tau_discharge_s"`
	TauHoldS      *float64 `json:"tau_hold_s"` // null: the node floats (no load, leak or follower)
	VHighV        float64  `json:"v_high_v"`   // node level under charge for ever
	VLowV         float64  `json:"v_low_v"`
	SenseHighV    float64  `json:"sense_high_v"`    // ADC input level under charge for ever
	StepMaxV      float64  `json:"step_max_v"`      // largest one-period step anywhere
	LSBV          float64  `json:"lsb_v"`           // vref / 2^bits
	SetpointSteps []SPStep `json:"setpoint_steps"`  // per level of the profile
	Unreachable   []int    `json:"unreachable_sps"` // setpoint counts above the sense ceiling
}

// SPStep is the one-period charge and discharge step of the node at a setpoint, in counts
// at the ADC: a three-state loop settles there only if 2 deadband + 1 exceeds the larger.
type SPStep struct {
	SetpointCounts  int     `json:"setpoint_counts"`
	SetpointV       float64 `json:"setpoint_v"`
	ChargeCounts    float64 `json:"charge_step_counts"`
	DischargeCounts float64 `json:"discharge_step_counts"`
}

// TruthProfile is the setpoint profile.
type TruthProfile struct {
	Kind    string    `json:"kind"`
	LevelsV []float64 `json:"levels_v"`
	DwellS  float64   `json:"dwell_s"`
	Script  []string  `json:"host_lines"` // "2.5s set deadband=9"
}

func r9(x float64) float64 {
	if x == 0 || math.IsInf(x, 0) || math.IsNaN(x) {
		return x
	}
	return round12(x)
}

// truth returns the sidecar of capture c after its board b ran.
func truth(c Capture, b *Board) Truth {
	sc := b.Scenario()
	ci := sc.Circuit
	var scn bytes.Buffer
	WriteScenario(&scn, &sc)
	meta := strings.TrimSpace(string(appendMetaPair(nil, sc.Meta())))
	t := Truth{
		File: c.File, Note: c.Note, Scenario: scn.String(), Seed: sc.Seed,
		Circuit: TruthCircuit{SupplyV: ci.Supply, ROhm: ci.R, RDischargeOhm: ci.RDis() - ci.RPin,
			RPinOhm: ci.RPin, CF: ci.C, LoadOhm: ci.Load, LeakOhm: ci.Leak},
		ADC: TruthADC{VrefV: sc.ADC.Vref, VrefError: sc.ADC.VrefError, Bits: sc.ADC.Bits,
			GainError: sc.ADC.Gain, OffsetCounts: sc.ADC.Offset, NoiseRMSCounts: sc.ADC.Noise},
		Mode: sc.Mode.String(), Deadband: sc.Deadband, PeriodS: sc.Period, JitterS: sc.Jitter,
		DropRate: sc.DropRate, MetaSays: strings.ReplaceAll(meta, "\n", " | "),
		Profile: TruthProfile{Kind: sc.Profile.String(), LevelsV: sc.Levels, DwellS: sc.Dwell},
		Lines:   b.Lines(), Duration: r9(b.Now()), Events: b.Events(),
	}
	for _, s := range sc.Script {
		t.Profile.Script = append(t.Profile.Script, fmt.Sprintf("%gs %s", s.At, s.Line))
	}
	if ci.HasFollower() {
		f := ci.Follower
		beta := f.Beta
		if beta == 0 {
			beta = loop.DefaultBeta
		}
		t.Circuit.FollowerVBEV, t.Circuit.FollowerBeta, t.Circuit.FollowerREOhm = &f.VBE, &beta, &f.RE
		ci.Follower.Beta = beta
	}
	d := &t.Derived
	d.TauChargeS = r9(ci.Tau(loop.Charge))
	d.TauDischargeS = r9(ci.Tau(loop.Discharge))
	if th := ci.Tau(loop.Hold); !math.IsInf(th, 0) {
		th = r9(th)
		d.TauHoldS = &th
	}
	d.VHighV, d.VLowV = r9(ci.VInf(loop.Charge)), r9(ci.VInf(loop.Discharge))
	d.SenseHighV = r9(ci.Sense(d.VHighV))
	d.StepMaxV = r9(ci.StepMax(sc.Period))
	d.LSBV = r9(sc.ADC.Vref / math.Ldexp(1, sc.ADC.Bits))
	levels := sc.Levels
	if sc.Profile == Ramp || sc.Profile == Sine {
		lo, hi := levels[0], levels[0]
		for _, v := range levels {
			lo, hi = min(lo, v), max(hi, v)
		}
		levels = []float64{lo, (lo + hi) / 2, hi}
	}
	perV := math.Ldexp(1, sc.ADC.Bits) / sc.ADC.Vref
	for _, v := range levels {
		spc := sc.Counts(v)
		vs := float64(spc) / perV // sense level of the setpoint code
		node := vs
		if ci.HasFollower() {
			node = vs + ci.Follower.VBE
		}
		st := SPStep{SetpointCounts: spc, SetpointV: r9(vs)}
		if vs < d.SenseHighV {
			st.ChargeCounts = r9((ci.Sense(ci.Advance(node, loop.Charge, sc.Period)) - vs) * perV)
		} else {
			d.Unreachable = append(d.Unreachable, spc)
		}
		st.DischargeCounts = r9((vs - ci.Sense(ci.Advance(node, loop.Discharge, sc.Period))) * perV)
		d.SetpointSteps = append(d.SetpointSteps, st)
	}
	return t
}

// CaptureOutput turns a board's output into a caploop capture (see telemetry.CaptureWriter):
// every line the board writes becomes a '<' record, host lines of the scenario's script
// become '>' records and unplug and re-plug become '!' records ("unplugged",
// "reconnected"). Host times are the board time of each sample plus HostLatency, so a
// capture made as fast as possible has the times it would have had in real time. Pass it
// to Board.Run and call Flush after Run returns.
type CaptureOutput struct {
	cw   *telemetry.CaptureWriter
	now  float64
	line []byte // bytes of a line not yet ended
	err  error
}

// NewCaptureOutput writes the capture header (start time and source=...) to w.
func NewCaptureOutput(w io.Writer, start time.Time, source string) (*CaptureOutput, error) {
	cw, err := telemetry.NewCaptureWriter(w, start, "source="+source)
	if err != nil {
		return nil, err
	}
	return &CaptureOutput{cw: cw}, nil
}

func (w *CaptureOutput) at(now float64) { w.now = now }

func (w *CaptureOutput) stamp() time.Duration {
	return time.Duration(math.Round((w.now+HostLatency)*1e6)) * time.Microsecond
}

func (w *CaptureOutput) host(dir telemetry.Direction, text string) {
	if w.err == nil {
		w.err = w.cw.Write(w.stamp(), dir, []byte(text))
	}
}

// Write records every complete line of p; a line without its end waits for the rest.
func (w *CaptureOutput) Write(p []byte) (int, error) {
	n := len(p)
	for len(p) > 0 && w.err == nil {
		i := bytes.IndexByte(p, '\n')
		if i < 0 {
			w.line = append(w.line, p...)
			break
		}
		w.line = append(w.line, p[:i]...)
		w.err = w.cw.Write(w.stamp(), telemetry.FromBoard, w.line)
		w.line = w.line[:0]
		p = p[i+1:]
	}
	return n, w.err
}

// Flush records a last line without its end, if any, and flushes the capture.
func (w *CaptureOutput) Flush() error {
	if w.err == nil && len(w.line) > 0 {
		w.err = w.cw.Write(w.stamp(), telemetry.FromBoard, w.line)
		w.line = w.line[:0]
	}
	if w.err != nil {
		return w.err
	}
	return w.cw.Flush()
}

// WriteCapture runs the scenario of c as fast as possible and writes its file and its
// truth sidecar (the file name with .truth.json in place of the extension) into dir.
func WriteCapture(dir string, c Capture) error {
	b, err := NewBoard(c.Scenario)
	if err != nil {
		return fmt.Errorf("virtual: %s: %w", c.File, err)
	}
	var out bytes.Buffer
	if strings.HasSuffix(c.File, ".cap") {
		w, err := NewCaptureOutput(&out, CaptureStart, "virtual:"+c.Scenario.Name)
		if err != nil {
			return err
		}
		if err := b.Run(context.Background(), w, false); err != nil {
			return fmt.Errorf("virtual: %s: %w", c.File, err)
		}
		if err := w.Flush(); err != nil {
			return err
		}
	} else if err := b.Run(context.Background(), &out, false); err != nil {
		return fmt.Errorf("virtual: %s: %w", c.File, err)
	}
	if err := os.WriteFile(filepath.Join(dir, c.File), out.Bytes(), 0o644); err != nil {
		return err
	}
	js, err := json.MarshalIndent(truth(c, b), "", "  ")
	if err != nil {
		return err
	}
	js = append(js, '\n')
	return os.WriteFile(filepath.Join(dir, TruthFile(c.File)), js, 0o644)
}

// TruthFile returns the name of the truth sidecar of a capture file: x.txt -> x.truth.json.
func TruthFile(file string) string {
	return strings.TrimSuffix(file, filepath.Ext(file)) + ".truth.json"
}

// GenerateTestdata writes every capture of Captures, its truth file and README.md into
// dir. The output depends only on the code: running it again gives the same bytes.
func GenerateTestdata(dir string) error {
	var readme strings.Builder
	readme.WriteString(readmeHead)
	for _, c := range Captures() {
		if err := WriteCapture(dir, c); err != nil {
			return err
		}
		fmt.Fprintf(&readme, "- `%s` (truth: `%s`): %s\n", c.File, TruthFile(c.File), c.Note)
	}
	readme.WriteString(readmeTail)
	return os.WriteFile(filepath.Join(dir, "README.md"), []byte(readme.String()), 0o644)
}

const readmeHead = `# Demo and test captures

Everything in this directory is made by the virtual board (package analysis/loop/virtual)
from fixed scenarios and seeds. Do not edit the files by hand; regenerate them from the
module root with

    go run ./testdata/gen

(or ` + "`go generate ./analysis/loop/virtual`" + `, which runs the same command).
The generator writes the same bytes every time (a test in analysis/loop/virtual checks that
these files match a fresh run). Change a scenario in analysis/loop/virtual/catalog.go, run the
command, and commit the files together with the change.

Files ending in .txt are plain telemetry, exactly the bytes a board would send; files
ending in .cap are caploop captures (host time, direction, raw line). Next to each file,
NAME.truth.json holds the truth behind it: the true circuit and ADC, the controller,
what the meta lines claim (which may differ from the truth), closed-form figures (tau
for charge, discharge and hold, the charge level, the step per period at each setpoint,
unreachable setpoints), the number of clean data lines and every event (boots, host
lines and answers, garbage, cut lines, resets, unplugs, noise bursts) with its board
time. The scenario is also there in scenario-file form: ` + "`caploop sim --scenario`" + `
reads it back.

`

const readmeTail = `
Setpoints are in volts at the ADC input; the data lines carry them in counts,
round(V * 2^bits / vref).
`
