package virtual

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"sort"
	"strconv"
	"strings"

	"github.com/caploop/caploop/analysis/loop"
	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/si"
)

// ProfileKind is the shape of the setpoint over time.
type ProfileKind uint8

// Setpoint profiles. Levels are volts at the ADC input; Dwell is in seconds.
const (
	Steps ProfileKind = iota // cycle through Levels, Dwell seconds each
	Ramp                     // triangle from the first to the last level and back, Dwell each way
	Sine                     // sine between the lowest and highest level, period Dwell
	Const                    // the first level for ever
)

var profileNames = []string{"steps", "ramp", "sine", "const"}

// String returns "steps", "ramp", "sine" or "const".
func (p ProfileKind) String() string {
	if int(p) < len(profileNames) {
		return profileNames[p]
	}
	return "unknown"
}

// Command is a host-to-board line sent at a fixed time of a scenario, as if a host had
// typed it: At seconds after the start, Line such as "set deadband=9".
type Command struct {
	At   float64
	Line string
}

// Faults is the misbehaviour a scenario asks for. Zero values mean "never". Times are
// seconds of board time since the start of the run.
type Faults struct {
	BurstEvery   float64 // a noise burst starts every BurstEvery seconds
	BurstLen     float64 // each burst lasts BurstLen seconds
	BurstNoise   float64 // ADC noise during a burst, rms counts
	GarbageEvery float64 // a run of garbage bytes (NUL, ESC, invalid UTF-8) every GarbageEvery seconds
	ResetAfter   float64 // the board resets once, mid-line, after ResetAfter seconds
	UnplugAfter  float64 // the board is unplugged once after UnplugAfter seconds
	ReplugAfter  float64 // and plugged in again ReplugAfter seconds later (0 = 1 s)
	BootTime     float64 // how long a boot takes after a reset or a re-plug (0 = 50 ms)
	// NoFlowControl: on a pseudo-terminal (sim --pty), output the reader does not take in
	// time is dropped, as by a USB serial bridge without flow control; by default the
	// board waits for the reader, as with flow control.
	NoFlowControl bool
}

// Scenario is everything a virtual board needs: the true circuit, the ADC, the controller,
// the setpoint profile, what the board's meta lines claim, the length of the run and the
// misbehaviour. All values are SI (volts, ohms, farads, seconds). The zero value is not
// useful; start from DefaultScenario and change what you need, with Set or by hand.
type Scenario struct {
	Name    string
	Seed    uint64
	Circuit loop.Circuit // the true circuit the model uses
	ADC     loop.ADC

	Mode     telemetry.Mode // TwoState or ThreeState
	Deadband int            // three-state half-width, counts

	Period   float64 // sample period, s
	Jitter   float64 // rms jitter of the sample instants, s
	DropRate float64 // probability that a data line is lost (the loop still runs)
	V0       float64 // capacitor voltage at power-up, V
	T0       uint32  // board clock at boot, µs (set near 2^32 to see the wrap)

	Profile ProfileKind
	Levels  []float64 // setpoint levels, V at the ADC input
	Dwell   float64   // s, see ProfileKind

	// What the boot meta lines claim about the parts: the nominal values from the parts
	// list, which may differ from the true Circuit. Zero means "say the true value"; a
	// negative MetaLoad means "say nothing about the load".
	MetaR, MetaC, MetaLoad float64
	HideParts              bool // say nothing about supply, r, c and load

	Samples  int64   // stop after this many data lines (0 = no limit)
	Duration float64 // stop after this much board time, s (0 = no limit)

	Script []Command // host lines sent at fixed times
	Faults Faults
}

// DefaultScenario is the demo that caploop shows with no arguments: a board that biases a
// greenhouse soil-moisture sensor at three levels, with a three-state loop whose deadband
// is a little too narrow for the step it takes near the lower setpoint, so it chatters
// there and the advice has something to fix (a deadband of 9 makes it settle).
//
// 5 V pin, 47 kΩ, 1 µF (film), 1 MΩ sensor input as load, 10-bit ADC at 5 V, 1 ms period,
// deadband 4 counts, 0.5 count rms noise, setpoints 1.2 V, 2.0 V, 2.8 V for 3 s each.
func DefaultScenario() Scenario {
	return Scenario{
		Name: "greenhouse-bias",
		Seed: 1,
		Circuit: loop.Circuit{
			Supply: 5,
			R:      47e3,
			RPin:   25,
			C:      1e-6,
			Load:   1e6,
		},
		ADC:      loop.ADC{Vref: 5, Bits: 10, Noise: 0.5},
		Mode:     telemetry.ThreeState,
		Deadband: 4,
		Period:   1e-3,
		Profile:  Steps,
		Levels:   []float64{1.2, 2.0, 2.8},
		Dwell:    3,
	}
}

