package analysis

import (
	"math"
	"strings"
	"testing"

	"github.com/caploop/caploop/analysis/loop"
	"github.com/caploop/caploop/telemetry"
)

// steadySpan returns the model steps of segment seg from its steady start on.
func steadySpan(r *simRun, seg Segment) []loop.Sample {
	var out []loop.Sample
	for _, st := range segSteps(r, seg) {
		if seg.SteadyStartS != nil && st.T >= *seg.SteadyStartS-1e-9 {
			out = append(out, st)
		}
	}
	return out
}

// TestUnreachableSteadyPart: an unreachable setpoint's segment has a steady part that
// starts where the level stops drifting: the loop rests in one drive, its measured
// ripple is the readings' p-p (noise) and agrees with the segment's last half, the node
// ripple is 0, there is no limit cycle and no hold droop (it rests in charge). Truth: the
// loop model's noise-free level (V_inf = Vs R_L/(R + R_L), a voltage divider; a follower
// tops out at Vs - VBE) and its readings.
func TestUnreachableSteadyPart(t *testing.T) {
	t.Parallel()
	cases := []struct {
		name string
		cfg  func() loop.Config
		sps  []int
	}{
		{"three-state load 200k", func() loop.Config {
			c := benchCfg(loop.ThreeState, 6, 1, 71)
			c.Circuit.Load = 200e3
			return c
		}, []int{500, 900}},
		{"two-state follower", func() loop.Config {
			c := benchCfg(loop.TwoState, 0, 1, 72)
			c.Circuit.Load = 0
			c.Circuit.Follower = loop.Follower{VBE: 0.65, Beta: 100, RE: 10e3}
			return c
		}, []int{400, 950}},
		{"three-state slow creep tau 470 T", func() loop.Config {
			c := benchCfg(loop.ThreeState, 4, 0.7, 73)
			c.Circuit.R, c.Circuit.C, c.Circuit.Load = 47e3, 10e-6, 200e3
			return c
		}, []int{500, 900}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			cfg := tc.cfg()
			r := simulate(t, cfg, schedule(6000, tc.sps...), 12000, false)
			seg := r.sum.Segments[1]
			h := lastHalfOf(r, seg)
			span := steadySpan(r, seg)
			lsb := cfg.ADC.Vref / math.Ldexp(1, cfg.ADC.Bits)
			lo, hi := math.Inf(1), math.Inf(-1)
			for _, st := range span {
				lo, hi = math.Min(lo, st.Sense/lsb), math.Max(hi, st.Sense/lsb)
			}
			t.Logf("steady from %v s, %d samples (model %d); true drift over it %.3g counts; p-p %v (last half %g), node %v (true %.3g), mean error %v, shortfall %v V",
				deref(seg.SteadyStartS), seg.SteadySamples, len(span), hi-lo, deref(seg.RipplePPCounts), h.readPP,
				deref(seg.RippleNodePPCounts), h.nodePP, deref(seg.MeanErrorCounts), deref(seg.ShortfallV))
			if !seg.Unreachable || seg.Settled {
				t.Fatalf("unreachable %v settled %v: want an unreachable, unsettled segment", seg.Unreachable, seg.Settled)
			}
			if seg.SteadySamples < 500 || int64(len(span)) < seg.SteadySamples-1 {
				t.Fatalf("steady part of %d samples from %v s: want one that starts where the level stops", seg.SteadySamples, deref(seg.SteadyStartS))
			}
			// The level stopped drifting: over the steady part the noise-free level moves
			// by less than the drift threshold (a quarter count + 4 sigma of two block
			// means, about 1 count at 1 LSB of noise) plus the creep within a block.
			if hi-lo > 1.5 {
				t.Errorf("the noise-free level drifts %.3g counts over the steady part", hi-lo)
			}
			// ...and it does not start late: at most 1000 samples after the level came
			// within 1 count of its final value.
			final := span[len(span)-1].Sense / lsb
			steps := segSteps(r, seg)
			for i, st := range steps {
				if math.Abs(st.Sense/lsb-final) <= 1 {
					if late := len(steps) - i - len(span); late > 1000 {
						t.Errorf("the steady part starts %d samples after the level came within 1 count of its end", late)
					}
					break
				}
			}
			if !seg.Rests || seg.LimitCyclePeriodS != nil || seg.LimitCyclePeriodSReason == "" {
				t.Errorf("rests %v, limit cycle %v (%q): want rests and a null cycle with its reason", seg.Rests, deref(seg.LimitCyclePeriodS), seg.LimitCyclePeriodSReason)
			}
			if !near(seg.RipplePPCounts, h.readPP, 0.10, 2+2*cfg.ADC.Noise) {
				t.Errorf("ripple p-p %v counts, last half %g", deref(seg.RipplePPCounts), h.readPP)
			}
			if seg.RippleNodePPCounts == nil || *seg.RippleNodePPCounts != 0 || !near(seg.RippleNodePPCounts, h.nodePP, 0, 2) {
				t.Errorf("node ripple %v counts (%q), true %.3g: want 0 (one drive)", deref(seg.RippleNodePPCounts), seg.RippleNodePPVReason, h.nodePP)
			}
			if deref(seg.DutyCharge) != 1 {
				t.Errorf("duty charge %v, want 1", deref(seg.DutyCharge))
			}
			if seg.HoldDroopVPerS != nil || !strings.Contains(seg.HoldDroopVPerSReason, "rests in charge") {
				t.Errorf("hold droop %v (%q): want null, resting in charge", deref(seg.HoldDroopVPerS), seg.HoldDroopVPerSReason)
			}
			// The mean error is the shortfall (the level's mean over the steady part).
			if sf := deref(seg.ShortfallV) / lsb; !near(seg.MeanErrorCounts, -sf, 0.01, 1) {
				t.Errorf("mean error %v counts, shortfall %.4g counts", deref(seg.MeanErrorCounts), sf)
			}
		})
	}
}

