package analysis

import (
	"math"
	"testing"

	"github.com/caploop/caploop/analysis/loop"
)

// bench is the common circuit of the accuracy tests: a greenhouse sensor bias made from
// a 5 V pin through 47 kOhm into 1 uF with a 1 MOhm load, read by a 10-bit ADC every ms.
func benchCfg(kind loop.Kind, db int, noise float64, seed uint64) loop.Config {
	return loop.Config{
		Circuit:    loop.Circuit{Supply: 5, R: 47e3, C: 1e-6, Load: 1e6},
		ADC:        loop.ADC{Vref: 5, Bits: 10, Noise: noise},
		Controller: loop.Controller{Kind: kind, Deadband: db},
		Period:     1e-3,
		Seed:       seed,
	}
}

func relErr(got, want float64) float64 { return math.Abs(got-want) / math.Abs(want) }

// TestPlantIdentification checks tau and the asymptotes against the loop model's exact
// values (Circuit.Tau, Circuit.VInf: tau = C R R_L/(R+R_L), V_inf = Vs R_L/(R+R_L)).
func TestPlantIdentification(t *testing.T) {
	cases := []struct {
		name  string
		kind  loop.Kind
		db    int
		noise float64
		seed  uint64
	}{
		{"three-state noise-free", loop.ThreeState, 6, 0, 1},
		{"three-state 1 LSB noise", loop.ThreeState, 6, 1, 2},
		{"three-state 1 LSB noise seed 3", loop.ThreeState, 6, 1, 3},
		{"two-state 1 LSB noise", loop.TwoState, 0, 1, 4},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			cfg := benchCfg(tc.kind, tc.db, tc.noise, tc.seed)
			r := simulate(t, cfg, square(150, 850, 400), 60000, false)
			p := r.sum.Plant
			ci := cfg.Circuit
			checks := []struct {
				name      string
				got       *float64
				want, tol float64
			}{
				{"tau_charge", p.TauChargeS, ci.Tau(loop.Charge), 0.02},
				{"tau_discharge", p.TauDischargeS, ci.Tau(loop.Discharge), 0.02},
				{"v_high", p.VHighV, ci.VInf(loop.Charge), 0.01},
			}
			for _, c := range checks {
				if c.got == nil {
					t.Errorf("%s: got null, want %g", c.name, c.want)
					continue
				}
				if e := relErr(*c.got, c.want); e > c.tol {
					t.Errorf("%s: got %g, want %g (error %.2f %%, tolerance %.0f %%)", c.name, *c.got, c.want, 100*e, 100*c.tol)
				}
			}
			// v_low sits near zero: shown only within 2 LSB (its interval), else null with the reason.
			if p.VLowV == nil && p.VLowVReason == "" {
				t.Errorf("v_low: null without a reason")
			}
			if p.VLowV != nil && math.Abs(*p.VLowV) > 0.01*ci.VInf(loop.Charge) {
				t.Errorf("v_low: got %g V, want 0 within 1 %% of v_high", deref(p.VLowV))
			}
			// Noise from the residuals: 1 LSB input noise plus quantisation, sqrt(1 + 1/12);
			// noise-free: quantisation only, LSB/sqrt(12) (Bennett, 1948).
			wantNoise := math.Sqrt(tc.noise*tc.noise + 1.0/12)
			if p.NoiseRMSCounts == nil || relErr(*p.NoiseRMSCounts, wantNoise) > 0.25 {
				t.Errorf("noise: got %v counts rms, want %.3f within 25 %%", deref(p.NoiseRMSCounts), wantNoise)
			}
			if p.TauChargeCIS == nil || (*p.TauChargeCIS)[0] > ci.Tau(loop.Charge) || (*p.TauChargeCIS)[1] < ci.Tau(loop.Charge) {
				t.Errorf("tau_charge CI %v does not hold the true %g", p.TauChargeCIS, ci.Tau(loop.Charge))
			}
			if tc.kind == loop.ThreeState {
				if p.TauHoldS == nil || relErr(*p.TauHoldS, ci.Tau(loop.Hold)) > 0.05 {
					t.Errorf("tau_hold: got %g, want %g within 5 %%", deref(p.TauHoldS), ci.Tau(loop.Hold))
				}
			}
			t.Logf("tau_c %.5g (true %.5g) tau_d %.5g v_high %.5g (true %.5g) noise %.3f tau_hold %v (true %.4g) pairs c/d/h %d/%d/%d",
				deref(p.TauChargeS), ci.Tau(loop.Charge), deref(p.TauDischargeS), deref(p.VHighV), ci.VInf(loop.Charge),
				deref(p.NoiseRMSCounts), deref(p.TauHoldS), ci.Tau(loop.Hold), p.ChargePairs, p.DischargePairs, p.HoldPairs)
		})
	}
}

func deref(p *float64) float64 {
	if p == nil {
		return math.NaN()
	}
	return *p
}

// truth holds the loop model's own figures over one segment's steady window.
type truth struct {
	ripplePP, dutyC, dutyH, dutyD, period float64
	entries                               int64
}

