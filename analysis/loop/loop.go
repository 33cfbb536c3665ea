package loop

import (
	"errors"
	"fmt"
	"math"
)

// DefaultBeta is the follower current gain used when Follower.Beta is zero.
const DefaultBeta = 100

// DefaultBits is the ADC resolution used when ADC.Bits is zero.
const DefaultBits = 10

// ErrConfig is wrapped by every error New and Validate return for a bad Config.
var ErrConfig = errors.New("loop: bad config")

func configErr(format string, a ...any) error {
	return fmt.Errorf("%w: "+format, append([]any{ErrConfig}, a...)...)
}

// HasFollower reports whether the circuit has an emitter follower (RE > 0).
func (c Circuit) HasFollower() bool { return c.Follower.RE > 0 }

// RCharge is the total resistance of the charge path, R + RPin, ohm.
func (c Circuit) RCharge() float64 { return c.R + c.RPin }

// RDis is the total resistance of the discharge path: RDischarge (or R when
// RDischarge is zero) plus RPin, ohm.
func (c Circuit) RDis() float64 {
	r := c.RDischarge
	if r == 0 {
		r = c.R
	}
	return r + c.RPin
}

// followerG is the conductance the follower's base presents to the node while the
// transistor conducts: 1 / ((beta+1) RE). Zero without a follower.
func (c Circuit) followerG() float64 {
	if !c.HasFollower() {
		return 0
	}
	b := c.Follower.Beta
	if b == 0 {
		b = DefaultBeta
	}
	return 1 / ((b + 1) * c.Follower.RE)
}

// thevenin returns the open-circuit voltage and total conductance seen by the
// capacitor for drive d, with the follower conducting (on) or cut off.
//
//	G    = sum g_i          over the charge or discharge path, load, leak, follower base
//	Vinf = sum g_i E_i / G  (E = Supply for the charge path, VBE for the follower, else 0)
//
// With G == 0 (a floating node) Vinf is 0 and the node keeps its charge.
func (c Circuit) thevenin(d Drive, on bool) (vinf, g float64) {
	var ge float64
	switch {
	case d > 0:
		gc := 1 / c.RCharge()
		g += gc
		ge += gc * c.Supply
	case d < 0:
		g += 1 / c.RDis()
	}
	if c.Load > 0 {
		g += 1 / c.Load
	}
	if c.Leak > 0 {
		g += 1 / c.Leak
	}
	if on {
		gf := c.followerG()
		g += gf
		ge += gf * c.Follower.VBE
	}
	if g == 0 {
		return 0, 0
	}
	return ge / g, g
}

// conducting tells which linear regime holds at node voltage v: the follower
// conducts strictly above VBE. At v == VBE both regimes give the same current.
func (c Circuit) conducting(v float64) bool {
	return c.HasFollower() && v > c.Follower.VBE
}

// VInfAt is the voltage the node would settle to under drive d if the linear regime
// that holds at node voltage v held for ever (the follower conducting when v > VBE).
func (c Circuit) VInfAt(d Drive, v float64) float64 {
	vi, _ := c.thevenin(d, c.conducting(v))
	return vi
}

// TauAt is the time constant C / G of the linear regime that holds at node voltage v
// under drive d, s. It is +Inf for a floating node (hold with no load, leak or
// conducting follower).
func (c Circuit) TauAt(d Drive, v float64) float64 {
	_, g := c.thevenin(d, c.conducting(v))
	return c.C / g
}

// VInf is the voltage the node settles to under drive d held for ever, V: the
// Thevenin voltage of the charge or discharge path, load, leak and follower base.
// With a follower the network is piecewise linear; VInf is the true equilibrium:
// the conducting regime's Thevenin voltage when that is at or above VBE, else the
// cut-off regime's. A floating node (hold, nothing attached) has no equilibrium;
// VInf returns 0 there and Tau returns +Inf.
func (c Circuit) VInf(d Drive) float64 {
	if c.HasFollower() {
		if vi, _ := c.thevenin(d, true); vi >= c.Follower.VBE {
			return vi
		}
	}
	vi, _ := c.thevenin(d, false)
	return vi
}

// Tau is the time constant of the node under drive d near its equilibrium VInf(d), s:
//
//	tau = C / G,  G = 1/(R+RPin) (charge) or 1/(RDis) (discharge) + 1/Load + 1/Leak [+ 1/((beta+1) RE)]
//
// The follower term counts when the equilibrium lies at or above VBE. Tau is +Inf for
// a floating node.
func (c Circuit) Tau(d Drive) float64 {
	on := false
	if c.HasFollower() {
		vi, _ := c.thevenin(d, true)
		on = vi >= c.Follower.VBE
	}
	_, g := c.thevenin(d, on)
	return c.C / g
}

