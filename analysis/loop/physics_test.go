package loop

import (
	"math"
	"testing"
)

// TestSquareWaveRipple drives the RC open loop with a square wave and compares the
// steady peak-to-peak ripple of the true node voltage with the closed form
//
//	Vpp = Vs (1 - exp(-D P/tau)) (1 - exp(-(1-D) P/tau)) / (1 - exp(-P/tau))
//
// and, at D = 0.5, Vs tanh(P / (4 tau)) (source: the standard derivation in
// shared DOMAIN.md; PWM-as-DAC application notes). With a load, Vs is the charge
// Thevenin voltage and tau the loaded time constant (the same derivation).
func TestSquareWaveRipple(t *testing.T) {
	cases := []struct {
		name  string
		on    int // charging samples per cycle
		cycle int
		load  float64
		rpin  float64
	}{
		{"D=0.05", 1, 20, 0, 0},
		{"D=0.25", 5, 20, 0, 0},
		{"D=0.5", 10, 20, 0, 0},
		{"D=0.75", 15, 20, 0, 25},
		{"D=0.9", 18, 20, 0, 25},
		{"D=0.5 long period", 100, 200, 0, 0},
		{"D=0.3 loaded", 3, 10, 470e3, 25},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			cfg := bench()
			cfg.Circuit.Load = tc.load
			cfg.Circuit.RPin = tc.rpin
			cfg.Controller = Controller{Kind: OpenDuty, Duty: float64(tc.on) / float64(tc.cycle), CycleSamples: tc.cycle}
			ci := cfg.Circuit
			tau, vs := ci.Tau(Charge), ci.VInf(Charge)
			if d := ci.Tau(Discharge); d != tau {
				t.Fatalf("charge and discharge tau differ: %g %g", tau, d)
			}
			P := float64(tc.cycle) * cfg.Period
			D := float64(tc.on) / float64(tc.cycle)
			want := vs * (1 - math.Exp(-D*P/tau)) * (1 - math.Exp(-(1-D)*P/tau)) / (1 - math.Exp(-P/tau))
			if tc.on*2 == tc.cycle {
				if th := vs * math.Tanh(P/(4*tau)); relErr(th, want) > 1e-12 {
					t.Fatalf("closed forms disagree: tanh %g, general %g", th, want)
				}
			}
			// Run until the start-up transient exp(-n P / tau) is far below 1e-12.
			cycles := int(math.Ceil(40*tau/P)) + 2
			n := int64(cycles * tc.cycle)
			lo, hi := math.Inf(1), math.Inf(-1)
			err := Run(cfg, nil, n+1, func(s Sample) {
				if s.K >= n-int64(tc.cycle) {
					lo, hi = math.Min(lo, s.V), math.Max(hi, s.V)
				}
			})
			if err != nil {
				t.Fatal(err)
			}
			got := hi - lo
			if relErr(got, want) > 1e-9 {
				t.Errorf("ripple: got %.15g V, want %.15g V (rel err %.2g)", got, want, relErr(got, want))
			}
			if tc.on*2 == tc.cycle {
				if th := vs * math.Tanh(P/(4*tau)); relErr(got, th) > 1e-9 {
					t.Errorf("ripple: got %.15g V, want Vs tanh(P/4tau) = %.15g V", got, th)
				}
			}
		})
	}
}

// TestBennett sweeps a noise-free ideal quantizer slowly over about 185 codes; the
// error x - code must be uniform: mean 0 and rms 1/sqrt(12) LSB = 0.2887 LSB
// (source: W. R. Bennett, "Spectra of quantized signals", Bell System Technical
// Journal, 1948; any ADC handbook).
func TestBennett(t *testing.T) {
	cfg := bench()
	cfg.Circuit.R = 1e9 // tau = 1000 s: a slow, almost linear ramp
	cfg.Controller = Controller{Kind: OpenConst, StepDrive: Charge}
	scale := math.Ldexp(1, cfg.ADC.Bits) / cfg.ADC.Vref
	var n, sum, sum2 float64
	err := Run(cfg, nil, 200_000, func(s Sample) {
		e := s.Sense*scale - float64(s.PV)
		n++
		sum += e
		sum2 += e * e
	})
	if err != nil {
		t.Fatal(err)
	}
	mean, rms := sum/n, math.Sqrt(sum2/n)
	want := 1 / math.Sqrt(12)
	if math.Abs(mean) > 2e-3 {
		t.Errorf("mean error: got %.5f LSB, want 0", mean)
	}
	if relErr(rms, want) > 2e-3 {
		t.Errorf("rms error: got %.6f LSB, want %.6f LSB (Bennett)", rms, want)
	}
}