// truthOf computes the truth of segment seg from the model's steps: the ripple is the
// peak-to-peak of the noise-free ADC input voltage, the duty and the limit cycle come
// from the drives the model chose (period: mean interval between charge onsets, in
// two-state loops too: the limit cycle, not the pattern's exact repeat), the
// deadband entries from the model's readings with the definition of Segment.
func truthOf(r *simRun, seg Segment) truth {
	var tr truth
	lo, hi := math.Inf(1), math.Inf(-1)
	var n, c, h, d, onsets int64
	var first, last float64
	db := float64(r.cfg.Controller.Deadband)
	prevIn, started := false, false
	prevU := loop.Drive(0)
	for _, st := range r.steps {
		if st.T < seg.StartS-1e-9 || st.T >= seg.EndS-1e-9 {
			continue
		}
		in := math.Abs(float64(st.PV-st.SP)) <= db
		if started && in && !prevIn {
			tr.entries++
		}
		prevIn = in
		if seg.SteadyStartS != nil && st.T >= *seg.SteadyStartS-1e-9 {
			lo, hi = math.Min(lo, st.Sense), math.Max(hi, st.Sense)
			n++
			switch st.U {
			case loop.Charge:
				c++
				if n > 1 && prevU != loop.Charge {
					if onsets == 0 {
						first = st.T
					}
					last = st.T
					onsets++
				}
			case loop.Hold:
				h++
			default:
				d++
			}
			prevU = st.U
		}
		started = true
	}
	tr.ripplePP = hi - lo
	tr.dutyC, tr.dutyH, tr.dutyD = float64(c)/float64(n), float64(h)/float64(n), float64(d)/float64(n)
	tr.period = (last - first) / float64(onsets-1)
	return tr
}

// TestSegmentFigures checks the steady-segment figures against the model's truth.
func TestSegmentFigures(t *testing.T) {
	lsb := 5.0 / 1024
	cases := []struct {
		name  string
		kind  loop.Kind
		db    int
		noise float64
		seed  uint64
		noU   bool
	}{
		{"three-state noise-free", loop.ThreeState, 6, 0, 11, false},
		{"three-state noise-free inferred u", loop.ThreeState, 6, 0, 11, true},
		{"three-state 1 LSB noise", loop.ThreeState, 6, 1, 12, false},
		{"three-state 1 LSB noise inferred u", loop.ThreeState, 6, 1, 12, true},
		{"two-state noise-free", loop.TwoState, 0, 0, 13, false},
		{"two-state 1 LSB noise", loop.TwoState, 0, 1, 14, false},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			cfg := benchCfg(tc.kind, tc.db, tc.noise, tc.seed)
			r := simulate(t, cfg, schedule(6000, 300, 600, 800), 18000, tc.noU)
			if got := len(r.sum.Segments); got != 3 {
				t.Fatalf("segments: got %d, want 3", got)
			}
			if r.sum.InferredDrive != tc.noU {
				t.Errorf("inferred_drive: got %v, want %v", r.sum.InferredDrive, tc.noU)
			}
			for i, seg := range r.sum.Segments {
				tr := truthOf(r, seg)
				// Noise-free, the readings' peak-to-peak is the ripple; with noise the
				// robust peak-to-peak (0.5 to 99.5 % of the readings) is the estimate.
				ripple := seg.RipplePPV
				if tc.noise > 0 {
					ripple = seg.RippleRobustPPV
				}
				if ripple == nil || math.Abs(*ripple-tr.ripplePP) > math.Max(0.1*tr.ripplePP, lsb) {
					t.Errorf("segment %d ripple: got %g V, want %g V within 10 %% or 1 LSB", i, deref(ripple), tr.ripplePP)
				}
				for _, d := range []struct {
					name string
					got  *float64
					want float64
				}{{"charge", seg.DutyCharge, tr.dutyC}, {"hold", seg.DutyHold, tr.dutyH}, {"discharge", seg.DutyDischarge, tr.dutyD}} {
					if d.got == nil || math.Abs(*d.got-d.want) > 0.02 {
						t.Errorf("segment %d duty %s: got %g, want %g within 0.02", i, d.name, deref(d.got), d.want)
					}
				}
				if p := seg.LimitCyclePeriodS; p == nil || relErr(*p, tr.period) > 0.05 {
					t.Errorf("segment %d limit cycle: got %g s, want %g s within 5 %% (drive pattern %g s)", i, deref(p), tr.period, deref(seg.LimitCycleDriveS))
				}
				if tc.noise == 0 && seg.DeadbandEntries != tr.entries {
					t.Errorf("segment %d deadband entries: got %d, want %d", i, seg.DeadbandEntries, tr.entries)
				}
				t.Logf("seg %d sp %g: ripple raw %.4g robust %.4g signal %.4g true %.4g; duty c %.3f/%.3f h %.3f/%.3f; period %.4g drive %.4g true %.4g; entries %d/%d exits %d jumps %d noise exits %d freq %.4g",
					i, seg.SetpointCounts, deref(seg.RipplePPV), deref(seg.RippleRobustPPV), deref(seg.RippleSignalPPV), tr.ripplePP,
					deref(seg.DutyCharge), tr.dutyC, deref(seg.DutyHold), tr.dutyH, deref(seg.LimitCyclePeriodS), deref(seg.LimitCycleDriveS), tr.period,
					seg.DeadbandEntries, tr.entries, seg.DeadbandExits, seg.BandJumps, seg.NoiseExits, deref(seg.RippleFreqHz))
			}
		})
	}
}