// Config returns the loop model configuration of the scenario.
func (sc *Scenario) Config() loop.Config {
	cfg := loop.Config{
		Circuit:  sc.Circuit,
		ADC:      sc.ADC,
		Period:   sc.Period,
		Jitter:   sc.Jitter,
		DropRate: sc.DropRate,
		Seed:     sc.Seed,
		V0:       sc.V0,
	}
	cfg.Controller = controllerFor(sc.Mode, sc.Deadband)
	return cfg
}

func controllerFor(m telemetry.Mode, db int) loop.Controller {
	if m == telemetry.TwoState {
		return loop.Controller{Kind: loop.TwoState, Deadband: db}
	}
	return loop.Controller{Kind: loop.ThreeState, Deadband: db}
}

// Meta returns what the board's boot meta lines say.
func (sc *Scenario) Meta() telemetry.Meta {
	m := telemetry.Meta{
		Vref:     sc.ADC.Vref,
		ADCBits:  sc.ADC.Bits,
		Period:   sc.Period,
		Mode:     sc.Mode,
		Deadband: float64(sc.Deadband),
		Set:      telemetry.FieldVref | telemetry.FieldADCBits | telemetry.FieldPeriod | telemetry.FieldMode | telemetry.FieldDeadband,
	}
	if sc.HideParts {
		return m
	}
	m.Supply, m.R, m.C = sc.Circuit.Supply, pick(sc.MetaR, sc.Circuit.R), pick(sc.MetaC, sc.Circuit.C)
	m.Set |= telemetry.FieldSupply | telemetry.FieldR | telemetry.FieldC
	if l := pick(sc.MetaLoad, sc.Circuit.Load); l > 0 {
		m.Load = l
		m.Set |= telemetry.FieldLoad
	}
	return m
}

func pick(a, b float64) float64 {
	if a != 0 {
		return a
	}
	return b
}

// FullScale returns the largest ADC code, 2^bits - 1.
func (sc *Scenario) FullScale() int { return 1<<sc.ADC.Bits - 1 }

// Counts converts a voltage at the ADC input to the nearest code, clamped to the ADC
// range: round(v * 2^bits / vref).
func (sc *Scenario) Counts(v float64) int {
	c := int(math.Round(v * float64(int(1)<<sc.ADC.Bits) / sc.ADC.Vref))
	return max(0, min(c, sc.FullScale()))
}

// Setpoint returns the setpoint in volts t seconds after boot.
func (sc *Scenario) Setpoint(t float64) float64 {
	lv := sc.Levels
	if len(lv) == 0 {
		return 0
	}
	if len(lv) == 1 || sc.Profile == Const || sc.Dwell <= 0 {
		return lv[0]
	}
	switch sc.Profile {
	case Steps:
		i := int64(math.Floor(t/sc.Dwell+1e-9)) % int64(len(lv))
		return lv[i]
	case Ramp:
		a, b := lv[0], lv[len(lv)-1]
		ph := math.Mod(t/sc.Dwell, 2)
		if ph > 1 {
			ph = 2 - ph
		}
		return a + (b-a)*ph
	case Sine:
		lo, hi := lv[0], lv[0]
		for _, v := range lv {
			lo, hi = min(lo, v), max(hi, v)
		}
		return (lo+hi)/2 - (hi-lo)/2*math.Cos(2*math.Pi*t/sc.Dwell)
	}
	return lv[0]
}

