package tui

import (
	"math"
	"testing"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/advice"
	"github.com/caploop/caploop/analysis/loop"
	"github.com/caploop/caploop/tui/live"
)

// The synthetic fixture: a bench reference made by the loop model (10-bit ADC, 5 V,
// 1 ms period, 47 kΩ and 1 µF, three-state with a band of 2 counts, too narrow for the
// step near the setpoint), stepping from 400 to 600 counts at 1.5 s. The summary and
// advice values are written by hand for the views; the analysis and advice packages
// have their own tests.

func fp(v float64) *float64 { return &v }
func ip(v int) *int         { return &v }

func fixturePoints(t testing.TB) []live.Point {
	t.Helper()
	cfg := loop.Config{
		Circuit:    loop.Circuit{Supply: 5, R: 47e3, C: 1e-6, Load: 1e6},
		ADC:        loop.ADC{Vref: 5, Bits: 10, Noise: 0.5},
		Controller: loop.Controller{Kind: loop.ThreeState, Deadband: 2},
		Period:     1e-3,
		Seed:       7,
		V0:         1.9,
	}
	sim, err := loop.New(cfg)
	if err != nil {
		t.Fatalf("loop.New: %v", err)
	}
	lsb := 5.0 / 1024
	var pts []live.Point
	for k := 0; k < 3000; k++ {
		sp := 400
		if k >= 1500 {
			sp = 600
		}
		st := sim.Next(sp)
		pts = append(pts, live.Point{T: float64(k) * 1e-3, SP: float32(float64(sp) * lsb), PV: float32(float64(st.PV) * lsb), DB: float32(2 * lsb), U: int8(st.U)})
	}
	return pts
}

func fixtureSummary() *analysis.Summary {
	lsb := 5.0 / 1024
	var bins, hist []float64
	for e := -6; e <= 6; e++ {
		bins = append(bins, float64(e))
		hist = append(hist, math.Round(900*math.Exp(-float64(e*e)/8)))
	}
	var freq, amp []float64
	for i := 0; i <= 250; i++ {
		f := float64(i) * 2
		freq = append(freq, f)
		a := 0.05 + 2.4*math.Exp(-(f-84)*(f-84)/20) + 0.8*math.Exp(-(f-168)*(f-168)/20)
		amp = append(amp, math.Round(a*1000)/1000)
	}
	st := analysis.StepTrace{Step: 1} // segment 1 starts with the step
	for k := 0; k < 200; k++ {
		tt := float64(k) * 1e-3
		fit := 400*lsb + (600-400)*lsb*(1-math.Exp(-tt/0.047))
		pv := fit + lsb*float64((k*7)%3-1)
		st.T = append(st.T, 1.5+tt) // the trace starts at the step, on the analysis clock
		st.PV = append(st.PV, pv)
		st.Fitted = append(st.Fitted, fit)
	}
	return &analysis.Summary{
		Source: "bench.cap", Samples: 3000, DurationS: 3, SamplePeriodS: fp(1e-3), PeriodFrom: "t",
		Board: analysis.Board{VrefV: fp(5), ADCBits: ip(10), Mode: "three-state", DeadbandCounts: fp(2), SupplyV: fp(5), ROhm: fp(47e3), CF: fp(1e-6)},
		Plant: analysis.Plant{
			TauChargeS: fp(0.0471), TauChargeCIS: &[2]float64{0.0466, 0.0476}, TauDischargeS: fp(0.0469),
			VHighV: fp(4.98), VLowV: fp(0.002), TauHoldS: fp(2.1), NoiseRMSCounts: fp(0.42), EffectiveROhm: fp(47.1e3),
		},
		Segments: []analysis.Segment{
			{SetpointCounts: 400, SetpointV: fp(1.953), StartS: 0, EndS: 1.5, SteadyStartS: fp(0.01), SteadySamples: 1490,
				MeanErrorV: fp(-0.0012), MeanErrorCounts: fp(-0.25), RipplePPV: fp(0.0244), RipplePPCounts: fp(5), RippleRMSV: fp(0.0071),
				DutyCharge: fp(0.31), DutyHold: fp(0.22), DutyDischarge: fp(0.47), LimitCyclePeriodS: fp(0.0119), SwitchingHz: fp(168), RippleFreqHz: fp(84),
				DeadbandEntries: 120, DeadbandExits: 119, BandJumps: 41, DeadbandCounts: fp(2)},
			{SetpointCounts: 600, SetpointV: fp(2.930), StartS: 1.5, EndS: 3, SteadyStartS: fp(1.545), SteadySamples: 1455,
				MeanErrorV: fp(-0.0009), MeanErrorCounts: fp(-0.18), RipplePPV: fp(0.0244), RipplePPCounts: fp(5), RippleRMSV: fp(0.0068),
				DutyCharge: fp(0.42), DutyHold: fp(0.20), DutyDischarge: fp(0.38), LimitCyclePeriodS: fp(0.0121), SwitchingHz: fp(165), RippleFreqHz: fp(83),
				DeadbandEntries: 118, DeadbandExits: 118, BandJumps: 37, DeadbandCounts: fp(2)},
		},
		Steps: []analysis.StepFigures{{AtS: 1.5, FromV: fp(1.953), ToV: fp(2.930), FromCounts: 400, ToCounts: 600, RiseS: fp(0.052), SettleS: fp(0.045), OvershootV: fp(0.0049), SlewVPerS: fp(18.8)}},
		Diagnostics: []analysis.Diagnostic{
			// In the analysis' words: one sentence per setpoint, which the screen folds.
			{Code: "band_too_narrow", Severity: "warning", Message: "Setpoint 1.95 V (segment 1): 41 band jumps (a charge followed directly by a discharge or the reverse) with a deadband of ±2 counts (5 counts wide); one charge step near the setpoint is about 4.6 counts, so the band needs a deadband of at least 3 counts (step plus 3 sigma of noise)."},
			{Code: "band_too_narrow", Severity: "warning", Message: "Setpoint 2.93 V (segment 2): 37 band jumps (a charge followed directly by a discharge or the reverse) with a deadband of ±2 counts (5 counts wide); one charge step near the setpoint is about 5.1 counts, so the band needs a deadband of at least 4 counts (step plus 3 sigma of noise)."},
		},
		Traces: &analysis.Traces{Volts: true, ErrBins: bins, ErrHist: hist, SpecFreq: freq, SpecAmp: amp, StepTraces: []analysis.StepTrace{st}},
	}
}