// Advance returns the node voltage after drive d has been held for dt seconds from
// node voltage v. It is exact (closed form, no integration error):
//
//	V(dt) = Vinf + (v - Vinf) exp(-dt / tau)
//
// per linear regime. With a follower the node may cross VBE once within dt (the
// network is continuous and first order, so the trajectory is monotonic and cannot
// cross back); Advance solves for the crossing time
//
//	t* = tau1 ln((v - Vinf1) / (VBE - Vinf1))
//
// and continues from VBE in the other regime for dt - t*.
func (c Circuit) Advance(v float64, d Drive, dt float64) float64 {
	on := c.conducting(v)
	vi, g := c.thevenin(d, on)
	if g == 0 {
		return v
	}
	inv := g / c.C // the same expression as the simulator's precomputed factor
	nv := vi + (v-vi)*math.Exp(-dt*inv)
	if !c.HasFollower() {
		return nv
	}
	vbe := c.Follower.VBE
	if on == (nv > vbe) { // no crossing within dt
		return nv
	}
	ts := math.Log((v-vi)/(vbe-vi)) / inv
	vi2, g2 := c.thevenin(d, !on)
	if g2 == 0 || ts >= dt {
		return vbe
	}
	return vi2 + (vbe-vi2)*math.Exp(-(dt-ts)*(g2/c.C))
}

// StepMax is the largest change of the node voltage in one period T anywhere in its
// reachable range [VInf(Discharge), VInf(Charge)], V: the step of a charge from the
// bottom or of a discharge from the top, whichever is larger. Without load, leak or
// follower it is the textbook Supply * (1 - exp(-T / tau)).
func (c Circuit) StepMax(T float64) float64 {
	lo, hi := c.VInf(Discharge), c.VInf(Charge)
	up := c.Advance(lo, Charge, T) - lo
	down := hi - c.Advance(hi, Discharge, T)
	return math.Max(up, down)
}

// Sense is the voltage at the ADC input for node voltage v: v itself, or with a
// follower the emitter voltage max(0, v - VBE).
func (c Circuit) Sense(v float64) float64 {
	if !c.HasFollower() {
		return v
	}
	return math.Max(0, v-c.Follower.VBE)
}

// MaxCode is the largest ADC code, 2^Bits - 1. The ADC helpers use Bits and Vref as
// given; Sim.Config and Config.WithDefaults return them with defaults filled in.
func (a ADC) MaxCode() int { return 1<<uint(a.Bits) - 1 }

// scale is counts per volt at the ADC input including reference and gain errors.
func (a ADC) scale() float64 {
	return math.Ldexp(1, a.Bits) * (1 + a.Gain) / (a.Vref * (1 + a.VrefError))
}

// Counts converts an input voltage to counts with the nominal (error-free)
// converter, unquantized: v * 2^Bits / Vref.
func (a ADC) Counts(v float64) float64 { return v * math.Ldexp(1, a.Bits) / a.Vref }

// Volts converts counts to an input voltage with the nominal converter:
// counts * Vref / 2^Bits. Volts(Counts(v)) == v.
func (a ADC) Volts(counts float64) float64 { return counts * a.Vref / math.Ldexp(1, a.Bits) }

// Code is the converter's reading of input voltage sense with the given noise
// (in counts, already drawn):
//
//	x    = sense / (Vref (1 + VrefError)) * 2^Bits * (1 + Gain) + Offset + noise
//	code = clamp(floor(x + 1/2), 0, 2^Bits - 1)
//
// The quantizer rounds to the nearest code (transitions at half-integer counts, the
// first at 1/2 LSB), so the code itself is an unbiased reading: for a slowly swept
// input the error x - code is uniform on [-1/2, 1/2) LSB with mean 0 and rms
// LSB/sqrt(12) (Bennett, 1948). A plain floor would add a 1/2 LSB bias and give
// LSB/sqrt(3) rms about zero. NaN reads as 0.
func (a ADC) Code(sense, noise float64) int {
	return quantize(sense*a.scale()+a.Offset+noise, a.MaxCode())
}

func quantize(x float64, max int) int {
	f := math.Floor(x + 0.5)
	if !(f > 0) { // also NaN
		return 0
	}
	if f >= float64(max) {
		return max
	}
	return int(f)
}

