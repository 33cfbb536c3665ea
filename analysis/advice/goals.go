package advice

import (
	"fmt"
	"math"
	"sort"
	"strings"

	"github.com/caploop/caploop/analysis/loop"
)

// Defaults used when a Goals or Request field is zero.
const (
	// DefaultPinCurrentA is the per-pin current limit of a 5 V part: about 20 mA in normal
	// use (common practice). A 3.3 V board gets less by default (see defaultPinCurrent).
	DefaultPinCurrentA = pinClassicA
	// DefaultMinPeriodS is the ADC conversion time that bounds the sample period from below:
	// 13 ADC clocks at 125 kHz for a 10-bit successive-approximation converter, 104 us
	// (classic 8-bit microcontroller datasheets, from memory).
	DefaultMinPeriodS = 104e-6
	// DefaultSigmaMultiple is the noise margin of the deadband, in standard deviations of
	// the ADC noise: 3 sigma leaves about 0.3 % of single readings outside (normal law).
	DefaultSigmaMultiple = 3
	// DefaultNoiseRMSCounts is the ADC noise assumed when none was measured, counts rms.
	DefaultNoiseRMSCounts = 1
	// DefaultRipplePct is the allowed ripple p-p when no goal is given, % of full scale.
	DefaultRipplePct = 2
	// DefaultSettleS is the settling-time goal for a full-scale step when none is given.
	DefaultSettleS = 0.5
	// DefaultTop is how many candidates the table shows.
	DefaultTop = 5
)

// maxSetpoints is how many used setpoints the engine simulates at most.
const maxSetpoints = 5

// Goals are what the user wants from the loop. The zero value means the defaults above.
type Goals struct {
	RippleV       float64   // allowed ripple p-p at the output, V; 0 = use RipplePct
	RipplePct     float64   // allowed ripple p-p, % of full scale (Vref); 0 = DefaultRipplePct
	SettleS       float64   // settling time of a full-scale step, s; 0 = DefaultSettleS
	StaticErrorV  float64   // allowed static error, V; 0 = the ripple goal (the level may rest anywhere in the band)
	R             Parts     // resistors on hand; zero = E12 from 100 ohm to 1 Mohm
	C             Parts     // capacitors on hand; zero = E12 from 10 nF to 100 uF
	PinCurrentA   float64   // pin current limit, A; 0 = by supply (see defaultPinCurrent)
	MinPeriodS    float64   // ADC conversion time, s; 0 = DefaultMinPeriodS
	SigmaMultiple float64   // deadband noise margin in sigmas; 0 = DefaultSigmaMultiple
	NoiseRMSCount float64   // ADC noise, counts rms, when not measured; 0 = DefaultNoiseRMSCounts
	Setpoints     []float64 // used setpoints, counts; empty = from the capture, else 10/50/90 % of full scale
	Top           int       // candidates to show; 0 = DefaultTop
	Seed          uint64    // seed of the checking simulations; 0 = a fixed default
	Tol           Tolerances
}

// Request is a design question asked without a board: the circuit's constraints and the goals.
type Request struct {
	SupplyV float64   // pin high level, V; 0 = 5
	VrefV   float64   // ADC reference, V; 0 = SupplyV
	Bits    int       // ADC resolution; 0 = 10
	PeriodS float64   // sample period, s; 0 = 1 ms
	Mode    loop.Kind // loop.TwoState or loop.ThreeState (the zero value is two-state)
	LoadOhm float64   // resistive load on the node, ohm; 0 = none
	LeakOhm float64   // capacitor leakage, ohm; 0 = none
	VBE     float64   // emitter follower drop between node and sense point, V; 0 = none
	CRatio  float64   // real / marked capacitance (measured), 0 = 1
	RRatio  float64   // real / marked resistance (measured), 0 = 1
	// Plant, when set, is the one plant to design for and replaces LoadOhm and VBE (a
	// load or a buffer, never a buffer drop stacked on a load the data did not show).
	Plant         *PlantInput
	Goals         Goals
	noiseMeasured bool    // the noise came from the capture
	ignoredCRatio float64 // an identified C ratio outside the plausible range
}

// goals is Goals with every default resolved, in volts and seconds.
type goals struct {
	rippleV, settleS, staticV float64
	rippleSaid, settleSaid    bool
	pinA, minPeriod, sigmaK   float64
	pinWhy                    string // the pin limit and where it comes from
	noise                     float64
	top                       int
	seed                      uint64
}

// plant is the resolved circuit context the engine designs for.
type plant struct {
	supply, vref, period float64
	bits                 int
	kind                 loop.Kind
	load, leak, vbe      float64
	cRatio, rRatio       float64
	sps                  []int // used setpoints, counts, ascending
	lo, hi               int   // full-scale step ends, counts
	g                    goals
	rParts, cParts       Parts
	verifyWin            int // steady window of the checking runs, samples
	nSeeds               int // seeds of the checking runs
	plantIn              PlantInput
	bufLoad              float64 // a buffer's own input loading on the node, ohm; 0 = assumed
	tol                  tolerances
	cMeasured            bool // the capacitance ratio came from a capture
	mcPairs              int  // how many top pairs get a Monte Carlo
	maxQuick             int  // short runs at most; 0 = maxQuick
	cache                map[runKey]simResult
}