// feed gives the accumulator a sample per reading, 1 ms apart, under the drives u.
func feed(a *Accumulator, k0 int, sp float64, pv []float64, u []telemetry.Drive) {
	for i := range pv {
		k := int64(k0 + i)
		a.Add(telemetry.Sample{Line: k + 1, Index: k, T: k * 1000, N: k, SP: sp, PV: pv[i], U: u[i],
			Flags: telemetry.HasT | telemetry.HasN | telemetry.HasU})
	}
}

// TestPlateauThenReach: a level that stalls short of its setpoint and then reaches it
// keeps only the steady part after the reach; a stall that the plant does not call
// unreachable (500 samples without a fit) has no steady part. Synthetic readings, no
// noise: a flat stretch under charge, then the band.
func TestPlateauThenReach(t *testing.T) {
	t.Parallel()
	const sp = 600.0
	var pv []float64
	var u []telemetry.Drive
	for i := 0; i < 500; i++ { // stalled 100 counts short
		pv, u = append(pv, 500), append(u, telemetry.Charge)
	}
	stall := New(Options{Source: "stall"})
	feed(stall, 0, sp, pv, u)
	f, _ := stall.seg.finish(&spectral{}, nil)
	if !f.plateau || f.sn != 500-2*blockMin+1 {
		t.Fatalf("the flat stretch: plateau %v with %d samples, want a steady part without the reach", f.plateau, f.sn)
	}
	seg := stall.Summary().Segments[0]
	if seg.Unreachable || seg.SteadySamples != 0 || seg.RipplePPCounts != nil || seg.Rests || seg.SteadyStartS != nil {
		t.Errorf("a short stall: unreachable %v, %d steady samples, ripple %v, rests %v; want no steady part",
			seg.Unreachable, seg.SteadySamples, deref(seg.RipplePPCounts), seg.Rests)
	}
	// The same stall, then the band: 300 readings alternating around the setpoint.
	for i := 0; i < 300; i++ {
		d := telemetry.Charge
		if i%2 == 1 {
			d = telemetry.Discharge
		}
		pv, u = append(pv, sp-1+2*float64(i%2)), append(u, d)
	}
	reach := New(Options{Source: "reach"})
	feed(reach, 0, sp, pv, u)
	seg = reach.Summary().Segments[0]
	if !seg.Settled || seg.SteadySamples > 300 || seg.SteadySamples < 290 {
		t.Errorf("settled %v with %d steady samples: want the 300 after the reach only", seg.Settled, seg.SteadySamples)
	}
	if !near(seg.RipplePPCounts, 2, 0, 0) || !near(seg.MeanErrorCounts, 0, 0, 0.01) {
		t.Errorf("ripple %v counts, mean error %v: the stall leaked into the steady part", deref(seg.RipplePPCounts), deref(seg.MeanErrorCounts))
	}
}