// Validate reports the first thing in the scenario that a board cannot run with.
func (sc *Scenario) Validate() error {
	c := sc.Circuit
	switch {
	case !(c.Supply > 0):
		return errors.New("virtual: supply must be above 0 V")
	case !(c.R > 0):
		return errors.New("virtual: r must be above 0 ohm")
	case !(c.C > 0):
		return errors.New("virtual: c must be above 0 F")
	case c.RDischarge < 0 || c.RPin < 0 || c.Load < 0 || c.Leak < 0 || c.Follower.RE < 0:
		return errors.New("virtual: resistances must not be negative")
	case !(sc.ADC.Vref > 0):
		return errors.New("virtual: vref must be above 0 V")
	case sc.ADC.Bits < 4 || sc.ADC.Bits > 24:
		return fmt.Errorf("virtual: bits %d outside 4..24", sc.ADC.Bits)
	case sc.ADC.Noise < 0 || sc.Faults.BurstNoise < 0:
		return errors.New("virtual: noise must not be negative")
	case !(sc.Period >= 10e-6 && sc.Period <= 10):
		return fmt.Errorf("virtual: period %s outside 10 µs..10 s", si.Format(sc.Period, "s"))
	case sc.Jitter < 0 || sc.Jitter > sc.Period/4:
		return errors.New("virtual: jitter must be between 0 and a quarter of the period")
	case sc.DropRate < 0 || sc.DropRate >= 1:
		return errors.New("virtual: drop must be in [0, 1)")
	case sc.Mode != telemetry.TwoState && sc.Mode != telemetry.ThreeState:
		return errors.New("virtual: mode must be two-state or three-state")
	case sc.Deadband < 0 || sc.Deadband > sc.FullScale():
		return fmt.Errorf("virtual: deadband %d outside 0..%d", sc.Deadband, sc.FullScale())
	case len(sc.Levels) == 0:
		return errors.New("virtual: no setpoint level")
	case sc.Samples < 0 || sc.Duration < 0:
		return errors.New("virtual: samples and duration must not be negative")
	}
	for _, v := range sc.Levels {
		if v < 0 || v > sc.ADC.Vref || math.IsNaN(v) {
			return fmt.Errorf("virtual: setpoint %s outside 0..vref", si.Format(v, "V"))
		}
	}
	if sc.Profile != Const && len(sc.Levels) > 1 && !(sc.Dwell > 0) {
		return errors.New("virtual: dwell must be above 0 s")
	}
	f := sc.Faults
	for _, v := range []float64{f.BurstEvery, f.BurstLen, f.GarbageEvery, f.ResetAfter, f.UnplugAfter, f.ReplugAfter, f.BootTime} {
		if v < 0 || math.IsNaN(v) {
			return errors.New("virtual: fault times must not be negative")
		}
	}
	if f.BurstEvery > 0 && f.BurstLen >= f.BurstEvery {
		return errors.New("virtual: burst-len must be shorter than burst-every")
	}
	return nil
}

// Key is one scenario setting as it appears in a scenario file and as a `caploop sim` flag.
type Key struct {
	Name string // file key and flag name
	Unit string // SI unit symbol for values with prefixes ("Ω", "F", "V", "s"), or ""
	Help string
	set  func(sc *Scenario, v string) error
	get  func(sc *Scenario) string
}

// Get returns the key's current value in sc, in the form Set accepts.
func (k Key) Get(sc *Scenario) string { return k.get(sc) }

func siKey(name, unit, help string, p func(sc *Scenario) *float64) Key {
	return Key{Name: name, Unit: unit, Help: help,
		set: func(sc *Scenario, v string) error {
			x, err := si.ParseUnit(v, unit)
			if err != nil {
				return err
			}
			*p(sc) = round12(x)
			return nil
		},
		get: func(sc *Scenario) string {
			x := *p(sc)
			if x == 0 || unit == "" {
				return strconv.FormatFloat(x, 'g', -1, 64)
			}
			return strings.ReplaceAll(si.FormatDigits(x, unit, 6), " ", "")
		},
	}
}

func intKey(name, help string, p func(sc *Scenario) *int) Key {
	return Key{Name: name, Help: help,
		set: func(sc *Scenario, v string) error {
			x, err := strconv.Atoi(strings.TrimSpace(v))
			if err != nil {
				return fmt.Errorf("not a whole number: %q", v)
			}
			*p(sc) = x
			return nil
		},
		get: func(sc *Scenario) string { return strconv.Itoa(*p(sc)) },
	}
}