func (r Request) resolve() (*plant, error) {
	p := &plant{supply: r.SupplyV, vref: r.VrefV, bits: r.Bits, period: r.PeriodS, kind: r.Mode,
		load: r.LoadOhm, leak: r.LeakOhm, vbe: r.VBE, cRatio: r.CRatio, rRatio: r.RRatio}
	if p.supply == 0 {
		p.supply = 5
	}
	if p.vref == 0 {
		// The ADC reads the node up to its reference; above a logic supply the node is
		// read through a divider or a buffer into a 5 V converter (assumed).
		p.vref = p.supply
		if p.supply > logicMaxV {
			p.vref = 5
		}
	}
	if p.bits == 0 {
		p.bits = 10
	}
	if p.period == 0 {
		p.period = 1e-3
	}
	if p.cRatio == 0 {
		p.cRatio = 1
	}
	if p.rRatio == 0 {
		p.rRatio = 1
	}
	for _, c := range []struct {
		name string
		v    float64
	}{{"supply", p.supply}, {"vref", p.vref}, {"period", p.period}, {"c ratio", p.cRatio}, {"r ratio", p.rRatio}} {
		if !(c.v > 0) || math.IsInf(c.v, 0) {
			return nil, fmt.Errorf("advice: %s must be > 0, got %g", c.name, c.v)
		}
	}
	if p.load < 0 || p.leak < 0 || p.vbe < 0 || math.IsNaN(p.load+p.leak+p.vbe) {
		return nil, fmt.Errorf("advice: load, leak and vbe must be >= 0")
	}
	if p.bits < 4 || p.bits > 24 {
		return nil, fmt.Errorf("advice: adc bits must be 4..24, got %d", p.bits)
	}
	if r.Plant != nil {
		if err := r.Plant.apply(p); err != nil {
			return nil, err
		}
	} else {
		in := PlantInput{Kind: PlantNone, Source: "given"}
		switch {
		case p.load > 0:
			in = PlantInput{Kind: PlantLoad, LoadOhm: p.load, SenseDropV: p.vbe, Source: "given"}
		case p.vbe > 0:
			in = PlantInput{Kind: PlantBuffer, SenseDropV: p.vbe, Source: "given"}
		}
		p.plantIn = in
	}
	if err := p.checkRanges(); err != nil {
		return nil, err
	}
	if p.kind != loop.TwoState && p.kind != loop.ThreeState {
		return nil, fmt.Errorf("advice: mode must be two-state or three-state, got %s", p.kind)
	}
	g := r.Goals
	fs := p.vref
	p.g.rippleV = g.RippleV
	p.g.rippleSaid = g.RippleV > 0 || g.RipplePct > 0
	if p.g.rippleV == 0 {
		pct := g.RipplePct
		if pct == 0 {
			pct = DefaultRipplePct
		}
		p.g.rippleV = pct / 100 * fs
	}
	p.g.settleS, p.g.settleSaid = g.SettleS, g.SettleS > 0
	if p.g.settleS == 0 {
		p.g.settleS = DefaultSettleS
	}
	p.g.staticV = g.StaticErrorV
	if p.g.staticV == 0 {
		// The output may rest anywhere in the band: a band wider than the ripple budget
		// lets the level sit further off than the ripple allowed (the band rule of the
		// trade equates the two: dV -> dV * full-scale / vref counts).
		p.g.staticV = p.g.rippleV
	}
	if g.PinCurrentA < 0 || math.IsNaN(g.PinCurrentA) {
		return nil, fmt.Errorf("advice: pin current limit must be > 0, got %g", g.PinCurrentA)
	}
	p.g.pinA, p.g.pinWhy = defaultPinCurrent(p.supply)
	if g.PinCurrentA > 0 {
		p.g.pinA, p.g.pinWhy = g.PinCurrentA, fmtA(g.PinCurrentA)+" (given)"
	}
	p.g.minPeriod = orDefault(g.MinPeriodS, DefaultMinPeriodS)
	p.g.sigmaK = orDefault(g.SigmaMultiple, DefaultSigmaMultiple)
	p.g.noise = orDefault(g.NoiseRMSCount, DefaultNoiseRMSCounts)
	p.g.top = g.Top
	if p.g.top <= 0 {
		p.g.top = DefaultTop
	}
	p.g.seed = g.Seed
	if p.g.seed == 0 {
		p.g.seed = 20261201
	}
	for _, c := range []struct {
		name string
		v    float64
	}{{"ripple", p.g.rippleV}, {"settle", p.g.settleS}, {"pin current", p.g.pinA},
		{"min period", p.g.minPeriod}, {"sigma multiple", p.g.sigmaK}} {
		if !(c.v > 0) || math.IsInf(c.v, 0) {
			return nil, fmt.Errorf("advice: %s goal must be > 0, got %g", c.name, c.v)
		}
	}
	if p.g.staticV < 0 || p.g.noise < 0 || math.IsNaN(p.g.staticV+p.g.noise) {
		return nil, fmt.Errorf("advice: static error and noise must be >= 0")
	}
	if p.period < p.g.minPeriod {
		return nil, fmt.Errorf("advice: sample period %g s is shorter than the ADC conversion time %g s", p.period, p.g.minPeriod)
	}
	maxCode := 1<<uint(p.bits) - 1
	// Used setpoints: given, else 10, 50 and 90 % of the reachable full scale.
	seen := map[int]bool{}
	for _, s := range g.Setpoints {
		c := int(math.Round(s))
		if c < 0 || c > maxCode {
			return nil, fmt.Errorf("advice: setpoint %g is outside 0..%d counts", s, maxCode)
		}
		if !seen[c] {
			seen[c] = true
			p.sps = append(p.sps, c)
		}
	}
	top := math.Min(p.vref, p.supply-p.vbe)
	if top <= 0 {
		return nil, fmt.Errorf("advice: supply %g V leaves no output range after a %g V follower drop", p.supply, p.vbe)
	}
	if len(p.sps) == 0 {
		for _, f := range []float64{0.1, 0.5, 0.9} {
			p.sps = append(p.sps, int(math.Round(f*top/p.vref*float64(maxCode+1))))
		}
	}
	sort.Ints(p.sps)
	if len(p.sps) > maxSetpoints {
		// A ramp or a sine uses hundreds of setpoints: keep the ends and evenly spaced
		// ones between (by rank), enough to see how the step changes over the range.
		var keep []int
		for i := 0; i < maxSetpoints; i++ {
			keep = append(keep, p.sps[i*(len(p.sps)-1)/(maxSetpoints-1)])
		}
		p.sps = keep
	}
	p.lo, p.hi = p.sps[0], p.sps[len(p.sps)-1]
	if p.hi-p.lo < 2 {
		// One setpoint: the full-scale step runs from 10 % of full scale to it (or from it
		// to 90 %, whichever is longer).
		a := int(math.Round(0.1 * top / p.vref * float64(maxCode+1)))
		b := int(math.Round(0.9 * top / p.vref * float64(maxCode+1)))
		if p.hi-a >= b-p.lo {
			p.lo = a
		} else {
			p.hi = b
		}
	}
	p.rParts, p.cParts = g.R, g.C
	if len(p.cParts.List) == 0 && strings.EqualFold(p.cParts.Series, "E96") {
		return nil, fmt.Errorf("advice: capacitors in E96: capacitors are rarely made beyond E24 (E12 is the common range); give the series E24 or a list of the values on hand")
	}
	p.verifyWin, p.nSeeds = verifyWindow, 3
	p.cMeasured = r.CRatio != 0
	p.mcPairs = mcPairs
	if err := p.resolveTol(g.Tol); err != nil {
		return nil, err
	}
	return p, nil
}