func fixtureAdvice() *advice.Advice {
	return &advice.Advice{
		DeadbandCounts: ip(4),
		DeadbandWorking: &advice.DeadbandWorking{StepCounts: 5.1, NoiseRMSCounts: 0.42, SigmaMultiple: 3, MarginCounts: 1.3,
			StaticErrorV: 0.0195, Rule: "the band must hold one step near the setpoint plus a noise margin", VerifiedJumps: 0},
		Candidates: []advice.Candidate{
			{ROhm: 47e3, CF: 2.2e-6, Series: "E12", DeadbandCounts: 3, PredictedRipplePPV: 0.0147, PredictedSettleS: 0.41, PinCurrentA: 1.06e-4, Verdict: "meets goals"},
			{ROhm: 100e3, CF: 1e-6, Series: "E12", DeadbandCounts: 3, PredictedRipplePPV: 0.0146, PredictedSettleS: 0.39, PinCurrentA: 5e-5, Verdict: "meets goals"},
		},
		Cautions: []string{"keep the pin current within the part's datasheet limit"},
	}
}

// fixtureModel returns a screen at the given size holding the fixture.
func fixtureModel(t testing.TB, width, height int) Model {
	t.Helper()
	p := live.NewIdle("bench.cap", live.IdleOptions{Replay: true, Send: func(string) error { return nil }})
	t.Cleanup(func() { p.Close() })
	m := New(p, Options{Span: 3})
	mm, _ := m.Update(tea_WindowSize(width, height))
	m = mm.(Model)
	st := live.Stats{Name: "bench.cap", State: "playing", Samples: 3000, Rate: 1000, Rejected: 2, Gaps: 0, Speed: 1}
	snap := live.Snapshot{
		Points:  fixturePoints(t),
		Events:  []live.Event{{T: 0.75, Kind: live.EventMark, Text: "fan on"}},
		Summary: fixtureSummary(),
		Advice:  fixtureAdvice(),
		Stats:   &st,
	}
	mm, _ = m.Update(samplesMsg{src: p, snap: snap})
	return mm.(Model)
}