// TestADCCode checks the converter arithmetic and clamps against hand-worked values.
func TestADCCode(t *testing.T) {
	cases := []struct {
		name  string
		adc   ADC
		sense float64
		noise float64
		want  int
	}{
		{"mid scale", ADC{Vref: 5, Bits: 10}, 2.5, 0, 512},
		{"just below half LSB", ADC{Vref: 5, Bits: 10}, 0.49 * 5 / 1024, 0, 0},
		{"at half LSB rounds up", ADC{Vref: 5, Bits: 10}, 0.5 * 5 / 1024, 0, 1},
		{"vref 1 % high", ADC{Vref: 5, Bits: 10, VrefError: 0.01}, 2.5, 0, 507},    // 2.5/5.05*1024 = 506.93
		{"gain +2 %", ADC{Vref: 5, Bits: 10, Gain: 0.02}, 2.5, 0, 522},             // 512*1.02 = 522.24
		{"offset -3", ADC{Vref: 5, Bits: 10, Offset: -3}, 2.5, 0, 509},             // 512 - 3
		{"noise +0.6", ADC{Vref: 5, Bits: 10}, 2.5, 0.6, 513},                      // 512.6
		{"clamp high", ADC{Vref: 5, Bits: 10}, 6, 0, 1023},                         // above full scale
		{"clamp low", ADC{Vref: 5, Bits: 10, Offset: -5}, 0.001, 0, 0},             // below zero
		{"12 bit", ADC{Vref: 3.3, Bits: 12}, 1.0, 0, 1241},                         // 1/3.3*4096 = 1241.2
		{"NaN reads 0", ADC{Vref: 5, Bits: 10}, math.NaN(), 0, 0},                  // defensive
		{"full scale exactly", ADC{Vref: 5, Bits: 10}, 5 * 1023.4 / 1024, 0, 1023}, // 1023.4
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			if got := tc.adc.Code(tc.sense, tc.noise); got != tc.want {
				t.Errorf("Code(%g, %g) = %d, want %d", tc.sense, tc.noise, got, tc.want)
			}
		})
	}
	a := ADC{Vref: 5, Bits: 10}
	if got := a.Volts(a.Counts(1.234)); relErr(got, 1.234) > 1e-15 {
		t.Errorf("Volts(Counts(1.234)) = %g", got)
	}
}