// WithDefaults returns c with the documented zero-value defaults filled in:
// ADC.Bits 0 → DefaultBits, ADC.Vref 0 → Circuit.Supply, Follower.Beta 0 →
// DefaultBeta (when a follower is present), Controller.CycleSamples 0 → 100 for
// OpenDuty.
func (c Config) WithDefaults() Config {
	if c.ADC.Bits == 0 {
		c.ADC.Bits = DefaultBits
	}
	if c.ADC.Vref == 0 {
		c.ADC.Vref = c.Circuit.Supply
	}
	if c.Circuit.HasFollower() && c.Circuit.Follower.Beta == 0 {
		c.Circuit.Follower.Beta = DefaultBeta
	}
	if c.Controller.Kind == OpenDuty && c.Controller.CycleSamples == 0 {
		c.Controller.CycleSamples = 100
	}
	return c
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// Validate checks c (after WithDefaults) and returns an error wrapping ErrConfig
// that names the first bad field, or nil.
func (c Config) Validate() error {
	c = c.WithDefaults()
	ci := c.Circuit
	for _, f := range []struct {
		name string
		v    float64
	}{
		{"supply", ci.Supply}, {"r", ci.R}, {"r_discharge", ci.RDischarge}, {"r_pin", ci.RPin},
		{"c", ci.C}, {"load", ci.Load}, {"leak", ci.Leak}, {"vbe", ci.Follower.VBE},
		{"beta", ci.Follower.Beta}, {"re", ci.Follower.RE}, {"vref", c.ADC.Vref},
		{"period", c.Period}, {"jitter", c.Jitter}, {"noise", c.ADC.Noise},
	} {
		if !finite(f.v) || f.v < 0 {
			return configErr("%s must be a finite value >= 0, got %g", f.name, f.v)
		}
	}
	for _, f := range []struct {
		name string
		v    float64
	}{
		{"vref_error", c.ADC.VrefError}, {"gain", c.ADC.Gain}, {"offset", c.ADC.Offset},
		{"v0", c.V0}, {"duty", c.Controller.Duty}, {"drop_rate", c.DropRate},
	} {
		if !finite(f.v) {
			return configErr("%s must be finite, got %g", f.name, f.v)
		}
	}
	switch {
	case ci.C <= 0:
		return configErr("capacitor c must be > 0")
	case ci.RCharge() <= 0:
		return configErr("charge path resistance r + r_pin must be > 0")
	case ci.RDis() <= 0:
		return configErr("discharge path resistance must be > 0")
	case c.Period <= 0:
		return configErr("period must be > 0")
	case c.ADC.Vref <= 0:
		return configErr("vref must be > 0 (or supply > 0 for the default)")
	case c.ADC.Bits < 1 || c.ADC.Bits > 30:
		return configErr("adc bits must be 1..30, got %d", c.ADC.Bits)
	case c.ADC.VrefError <= -1:
		return configErr("vref_error must be > -1, got %g", c.ADC.VrefError)
	case c.ADC.Gain <= -1:
		return configErr("gain error must be > -1, got %g", c.ADC.Gain)
	case c.DropRate < 0 || c.DropRate > 1:
		return configErr("drop_rate must be in [0, 1], got %g", c.DropRate)
	case ci.HasFollower() && ci.Follower.Beta <= 0:
		return configErr("follower beta must be > 0")
	}
	return c.Controller.validate()
}

func (k Controller) validate() error {
	switch k.Kind {
	case TwoState:
	case ThreeState:
		if k.Deadband < 0 {
			return configErr("deadband must be >= 0, got %d", k.Deadband)
		}
	case OpenDuty:
		if k.CycleSamples < 1 {
			return configErr("cycle_samples must be >= 1, got %d", k.CycleSamples)
		}
		if !(k.Duty >= 0 && k.Duty <= 1) {
			return configErr("duty must be in [0, 1], got %g", k.Duty)
		}
	case OpenPattern:
		if len(k.Pattern) == 0 {
			return configErr("open pattern needs at least one drive")
		}
		for i, d := range k.Pattern {
			if d < Discharge || d > Charge {
				return configErr("pattern[%d] = %d is not a drive (-1, 0, 1)", i, d)
			}
		}
	case OpenConst:
		if k.StepDrive < Discharge || k.StepDrive > Charge {
			return configErr("step drive %d is not a drive (-1, 0, 1)", k.StepDrive)
		}
	default:
		return configErr("unknown controller kind %d", k.Kind)
	}
	return nil
}

// OnSamples is the number of charging samples per cycle of an OpenDuty square
// wave: round(Duty * CycleSamples).
func (k Controller) OnSamples() int {
	return int(math.Round(k.Duty * float64(k.CycleSamples)))
}

// String returns the kind's name as used in meta lines: "two-state", "three-state",
// "open-duty", "open-pattern", "open-const".
func (k Kind) String() string {
	switch k {
	case TwoState:
		return "two-state"
	case ThreeState:
		return "three-state"
	case OpenDuty:
		return "open-duty"
	case OpenPattern:
		return "open-pattern"
	case OpenConst:
		return "open-const"
	}
	return fmt.Sprintf("kind(%d)", uint8(k))
}
