package analysis

import (
	"math"
	"strings"
	"testing"

	"github.com/caploop/caploop/analysis/loop"
)

// The follower of these tests: V_BE 0.65 V (textbook 0.6-0.7 V, from memory), beta 100,
// R_E 10 kOhm, so its base loads the node with (beta+1) R_E = 1.01 MOhm (emitter-follower
// input resistance, any electronics textbook). In the sense point's terms it is a load
// R_b to ground with the charge heading for (Vs - V_BE) R_b/(R+R_b) and the discharge
// for -V_BE R_b/(R+R_b) (the node equation of DOMAIN.md with s = v - V_BE).
var testFollower = loop.Follower{VBE: 0.65, Beta: 100, RE: 10e3}

// followerLevels returns the charge and discharge asymptotes at the sense point, V.
func followerLevels(supply, r float64) (vHigh, vLow float64) {
	rb := 101 * 10e3
	k := rb / (r + rb)
	return (supply - 0.65) * k, -0.65 * k
}

// TestDischargeFromBalance checks the discharge asymptote of a two-state loop from the
// balance of its steady parts: below ground behind a follower, at ground with a plain
// load or none, each within its interval of the truth.
func TestDischargeFromBalance(t *testing.T) {
	t.Parallel()
	cases := []struct {
		name string
		cfg  loop.Config
		want float64 // counts
	}{
		{"follower", func() loop.Config {
			c := greenhouse(loop.TwoState, 0, 21)
			c.Circuit.Follower = testFollower
			return c
		}(), 0},
		{"220k load", greenhouse(loop.TwoState, 220e3, 22), 0},
		{"no load", greenhouse(loop.TwoState, 0, 23), 0},
	}
	_, vl := followerLevels(5, 47e3)
	cases[0].want = vl / (5.0 / 1024)
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			r := simulate(t, tc.cfg, schedule(4000, 300, 560), 8000, false)
			var pf plantFit
			pf.fit[2], pf.ok[2] = r.acc.fits[2].free()
			got := r.acc.dischargeFromBalance(pf)
			if !got.known() {
				t.Fatalf("no discharge asymptote from the balance")
			}
			if got.lo > tc.want || got.hi < tc.want {
				t.Errorf("v_low %.1f [%.1f, %.1f] counts, truth %.1f outside", got.v, got.lo, got.hi, tc.want)
			}
			if below := got.hi < -2; below != (tc.want < -2) {
				t.Errorf("v_low %.1f [%.1f, %.1f] counts: below ground %v, truth %.1f", got.v, got.lo, got.hi, below, tc.want)
			}
			t.Logf("v_low %.1f [%.1f, %.1f] counts, truth %.1f", got.v, got.lo, got.hi, tc.want)
		})
	}
}

// TestDecidePlantFollowerFromVLow checks the decision on a discharge asymptote below
// ground without a hold (two-state): a buffer, its drop -v_low Vs/(v_high - v_low) within
// the supply's tolerance, no load claimed; the same levels with v_low at ground are a
// load explained by v_high.
func TestDecidePlantFollowerFromVLow(t *testing.T) {
	t.Parallel()
	lsb := 3.3 / 1024
	vh, vl := followerLevels(3.3, 30e3) // 2.574 V, -0.631 V
	ev := plantEvidence{tauC: interval{29.1, 29.0, 29.2}, tauH: unknown(), supply: 3.3, supplyTol: 0.05, r: 30e3, lsb: lsb,
		vHigh: interval{vh, vh - 2*lsb, vh + 2*lsb}, vLow: interval{vl, vl - 3*lsb, vl + 3*lsb}}
	got := decidePlant(ev)
	if got.kind != KindBuffer {
		t.Fatalf("kind %q (%s), want buffer", got.kind, got.kindReason)
	}
	if !got.drop.known() || math.Abs(got.drop.v-0.65) > 1e-9 || got.drop.lo > 0.65 || got.drop.hi < 0.65 {
		t.Errorf("drop %v (%s), want 0.65 V within its interval", got.drop, got.dropReason)
	}
	if got.load.known() || got.loadReason == "" {
		t.Errorf("load %v (%q): want null with a reason (no hold droop shows the base)", got.load, got.loadReason)
	}
	// The supply's tolerance alone makes the drop's interval ±5 %.
	if hw := got.drop.halfWidth() / got.drop.v; hw < 0.049 || hw > 0.07 {
		t.Errorf("drop interval ±%.1f %%, want about ±5 %% (the supply tolerance)", 100*hw)
	}
	if got.dropEstimate != got.drop.v {
		t.Errorf("drop estimate %g, want %g", got.dropEstimate, got.drop.v)
	}

	// A wide v_low below ground: still a buffer, the drop null with its reason, the
	// estimate kept for the advice.
	wide := ev
	wide.vLow = interval{vl, vl - 0.3, vl + 0.3}
	got = decidePlant(wide)
	if got.kind != KindBuffer || got.drop.known() || !strings.Contains(got.dropReason, "not identifiable") || got.dropEstimate <= 0 {
		t.Errorf("wide v_low: kind %q drop %v (%s) estimate %g, want buffer, null drop, an estimate", got.kind, got.drop, got.dropReason, got.dropEstimate)
	}

	// v_low at ground within its interval: a load explains the top (v_high alone).
	load := ev
	load.vLow = interval{-2 * lsb, -30 * lsb, 26 * lsb}
	got = decidePlant(load)
	if got.kind != KindLoad || got.drop.known() {
		t.Errorf("v_low at ground: kind %q drop %v, want load and no drop", got.kind, got.drop)
	}
}