// TestThevenin checks Tau, VInf and StepMax against the formulas of shared DOMAIN.md
// (standard circuit theory) for loaded, leaky and follower circuits.
func TestThevenin(t *testing.T) {
	par := func(a, b float64) float64 { return a * b / (a + b) }
	cases := []struct {
		name    string
		c       Circuit
		d       Drive
		tau, vi float64
	}{
		{"charge unloaded", Circuit{Supply: 5, R: 47e3, C: 1e-6}, Charge, 47e-3, 5},
		{"discharge split resistors", Circuit{Supply: 5, R: 47e3, RDischarge: 22e3, RPin: 30, C: 1e-6}, Discharge, 22030e-6, 0},
		{"charge loaded", Circuit{Supply: 5, R: 47e3, C: 1e-6, Load: 470e3}, Charge, 1e-6 * par(47e3, 470e3), 5 * 470e3 / (47e3 + 470e3)},
		{"hold loaded", Circuit{Supply: 5, R: 47e3, C: 1e-6, Load: 470e3}, Hold, 0.47, 0},
		{"hold leak and load", Circuit{Supply: 5, R: 47e3, C: 1e-6, Load: 470e3, Leak: 10e6}, Hold, 1e-6 * par(470e3, 10e6), 0},
		{"hold floating", Circuit{Supply: 5, R: 47e3, C: 1e-6}, Hold, math.Inf(1), 0},
		{"charge follower", Circuit{Supply: 5, R: 47e3, C: 1e-6, Follower: Follower{VBE: 0.65, Beta: 100, RE: 10e3}}, Charge,
			1e-6 * par(47e3, 101*10e3), (5/47e3 + 0.65/1.01e6) / (1/47e3 + 1/1.01e6)},
		{"hold follower only", Circuit{Supply: 5, R: 47e3, C: 1e-6, Follower: Follower{VBE: 0.65, RE: 10e3}}, Hold, 1.01, 0.65},
		{"discharge follower cut off", Circuit{Supply: 5, R: 47e3, C: 1e-6, Follower: Follower{VBE: 0.65, RE: 10e3}}, Discharge, 47e-3, 0},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			if got := tc.c.Tau(tc.d); !(relErr(got, tc.tau) < 1e-12 || got == tc.tau) {
				t.Errorf("Tau = %.15g, want %.15g", got, tc.tau)
			}
			if got := tc.c.VInf(tc.d); math.Abs(got-tc.vi) > 1e-12 {
				t.Errorf("VInf = %.15g, want %.15g", got, tc.vi)
			}
		})
	}
	// Worked example of the trade (common practice, shared DOMAIN.md): T = 1 ms,
	// Vs = 5 V, R C = 0.05 s gives a largest step of about 0.1 V; exactly
	// Vs (1 - exp(-T/tau)).
	c := Circuit{Supply: 5, R: 50e3, C: 1e-6}
	want := 5 * (1 - math.Exp(-1e-3/0.05))
	if got := c.StepMax(1e-3); relErr(got, want) > 1e-12 || math.Abs(got-0.1) > 1e-3 {
		t.Errorf("StepMax = %.15g, want %.15g (about 0.1)", got, want)
	}
}

// rk4 integrates the node equation C dV/dt = sum of the currents into the node with
// a fixed classical Runge-Kutta step: an independent check of Advance's closed form
// and of its handling of the follower's VBE kink.
func rk4(c Circuit, v float64, d Drive, dt float64, steps int) float64 {
	beta := c.Follower.Beta
	if beta == 0 {
		beta = DefaultBeta
	}
	f := func(v float64) float64 {
		var i float64
		switch d {
		case Charge:
			i += (c.Supply - v) / (c.R + c.RPin)
		case Discharge:
			r := c.RDischarge
			if r == 0 {
				r = c.R
			}
			i -= v / (r + c.RPin)
		}
		if c.Load > 0 {
			i -= v / c.Load
		}
		if c.Leak > 0 {
			i -= v / c.Leak
		}
		if c.Follower.RE > 0 && v > c.Follower.VBE {
			i -= (v - c.Follower.VBE) / ((beta + 1) * c.Follower.RE)
		}
		return i / c.C
	}
	h := dt / float64(steps)
	for range steps {
		k1 := f(v)
		k2 := f(v + h/2*k1)
		k3 := f(v + h/2*k2)
		k4 := f(v + h*k3)
		v += h / 6 * (k1 + 2*k2 + 2*k3 + k4)
	}
	return v
}

// TestAdvanceFollowerCrossing checks the exact crossing of VBE within one period
// against a fine Runge-Kutta integration, and that ignoring the crossing (one regime
// for the whole period) would be visibly wrong, so the check can fail.
func TestAdvanceFollowerCrossing(t *testing.T) {
	// A small RE (heavy base loading) makes the kink matter.
	c := Circuit{Supply: 5, R: 10e3, C: 1e-6, Load: 200e3, Follower: Follower{VBE: 0.65, Beta: 50, RE: 200}}
	cases := []struct {
		name string
		v0   float64
		d    Drive
		dt   float64
	}{
		{"charge up through VBE", 0.5, Charge, 2e-3},
		{"discharge down through VBE", 0.9, Discharge, 5e-3},
		{"hold down through VBE", 0.7, Hold, 20e-3},
		{"charge from VBE exactly", 0.65, Charge, 1e-3},
		{"charge below, no crossing", 0.1, Charge, 1e-4},
		{"charge above, no crossing", 2, Charge, 1e-3},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			got := c.Advance(tc.v0, tc.d, tc.dt)
			want := rk4(c, tc.v0, tc.d, tc.dt, 200_000)
			if math.Abs(got-want) > 1e-9 {
				t.Errorf("Advance(%g) = %.12f, RK4 %.12f", tc.v0, got, want)
			}
			crosses := (tc.v0 > 0.65) != (want > 0.65)
			if crosses {
				vi, g := c.thevenin(tc.d, tc.v0 > 0.65)
				naive := vi + (tc.v0-vi)*math.Exp(-tc.dt*g/c.C)
				if math.Abs(naive-want) < 1e-4 {
					t.Errorf("test is too weak: one-regime answer %.6f is within 1e-4 of %.6f", naive, want)
				}
			}
		})
	}
}

