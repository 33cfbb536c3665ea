package analysis

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/caploop/caploop/telemetry"
)

// stepRC is the closed-form first-order step response over one sample period (any
// circuits textbook; DOMAIN.md "one period"): V[k+1] = V_inf + (V[k] - V_inf) exp(-T/tau),
// with T/tau = 1/tauT.
func stepRC(v, vinf, tauT float64) float64 { return vinf + (v-vinf)*math.Exp(-1/tauT) }

// chatter is a two-state loop simulated here, independently of the loop model: the
// noise-free level at each sample instant, the reading (Gaussian noise sigma before a
// rounding converter of bits bits, clamped to its codes) and the drive the rule chose
// from the reading (charge below the setpoint, else discharge).
type chatter struct {
	level, pv []float64
	u         []telemetry.Drive
}

func runChatter(tauT, vhi, vlo, sp, sigma float64, bits, n int, seed uint64) chatter {
	return runChatter2(tauT, tauT, vhi, vlo, sp, sigma, bits, n, seed)
}

// runChatter2 is runChatter with the charge and the discharge through different
// resistors: time constants tauC and tauD sample periods.
func runChatter2(tauC, tauD, vhi, vlo, sp, sigma float64, bits, n int, seed uint64) chatter {
	rng := rand.New(rand.NewPCG(seed, 1))
	top := math.Ldexp(1, bits) - 1
	var c chatter
	v := sp
	for k := 0; k < n; k++ {
		pv := v + sigma*rng.NormFloat64()
		if bits > 0 {
			pv = math.Min(math.Max(math.Round(pv), 0), top)
		}
		u := telemetry.Discharge
		if pv < sp {
			u = telemetry.Charge
		}
		c.level, c.pv, c.u = append(c.level, v), append(c.pv, pv), append(c.u, u)
		if u == telemetry.Charge {
			v = stepRC(v, vhi, tauC)
		} else {
			v = stepRC(v, vlo, tauD)
		}
	}
	return c
}

// TestJointFitExactChatter feeds the joint sums the pairs of an exact two-state chatter
// (no noise, no rounding): the tight two-level cycle of a mid-duty loop, where neither
// drive's pairs spread (only the grounded estimate works), and a loop at tau 3 T whose
// levels spread over its pattern, with the discharge heading 50 counts below ground (a
// follower's sense point), where the free estimate must find both asymptotes.
func TestJointFitExactChatter(t *testing.T) {
	t.Run("two-level", func(t *testing.T) {
		// Mid-duty at tau 10 T: the level alternates between L and H with
		// H = a L + (1-a) V_hi and L = a H (closed form of the cycle).
		const tauT, vhi = 10.0, 1000.0
		a := math.Exp(-1 / tauT)
		H := (1 - a) * vhi / (1 - a*a)
		L := a * H
		var j jointSums
		for k := 0; k < 50; k++ {
			// Instrument: the level predicted from the reading before.
			j.main[2].add(stepRC(H, 0, tauT), L, stepRC(L, vhi, tauT))
			j.main[0].add(stepRC(L, vhi, tauT), H, stepRC(H, 0, tauT))
		}
		r, ok := j.main[0].jointFit(&j.main[2], true)
		if !ok {
			t.Fatalf("no joint fit: %s", r.why)
		}
		if !r.grounded {
			t.Errorf("the tight cycle has no spread within a drive: want the grounded estimate")
		}
		if got := r.fit[2].A; math.Abs(got-a) > 1e-12 {
			t.Errorf("a = %.15g, want %.15g (exp(-T/tau))", got, a)
		}
		if got := r.fit[2].VInf; math.Abs(got-vhi) > 1e-9*vhi {
			t.Errorf("v_high = %.12g counts, want %g", got, vhi)
		}
		if r.fit[0].A != r.fit[2].A {
			t.Errorf("the drives' factors differ: %g and %g", r.fit[0].A, r.fit[2].A)
		}
	})
	t.Run("spread, discharge below ground", func(t *testing.T) {
		const tauT, vhi, vlo = 3.0, 4000.0, -50.0
		c := runChatter(tauT, vhi, vlo, 1000, 0, 0, 400, 1)
		var j jointSums
		for k := 1; k+1 < len(c.pv); k++ {
			// The instrument: V[k] predicted from V[k-1] under its drive.
			z := stepRC(c.pv[k-1], vlo, tauT)
			if c.u[k-1] == telemetry.Charge {
				z = stepRC(c.pv[k-1], vhi, tauT)
			}
			j.main[int(c.u[k])+1].add(z, c.pv[k], c.pv[k+1])
		}
		r, ok := j.main[0].jointFit(&j.main[2], true)
		if !ok {
			t.Fatalf("no joint fit: %s", r.why)
		}
		if r.grounded {
			t.Errorf("the levels spread within each drive: want the free estimate")
		}
		a := math.Exp(-1 / tauT)
		if got := r.fit[2].A; math.Abs(got-a) > 1e-9 {
			t.Errorf("a = %.12g, want %.12g", got, a)
		}
		if got := r.fit[2].VInf; math.Abs(got-vhi) > 1e-6*vhi {
			t.Errorf("v_high = %.9g counts, want %g", got, vhi)
		}
		if got := r.fit[0].VInf; math.Abs(got-vlo) > 1e-6*vhi {
			t.Errorf("v_low = %.9g counts, want %g", got, vlo)
		}
	})
}