func orDefault(v, d float64) float64 {
	if v == 0 {
		return d
	}
	return v
}

// lsb is volts per count at the ADC input.
func (p *plant) lsb() float64 { return p.vref / math.Ldexp(1, p.bits) }

// fullScale is the largest code, 2^bits - 1, the "full-scale counts" of the band rule.
func (p *plant) fullScale() float64 { return math.Ldexp(1, p.bits) - 1 }

// senseV converts counts to the voltage at the ADC input.
func (p *plant) senseV(counts int) float64 { return float64(counts) * p.lsb() }

// nodeV is the capacitor voltage that reads as counts (adds the follower drop).
func (p *plant) nodeV(counts int) float64 {
	v := p.senseV(counts)
	if p.vbe > 0 {
		v += p.vbe
	}
	return v
}

// circuit builds the loop model circuit of a marked R and C, applying the measured ratios.
func (p *plant) circuit(r, c float64) loop.Circuit {
	ci := loop.Circuit{Supply: p.supply, R: r * p.rRatio, C: c * p.cRatio * p.tol.bias, Load: p.load, Leak: p.leakFor(c)}
	if p.vbe > 0 {
		// The emitter resistor is not known from the meta lines: from the buffer's
		// identified input loading (about beta x RE), else 10 kOhm with beta 100, which
		// loads the node with about 1 MOhm (assumed).
		re := 10e3
		if p.bufLoad > 0 {
			re = p.bufLoad / loop.DefaultBeta
		}
		ci.Follower = loop.Follower{VBE: p.vbe, Beta: loop.DefaultBeta, RE: re}
	}
	return ci
}

// config is the loop model configuration of a circuit under this plant's controller.
func (p *plant) config(ci loop.Circuit, kind loop.Kind, db int, period float64, noise float64, seed uint64) loop.Config {
	return loop.Config{
		Circuit:    ci,
		ADC:        loop.ADC{Vref: p.vref, Bits: p.bits, Noise: noise},
		Controller: loop.Controller{Kind: kind, Deadband: db},
		Period:     period,
		Seed:       seed,
	}
}