// TestAdvanceComposes checks that advancing over t1 then t2 equals advancing over
// t1 + t2 (the flow of a time-invariant ODE composes), across VBE crossings too:
// a wrong crossing time or regime would break it.
func TestAdvanceComposes(t *testing.T) {
	circuits := []struct {
		name string
		c    Circuit
	}{
		{"plain", Circuit{Supply: 5, R: 47e3, C: 1e-6}},
		{"loaded leaky split", Circuit{Supply: 3.3, R: 22e3, RDischarge: 10e3, RPin: 40, C: 2.2e-6, Load: 220e3, Leak: 3e6}},
		{"follower heavy", Circuit{Supply: 5, R: 10e3, C: 1e-6, Load: 200e3, Follower: Follower{VBE: 0.65, Beta: 50, RE: 200}}},
		{"follower only in hold", Circuit{Supply: 5, R: 10e3, C: 1e-6, Follower: Follower{VBE: 0.7, RE: 1e3}}},
	}
	for _, cc := range circuits {
		for _, d := range []Drive{Discharge, Hold, Charge} {
			for _, v0 := range []float64{0, 0.3, 0.65, 0.7, 0.9, 2.5, 4.9} {
				for _, t1 := range []float64{1e-5, 3e-4, 2e-3, 0.05} {
					t2 := 1.7e-3
					got := cc.c.Advance(cc.c.Advance(v0, d, t1), d, t2)
					want := cc.c.Advance(v0, d, t1+t2)
					if math.Abs(got-want) > 1e-12*math.Max(1, math.Abs(want)) {
						t.Errorf("%s d=%d v0=%g t1=%g: two steps %.15g, one step %.15g", cc.name, d, v0, t1, got, want)
					}
				}
			}
		}
	}
}

// FuzzAdvance checks that Advance never leaves the interval spanned by its start and
// the Thevenin voltages of the two regimes (a first-order trajectory moves
// monotonically towards its equilibrium), and never returns NaN.
func FuzzAdvance(f *testing.F) {
	f.Add(0.0, int8(1), 1e-3, 10e3, 1e6, 200.0)
	f.Add(0.9, int8(-1), 5e-3, 10e3, 0.0, 200.0)
	f.Add(0.7, int8(0), 2e-2, 0.0, 0.0, 1e3)
	f.Fuzz(func(t *testing.T, v float64, d int8, dt, load, leak, re float64) {
		if !finite(v) || !finite(dt) || dt < 0 || dt > 10 || math.Abs(v) > 100 {
			return
		}
		if !finite(load) || load < 0 || !finite(leak) || leak < 0 || !finite(re) || re < 0 || re > 1e9 {
			return
		}
		dr := Drive(max(-1, min(1, d)))
		c := Circuit{Supply: 5, R: 47e3, C: 1e-6, Load: load, Leak: leak, Follower: Follower{VBE: 0.65, RE: re}}
		got := c.Advance(v, dr, dt)
		if math.IsNaN(got) {
			t.Fatalf("Advance(%g, %d, %g) = NaN", v, dr, dt)
		}
		lo, hi := v, v
		for _, on := range []bool{false, true} {
			vi, _ := c.thevenin(dr, on)
			lo, hi = math.Min(lo, vi), math.Max(hi, vi)
		}
		eps := 1e-12 * math.Max(1, math.Abs(v))
		if got < lo-eps || got > hi+eps {
			t.Fatalf("Advance(%g, %d, %g) = %g outside [%g, %g]", v, dr, dt, got, lo, hi)
		}
	})
}