// Keys lists every scenario setting, in the order `caploop sim --help` shows them.
var Keys = []Key{
	{Name: "name", Help: "scenario name",
		set: func(sc *Scenario, v string) error { sc.Name = v; return nil },
		get: func(sc *Scenario) string { return sc.Name }},
	{Name: "seed", Help: "seed of noise, jitter, drops and faults; the same seed gives the same stream",
		set: func(sc *Scenario, v string) error {
			x, err := strconv.ParseUint(strings.TrimSpace(v), 10, 64)
			if err != nil {
				return fmt.Errorf("not a whole number: %q", v)
			}
			sc.Seed = x
			return nil
		},
		get: func(sc *Scenario) string { return strconv.FormatUint(sc.Seed, 10) }},
	siKey("supply", "V", "pin high level", func(sc *Scenario) *float64 { return &sc.Circuit.Supply }),
	siKey("r", "Ω", "series resistor (charge path)", func(sc *Scenario) *float64 { return &sc.Circuit.R }),
	siKey("r-discharge", "Ω", "discharge resistor, 0 = same as r", func(sc *Scenario) *float64 { return &sc.Circuit.RDischarge }),
	siKey("r-pin", "Ω", "pin output resistance", func(sc *Scenario) *float64 { return &sc.Circuit.RPin }),
	siKey("c", "F", "capacitor (its true value)", func(sc *Scenario) *float64 { return &sc.Circuit.C }),
	siKey("load", "Ω", "load from the node to ground, 0 = none", func(sc *Scenario) *float64 { return &sc.Circuit.Load }),
	siKey("leak", "Ω", "capacitor leakage resistance, 0 = none", func(sc *Scenario) *float64 { return &sc.Circuit.Leak }),
	siKey("re", "Ω", "emitter resistor of a follower buffer, 0 = no follower", func(sc *Scenario) *float64 { return &sc.Circuit.Follower.RE }),
	siKey("vbe", "V", "follower base-emitter drop", func(sc *Scenario) *float64 { return &sc.Circuit.Follower.VBE }),
	siKey("beta", "", "follower current gain", func(sc *Scenario) *float64 { return &sc.Circuit.Follower.Beta }),
	siKey("vref", "V", "ADC reference", func(sc *Scenario) *float64 { return &sc.ADC.Vref }),
	siKey("vref-error", "", "relative error of the real reference (0.01 = 1 % high)", func(sc *Scenario) *float64 { return &sc.ADC.VrefError }),
	intKey("bits", "ADC resolution", func(sc *Scenario) *int { return &sc.ADC.Bits }),
	siKey("gain-error", "", "relative ADC gain error", func(sc *Scenario) *float64 { return &sc.ADC.Gain }),
	siKey("offset", "", "ADC offset error, counts", func(sc *Scenario) *float64 { return &sc.ADC.Offset }),
	siKey("noise", "", "ADC input noise, rms counts", func(sc *Scenario) *float64 { return &sc.ADC.Noise }),
	{Name: "mode", Help: "controller: two-state or three-state",
		set: func(sc *Scenario, v string) error {
			m, err := parseMode(v)
			if err != nil {
				return err
			}
			sc.Mode = m
			return nil
		},
		get: func(sc *Scenario) string { return sc.Mode.String() }},
	intKey("deadband", "three-state half-width, counts", func(sc *Scenario) *int { return &sc.Deadband }),
	siKey("period", "s", "sample period", func(sc *Scenario) *float64 { return &sc.Period }),
	siKey("jitter", "s", "rms jitter of the sample instants", func(sc *Scenario) *float64 { return &sc.Jitter }),
	siKey("drop", "", "probability that a data line is lost", func(sc *Scenario) *float64 { return &sc.DropRate }),
	siKey("v0", "V", "capacitor voltage at power-up", func(sc *Scenario) *float64 { return &sc.V0 }),
	{Name: "t0", Help: "board clock at boot, µs (4294000000 shows the 2^32 wrap soon)",
		set: func(sc *Scenario, v string) error {
			x, err := strconv.ParseUint(strings.TrimSpace(v), 10, 32)
			if err != nil {
				return fmt.Errorf("not a whole number below 2^32: %q", v)
			}
			sc.T0 = uint32(x)
			return nil
		},
		get: func(sc *Scenario) string { return strconv.FormatUint(uint64(sc.T0), 10) }},
	{Name: "profile", Help: "setpoint profile: steps, ramp, sine or const",
		set: func(sc *Scenario, v string) error {
			for i, n := range profileNames {
				if strings.EqualFold(strings.TrimSpace(v), n) {
					sc.Profile = ProfileKind(i)
					return nil
				}
			}
			return fmt.Errorf("unknown profile %q (steps, ramp, sine, const)", v)
		},
		get: func(sc *Scenario) string { return sc.Profile.String() }},
	{Name: "sp", Unit: "V", Help: "setpoint levels, comma-separated volts at the ADC input",
		set: func(sc *Scenario, v string) error {
			var lv []float64
			for f := range strings.SplitSeq(v, ",") {
				x, err := si.ParseUnit(f, "V")
				if err != nil {
					return err
				}
				lv = append(lv, round12(x))
			}
			sc.Levels = lv
			return nil
		},
		get: func(sc *Scenario) string {
			s := make([]string, len(sc.Levels))
			for i, v := range sc.Levels {
				s[i] = strconv.FormatFloat(v, 'g', -1, 64)
			}
			return strings.Join(s, ",")
		}},
	siKey("dwell", "s", "time per step level, per ramp leg, or sine period", func(sc *Scenario) *float64 { return &sc.Dwell }),
	siKey("meta-r", "Ω", "r the meta lines claim, 0 = the true r", func(sc *Scenario) *float64 { return &sc.MetaR }),
	siKey("meta-c", "F", "c the meta lines claim, 0 = the true c", func(sc *Scenario) *float64 { return &sc.MetaC }),
	siKey("meta-load", "Ω", "load the meta lines claim, 0 = the true load, -1 = none said", func(sc *Scenario) *float64 { return &sc.MetaLoad }),
	{Name: "hide-parts", Help: "true: the meta lines say nothing about supply, r, c and load",
		set: func(sc *Scenario, v string) error {
			b, err := strconv.ParseBool(strings.TrimSpace(v))
			if err != nil {
				return fmt.Errorf("not true or false: %q", v)
			}
			sc.HideParts = b
			return nil
		},
		get: func(sc *Scenario) string { return strconv.FormatBool(sc.HideParts) }},
	{Name: "samples", Help: "stop after this many data lines, 0 = no limit",
		set: func(sc *Scenario, v string) error {
			x, err := strconv.ParseInt(strings.TrimSpace(v), 10, 64)
			if err != nil {
				return fmt.Errorf("not a whole number: %q", v)
			}
			sc.Samples = x
			return nil
		},
		get: func(sc *Scenario) string { return strconv.FormatInt(sc.Samples, 10) }},
	siKey("duration", "s", "stop after this much board time, 0 = no limit", func(sc *Scenario) *float64 { return &sc.Duration }),
	{Name: "at", Help: `host line sent at a time, "5s set deadband=9" (repeat the key for more)`,
		set: func(sc *Scenario, v string) error {
			v = strings.TrimSpace(v)
			when, line, ok := strings.Cut(v, " ")
			if !ok || strings.TrimSpace(line) == "" {
				return fmt.Errorf("want \"TIME LINE\", got %q", v)
			}
			t, err := si.ParseUnit(when, "s")
			if err != nil {
				return err
			}
			if t < 0 {
				return fmt.Errorf("time %q is negative", when)
			}
			sc.Script = append(sc.Script, Command{At: t, Line: strings.TrimSpace(line)})
			sort.SliceStable(sc.Script, func(i, j int) bool { return sc.Script[i].At < sc.Script[j].At })
			return nil
		},
		get: func(sc *Scenario) string {
			s := make([]string, len(sc.Script))
			for i, c := range sc.Script {
				s[i] = strconv.FormatFloat(c.At, 'g', -1, 64) + "s " + c.Line
			}
			return strings.Join(s, "; ")
		}},
	siKey("burst-every", "s", "a noise burst every so often, 0 = never", func(sc *Scenario) *float64 { return &sc.Faults.BurstEvery }),
	siKey("burst-len", "s", "length of each noise burst", func(sc *Scenario) *float64 { return &sc.Faults.BurstLen }),
	siKey("burst-noise", "", "ADC noise during a burst, rms counts", func(sc *Scenario) *float64 { return &sc.Faults.BurstNoise }),
	siKey("garbage-every", "s", "a run of garbage bytes every so often, 0 = never", func(sc *Scenario) *float64 { return &sc.Faults.GarbageEvery }),
	siKey("reset-after", "s", "reset the board once, mid-line, after this time, 0 = never", func(sc *Scenario) *float64 { return &sc.Faults.ResetAfter }),
	siKey("unplug-after", "s", "unplug the board once after this time, 0 = never", func(sc *Scenario) *float64 { return &sc.Faults.UnplugAfter }),
	siKey("replug-after", "s", "plug it in again this long after the unplug (0 = 1 s)", func(sc *Scenario) *float64 { return &sc.Faults.ReplugAfter }),
	siKey("boot-time", "s", "how long a boot takes after a reset or re-plug (0 = 50 ms)", func(sc *Scenario) *float64 { return &sc.Faults.BootTime }),
	{Name: "no-flow-control", Help: "true: on a pseudo-terminal, drop the bytes a slow reader does not take, as a USB bridge without flow control does (default: the board waits)",
		set: func(sc *Scenario, v string) error {
			x, err := strconv.ParseBool(strings.TrimSpace(v))
			if err != nil {
				return fmt.Errorf("want true or false: %q", v)
			}
			sc.Faults.NoFlowControl = x
			return nil
		},
		get: func(sc *Scenario) string { return strconv.FormatBool(sc.Faults.NoFlowControl) }},
}