// TestTwoStateFollower runs a two-state loop behind a follower through the accumulator:
// the kind is buffer, no load is claimed without a hold, the drop is right or null with
// its reason, and Model() hands the advice a buffer with a drop.
func TestTwoStateFollower(t *testing.T) {
	t.Parallel()
	cfg := greenhouse(loop.TwoState, 0, 24)
	cfg.Circuit.Follower = testFollower
	r := simulate(t, cfg, schedule(4000, 250, 600), 12000, false)
	p := r.sum.Plant
	if p.Kind == nil || *p.Kind != KindBuffer {
		t.Fatalf("kind %s, want buffer", kindOf(p))
	}
	if p.LoadOhm != nil {
		t.Errorf("load %g ohm, want null without a hold droop", *p.LoadOhm)
	}
	if p.SenseDropV != nil && math.Abs(*p.SenseDropV-0.65) > 0.05*0.65 {
		t.Errorf("drop %g V, want 0.65 V within 5 %% or null", *p.SenseDropV)
	}
	if p.SenseDropV == nil && p.SenseDropVReason == "" {
		t.Errorf("drop null without a reason")
	}
	pm := r.sum.Model()
	if pm.Kind != KindBuffer || math.Abs(pm.SenseDropV-0.65) > 0.15*0.65 || pm.Rough != (p.SenseDropV == nil) {
		t.Errorf("Model() %+v: want a buffer with a drop near 0.65 V (rough when the figure is null)", pm)
	}
	t.Logf("drop %v (%s), model %+v", deref(p.SenseDropV), p.SenseDropVReason, pm)
}

// TestNodeRippleClipsAtZero checks the node ripple where the model's level heads below
// ground (a follower's discharge): the readings at code 0 are not levels and stay out of
// the start value's fit, and the trajectory's low point is the converter's 0.
func TestNodeRippleClipsAtZero(t *testing.T) {
	t.Parallel()
	// Truth: a plant in counts, charge towards 400 and discharge towards -150 with the
	// same factor a = exp(-1/5); the pattern 2 charges, 4 discharges, in its limit cycle.
	a := math.Exp(-0.2)
	var pf plantFit
	pf.fit[2] = fitResult{A: a, B: (1 - a) * 400}
	pf.fit[0] = fitResult{A: a, B: (1 - a) * -150}
	pf.ok[0], pf.ok[2] = true, true
	var ring []nodeEntry
	v := 10.0
	lo, hi := math.Inf(1), math.Inf(-1)
	for k := 0; k < 480; k++ {
		u := int8(1)
		if k%6 >= 2 {
			u = -1
		}
		if k >= 240 { // the limit cycle, its start forgotten
			s := max(v, 0) // what the converter reads, noise-free
			ring = append(ring, nodeEntry{pv: float32(s), u: u})
			lo, hi = min(lo, s), max(hi, s)
		}
		d := u + 1
		v = pf.fit[d].A*v + pf.fit[d].B
	}
	if lo != 0 {
		t.Fatalf("the test's trajectory does not reach 0 (low %g)", lo)
	}
	got, why := nodeRippleOf(ring, &pf)
	if why != "" || math.Abs(got-(hi-lo)) > 1e-6 {
		t.Errorf("node p-p %g (%s), want %g (the trajectory clipped at 0, V0 from the readings above 0)", got, why, hi-lo)
	}
}