// TestJointFitNoisyChatter runs noisy, rounded two-state chatter through the accumulator
// (the public path of every figure): no run of one drive lies far from the setpoint, so
// the figures come from the joint fit. Truth from the closed form: tau, v_high, noise
// sqrt(sigma^2 + 1/12) counts (quantisation noise LSB/sqrt(12), Bennett 1948), and the
// node ripple (max - min of the noise-free level over the window the summary reads).
func TestJointFitNoisyChatter(t *testing.T) {
	cases := []struct {
		name              string
		tauT, sp, sigma   float64
		grounded, tauNull bool
	}{
		{name: "tau 10 T, mid-duty", tauT: 10, sp: 512, sigma: 1, grounded: true},
		{name: "tau 3 T, 2-cycle", tauT: 3, sp: 460, sigma: 1.5, grounded: true},
		{name: "tau 3 T, spread", tauT: 3, sp: 250, sigma: 1.5},
		{name: "tau 20 T, mid-duty, readings near the threshold", tauT: 20, sp: 512, sigma: 2, grounded: true},
		{name: "tau 0.6 T", tauT: 0.6, sp: 400, sigma: 1, grounded: true},
		{name: "tau 0.25 T", tauT: 0.25, sp: 400, sigma: 1, grounded: true, tauNull: true},
	}
	const (
		bits = 10
		vref = 5.0
		T    = 1e-3
		n    = 4000
	)
	lsb := vref / math.Ldexp(1, bits)
	vhi := math.Ldexp(1, bits) // the supply is the reference: 5 V reads 1024 counts
	for i, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			c := runChatter(tc.tauT, vhi, 0, tc.sp, tc.sigma, bits, n, uint64(100+i))
			acc := New(Options{Source: "chatter"})
			acc.SetMeta(telemetry.Meta{Vref: vref, ADCBits: bits, Period: T, Supply: vref, Mode: telemetry.TwoState,
				Set: telemetry.FieldVref | telemetry.FieldADCBits | telemetry.FieldPeriod | telemetry.FieldSupply | telemetry.FieldMode})
			for k := range c.pv {
				acc.Add(telemetry.Sample{Line: int64(k + 1), Index: int64(k), T: int64(k) * 1000, N: int64(k),
					SP: tc.sp, PV: c.pv[k], U: c.u[k], Flags: telemetry.HasT | telemetry.HasN | telemetry.HasU})
			}
			sum := acc.Summary()
			p := sum.Plant
			pf := acc.currentPlant()
			if !pf.joint[2] || !pf.joint[0] {
				t.Fatalf("want both drives from the joint fit; own fits: %d charge, %d discharge pairs (%s)", int(acc.fits[2].n), int(acc.fits[0].n), pf.jointWhy)
			}
			if pf.grounded != tc.grounded {
				t.Errorf("grounded = %v, want %v", pf.grounded, tc.grounded)
			}
			tau := tc.tauT * T
			if tc.tauNull {
				if p.TauChargeS != nil || p.TauChargeSReason == "" {
					t.Errorf("tau below 0.3 T: got %v (%q), want null with the reason", deref(p.TauChargeS), p.TauChargeSReason)
				}
			} else {
				tol := 0.02 // tau >= T: within 2 % (CONVENTIONS.md)
				if tc.tauT < 1 {
					tol = 0.1
				}
				if p.TauChargeS == nil || relErr(*p.TauChargeS, tau) > tol {
					t.Errorf("tau_charge: got %v (%q), want %g s within %g %%", deref(p.TauChargeS), p.TauChargeSReason, tau, 100*tol)
				}
				if p.TauDischargeS == nil || *p.TauDischargeS != *p.TauChargeS {
					t.Errorf("tau_discharge: got %v, want tau_charge (one shared factor)", deref(p.TauDischargeS))
				}
			}
			if p.VHighV == nil || relErr(*p.VHighV, vhi*lsb) > 0.02 {
				t.Errorf("v_high: got %v (%q), want %g V within 2 %%", deref(p.VHighV), p.VHighVReason, vhi*lsb)
			}
			if tc.grounded && (p.VLowV != nil || p.VLowVReason == "") {
				t.Errorf("v_low: got %v (%q), want null with the reason (taken as ground, not measured)", deref(p.VLowV), p.VLowVReason)
			}
			noise := math.Sqrt(tc.sigma*tc.sigma + 1.0/12)
			if p.NoiseRMSCounts == nil || relErr(*p.NoiseRMSCounts, noise) > 0.1 {
				t.Errorf("noise: got %v (%q), want %g counts within 10 %%", deref(p.NoiseRMSCounts), p.NoiseRMSCountsReason, noise)
			}
			if p.ChargePairs < 100 || p.DischargePairs < 100 {
				t.Errorf("pairs: %d charge, %d discharge, want the joint fit's (at least 100 each)", p.ChargePairs, p.DischargePairs)
			}
			// The node ripple over the summary's window: the last 512 steady samples.
			lo, hi := math.Inf(1), math.Inf(-1)
			for _, v := range c.level[n-512:] {
				lo, hi = min(lo, v), max(hi, v)
			}
			want := (hi - lo) * lsb
			seg := sum.Segments[len(sum.Segments)-1]
			if got := seg.RippleNodePPV; got == nil || math.Abs(*got-want) > max(0.1*want, 2*lsb) {
				t.Errorf("node ripple: got %v (%q), want %g V within 10 %% or 2 LSB", deref(got), seg.RippleNodePPVReason, want)
			}
		})
	}
}

