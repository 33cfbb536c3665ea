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
			if p.VLowV == nil || math.Abs(*p.VLowV) > 0.01*ci.VInf(loop.Charge) {
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