// round12 rounds x to 12 significant digits, so that "100n" is 1e-07 and not
// 1.0000000000000001e-07 (100 * 1e-9 in binary floating point).
func round12(x float64) float64 {
	r, err := strconv.ParseFloat(strconv.FormatFloat(x, 'g', 12, 64), 64)
	if err != nil {
		return x
	}
	return r
}

func lookupKey(name string) (Key, bool) {
	for _, k := range Keys {
		if k.Name == name {
			return k, true
		}
	}
	return Key{}, false
}

// Set changes one setting by its key name (see Keys), parsing value with its unit:
// Set("r", "47k"), Set("c", "1u"), Set("mode", "three-state"), Set("sp", "1.2,2.5V").
func (sc *Scenario) Set(key, value string) error {
	k, ok := lookupKey(strings.TrimSpace(key))
	if !ok {
		return fmt.Errorf("virtual: unknown scenario key %q", key)
	}
	if err := k.set(sc, strings.TrimSpace(value)); err != nil {
		return fmt.Errorf("virtual: %s: %w", k.Name, err)
	}
	return nil
}

// ScenarioError is a bad line in a scenario file.
type ScenarioError struct {
	Name string // file name
	Line int    // 1-based
	Err  error
}

// Error returns "file:line: reason".
func (e *ScenarioError) Error() string { return fmt.Sprintf("%s:%d: %v", e.Name, e.Line, e.Err) }