// TestLowChargeEvidence runs three-state loops from a discharged capacitor: behind a
// follower the first charges leave the reading at code 0 while the node climbs to
// V_BE (about 7 periods at tau = 47 ms: 0.65 V of 5 V is 14 % of the way, ln(1/0.86) tau),
// which a plain load or none cannot do (its first charge lifts the reading by Vs T/tau,
// about 21 counts). The kind follows.
func TestLowChargeEvidence(t *testing.T) {
	t.Parallel()
	fol := greenhouse(loop.ThreeState, 0, 31)
	fol.Circuit.Follower = testFollower
	cases := []struct {
		name   string
		cfg    loop.Config
		buffer bool
	}{
		{"follower", fol, true},
		{"420k load", greenhouse(loop.ThreeState, 420e3, 32), false},
		{"no load", greenhouse(loop.ThreeState, 0, 33), false},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			r := simulate(t, tc.cfg, schedule(4000, 400, 600), 8000, false)
			pf := r.acc.currentPlant()
			n := r.acc.lowChargeEvidence(pf)
			if (n >= 2) != tc.buffer {
				t.Errorf("%g charges stuck near code 0 (%d counted), want a follower: %v", n, r.acc.lowCharges, tc.buffer)
			}
			p := r.sum.Plant
			if isBuf := p.Kind != nil && *p.Kind == KindBuffer; isBuf != tc.buffer {
				t.Errorf("kind %s, want buffer: %v", kindOf(p), tc.buffer)
			}
			t.Logf("%g charges near code 0, kind %s, drop %v (%s)", n, kindOf(p), deref(p.SenseDropV), p.SenseDropVReason)
		})
	}
}

// TestDecidePlantDroopAndDrop: a hold droop shows a load, and the top of the range sits
// below what that load explains by more than its interval but within the supply's
// tolerance. Without other evidence the kind is null (a buffer's drop or a low supply),
// never a confident "load"; with charges stuck near code 0 it is a buffer whose drop
// v_high against the supply gives, within the supply's tolerance.
func TestDecidePlantDroopAndDrop(t *testing.T) {
	t.Parallel()
	// Truth: R 50 kOhm, C 1 uF, T 1 ms, follower base 1.01 MOhm, Vs 5 V: tau_c = C (R || R_b)
	// = 47.64 samples, tau_h = R_b C = 1010 samples, v_high = (Vs - 0.65) R_b/(R+R_b) =
	// 4.145 V. The intervals are as wide as a droop loop of 8000 samples gives them (the
	// grid's 3s-buffer-10b-5V case: tau_c ±11 %, tau_h ±22 %, v_high ±0.28 V).
	lsb := 5.0 / 1024
	ev := plantEvidence{tauC: interval{47.64, 43.0, 53.6}, tauH: interval{1010, 790, 1390}, holdPairs: 7000,
		supply: 5, supplyTol: 0.05, r: 50e3, lsb: lsb, vHigh: interval{4.145, 3.865, 4.425}, vLow: unknown()}
	got := decidePlant(ev)
	if got.kind != "" || !strings.Contains(got.kindReason, "a buffer's drop or a supply below") {
		t.Errorf("no low charges: kind %q (%s), want null: a drop or a low supply", got.kind, got.kindReason)
	}
	ev.lowCharges = 6
	got = decidePlant(ev)
	if got.kind != KindBuffer {
		t.Fatalf("low charges: kind %q (%s), want buffer", got.kind, got.kindReason)
	}
	// D = Vs - v_high (1+rho)/rho, rho = tau_h/tau_c - 1 (see decidePlant).
	rho := 1010/47.64 - 1
	want := 5 - 4.145*(1+rho)/rho
	if math.Abs(got.dropEstimate-want) > 1e-9 || math.Abs(want-0.65) > 0.01 {
		t.Errorf("drop estimate %g V, want %g V (0.65 V)", got.dropEstimate, want)
	}
	if got.drop.known() || !strings.Contains(got.dropReason, "not identifiable") {
		t.Errorf("drop %v (%s): want null, its interval is wider than 10 %%", got.drop, got.dropReason)
	}
	// The same with the intervals a tighter fit gives: the drop is shown.
	ev.tauC, ev.tauH, ev.vHigh = interval{47.64, 47.2, 48.1}, interval{1010, 990, 1030}, interval{4.145, 4.14, 4.15}
	ev.supplyTol = 0.01
	got = decidePlant(ev)
	if got.kind != KindBuffer || !got.drop.known() || math.Abs(got.drop.v-0.65) > 0.05*0.65 {
		t.Errorf("tight: kind %q drop %v (%s), want buffer and 0.65 V within 5 %%", got.kind, got.drop, got.dropReason)
	}
	if !got.load.known() || math.Abs(got.load.v-1.01e6) > 0.05*1.01e6 {
		t.Errorf("tight: load %v (%s), want 1.01 MOhm within 5 %%", got.load, got.loadReason)
	}
}