// TestJointFitRefuses checks the joint fit's assumptions against chatter that breaks
// them, with levels that spread within each drive (a pattern longer than two samples):
// a discharge heading 60 counts below ground (a follower's sense point) is fitted with
// its own asymptote, not taken as ground; charge and discharge through different
// resistors give no shared factor, and no wrong figure.
func TestJointFitRefuses(t *testing.T) {
	const vhi = 1024.0
	feed := func(c chatter, sp float64) *Accumulator {
		acc := New(Options{Source: "chatter"})
		acc.SetMeta(telemetry.Meta{Vref: 5, ADCBits: 10, Period: 1e-3, Supply: 5, Mode: telemetry.TwoState,
			Set: telemetry.FieldVref | telemetry.FieldADCBits | telemetry.FieldPeriod | telemetry.FieldSupply | telemetry.FieldMode})
		for k := range c.pv {
			acc.Add(telemetry.Sample{Line: int64(k + 1), Index: int64(k), T: int64(k) * 1000, N: int64(k),
				SP: sp, PV: c.pv[k], U: c.u[k], Flags: telemetry.HasT | telemetry.HasN | telemetry.HasU})
		}
		return acc
	}
	t.Run("discharge below ground", func(t *testing.T) {
		acc := feed(runChatter(3, vhi, -60, 250, 1, 10, 4000, 7), 250)
		pf := acc.currentPlant()
		if pf.joint[0] && pf.grounded {
			t.Fatalf("the discharge was taken to head for ground")
		}
		if f := pf.fit[0]; pf.ok[0] && math.Abs(f.VInf+60) > 6 {
			t.Errorf("discharge asymptote: got %g counts, want -60 within 6", f.VInf)
		}
		// Below ground, the summary shows it as a follower's drop, not as v_low.
		p := acc.Summary().Plant
		if p.VLowCounts != nil || !strings.Contains(p.VLowCountsReason, "below ground") {
			t.Errorf("v_low: got %v counts (%q), want null: below ground", deref(p.VLowCounts), p.VLowCountsReason)
		}
		if p.TauChargeS != nil && relErr(*p.TauChargeS, 3e-3) > 0.02 {
			t.Errorf("tau_charge: got %g s, want 0.003 within 2 %% or null", *p.TauChargeS)
		}
	})
	// Charge and discharge through different resistors: levels that spread show two
	// factors; a charge faster than the discharge puts the joint charge asymptote above
	// the supply.
	for _, tc := range []struct{ tauC, tauD, sp float64 }{{3, 6, 600}, {10, 15, 300}} {
		t.Run(fmt.Sprintf("separate resistors, tau %g T and %g T", tc.tauC, tc.tauD), func(t *testing.T) {
			acc := feed(runChatter2(tc.tauC, tc.tauD, vhi, 0, tc.sp, 1, 10, 4000, 8), tc.sp)
			p := acc.Summary().Plant
			if p.TauChargeS != nil && relErr(*p.TauChargeS, tc.tauC*1e-3) > 0.02 {
				t.Errorf("tau_charge: got %g s, want %g within 2 %% or null", *p.TauChargeS, tc.tauC*1e-3)
			}
			if p.TauDischargeS != nil && relErr(*p.TauDischargeS, tc.tauD*1e-3) > 0.02 {
				t.Errorf("tau_discharge: got %g s, want %g within 2 %% or null", *p.TauDischargeS, tc.tauD*1e-3)
			}
			if pf := acc.currentPlant(); pf.joint[2] || pf.jointWhy == "" {
				t.Errorf("the joint fit was used (or refused without a reason): %q", pf.jointWhy)
			}
		})
	}
}