// Unwrap returns the reason.
func (e *ScenarioError) Unwrap() error { return e.Err }

// ReadScenario applies a scenario file to sc. The format is one `key = value` per line
// (the keys of Keys, the same names as the flags of `caploop sim`); blank lines and lines
// starting with # are ignored; `at` may repeat. Example:
//
//	# bench reference, 12-bit ADC
//	supply = 3.3
//	r = 10k
//	c = 10u
//	mode = two-state
//	sp = 1.0, 2.5
//	at = 4s set mode=three-state
//
// name is used in errors ("bench.scn:3: ...").
func ReadScenario(sc *Scenario, r io.Reader, name string) error {
	s := bufio.NewScanner(r)
	line := 0
	for s.Scan() {
		line++
		text := strings.TrimSpace(s.Text())
		if text == "" || strings.HasPrefix(text, "#") {
			continue
		}
		k, v, ok := strings.Cut(text, "=")
		if !ok {
			return &ScenarioError{Name: name, Line: line, Err: errors.New("virtual: want key = value")}
		}
		if err := sc.Set(k, v); err != nil {
			return &ScenarioError{Name: name, Line: line, Err: err}
		}
	}
	if err := s.Err(); err != nil {
		return &ScenarioError{Name: name, Line: line + 1, Err: err}
	}
	return nil
}

// LoadScenario applies the scenario file at path to sc.
func LoadScenario(sc *Scenario, path string) error {
	f, err := os.Open(path)
	if err != nil {
		return err
	}
	defer f.Close()
	return ReadScenario(sc, f, path)
}

// WriteScenario writes sc in the scenario file format, one key per line.
func WriteScenario(w io.Writer, sc *Scenario) error {
	bw := bufio.NewWriter(w)
	for _, k := range Keys {
		if k.Name == "at" {
			for _, c := range sc.Script {
				fmt.Fprintf(bw, "at = %ss %s\n", strconv.FormatFloat(c.At, 'g', -1, 64), c.Line)
			}
			continue
		}
		if k.Name == "no-flow-control" && !sc.Faults.NoFlowControl {
			// A setting of the pseudo-terminal, not of the data: written only when set,
			// so that the scenarios written before it existed read the same.
			continue
		}
		fmt.Fprintf(bw, "%s = %s\n", k.Name, k.get(sc))
	}
	return bw.Flush()
}

func parseMode(v string) (telemetry.Mode, error) {
	switch strings.ToLower(strings.TrimSpace(v)) {
	case "two-state", "two", "2":
		return telemetry.TwoState, nil
	case "three-state", "three", "3":
		return telemetry.ThreeState, nil
	}
	return 0, fmt.Errorf("unknown mode %q (two-state, three-state)", v)
}
