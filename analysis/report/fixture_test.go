package report

import (
	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/advice"
)

// fixtureSummary is a hand-written summary for the golden tables: a greenhouse sensor
// bias at 1.2 V and 2.5 V on a 10-bit, 5 V ADC, with hostile text where a capture can
// put text (file name, reject reasons, diagnostics).
func fixtureSummary() *analysis.Summary {
	return &analysis.Summary{
		Source:        "greenhouse-bias.cap",
		Samples:       120000,
		RejectedLines: 3,
		FirstRejects: []analysis.Reject{
			{Line: 17, Reason: "bad number in pv: \"12\x1b[31m3\""},
			{Line: 4096, Reason: "line too long (<script>alert(1)</script>)"},
		},
		DurationS:     120,
		SamplePeriodS: ptr(1e-3),
		PeriodFrom:    "t",
		JitterS:       ptr(3.5e-6),
		Gaps:          2,
		Board: analysis.Board{VrefV: ptr(5.0), ADCBits: ptr(10), Mode: "three-state", DeadbandCounts: ptr(2.0),
			SupplyV: ptr(5.0), ROhm: ptr(47e3), CF: ptr(1e-6)},
		Plant: analysis.Plant{
			TauChargeS: ptr(0.0431), TauChargeCIS: &[2]float64{0.0425, 0.0437},
			TauDischargeS: ptr(0.0428), TauDischargeCIS: &[2]float64{0.0421, 0.0435},
			VHighV: ptr(4.58), VHighCIV: &[2]float64{4.55, 4.61},
			NoiseRMSCounts: ptr(0.62), MissingCodes: []int{511}, EffectiveCF: ptr(0.917e-6),
			LoadOhm: ptr(5.1e5),
		},
		Segments: []analysis.Segment{
			{SetpointCounts: 246, SetpointV: ptr(1.2012), StartS: 0, EndS: 60, SteadyStartS: ptr(0.21), SteadySamples: 59790,
				MeanErrorV: ptr(-0.0021), MeanErrorCounts: ptr(-0.43), RipplePPV: ptr(0.0244), RipplePPCounts: ptr(5.0),
				RippleRMSV: ptr(0.0051), RippleRMSCounts: ptr(1.04), DutyCharge: ptr(0.061), DutyHold: ptr(0.902), DutyDischarge: ptr(0.037),
				LimitCyclePeriodS: ptr(0.0183), SwitchingHz: ptr(109.3), RippleFreqHz: ptr(54.6), DeadbandEntries: 3270, DeadbandExits: 3269,
				DeadbandCounts: ptr(2.0)},
			{SetpointCounts: 1000, SetpointV: ptr(4.8828), StartS: 60, EndS: 120, SteadySamples: 0, Unreachable: true, DeadbandCounts: ptr(2.0), BandJumps: 12},
		},
		Steps: []analysis.StepFigures{
			{AtS: 60, FromV: ptr(1.2012), ToV: ptr(4.8828), FromCounts: 246, ToCounts: 1000, RiseS: ptr(0.094), SlewVPerS: ptr(78.1)},
		},
		Diagnostics: []analysis.Diagnostic{
			{Code: "unreachable_setpoint", Severity: "error", Message: "setpoint 4.88 V is above the charge end level 4.58 V"},
			{Code: "missing_codes", Severity: "warning", Message: "code 511 never seen\u202e (ADC linearity?)"},
		},
	}
}

// fixtureAdvice is a hand-written advice block for the golden tables.
func fixtureAdvice() *advice.Advice {
	db := 3
	from := 21
	return &advice.Advice{
		DeadbandCounts: &db,
		DeadbandWorking: &advice.DeadbandWorking{StepCounts: 4.1, NoiseRMSCounts: 0.62, SigmaMultiple: 3, MarginCounts: 1.86,
			StaticErrorV: 0.0146, FromVoltageBand: &from, Rule: "step < 2·db + 1 with a 3σ noise margin", VerifiedJumps: 0,
			Steps: []advice.SetpointStep{{SetpointCounts: 246, ChargeCounts: 4.1, DischargeCounts: 1.3}}},
		Candidates: []advice.Candidate{
			{ROhm: 47e3, CF: 2.2e-6, Series: "E12", DeadbandCounts: 3, PredictedRipplePPV: 0.0098, PredictedSettleS: 0.41,
				PinCurrentA: 1.06e-4, VInfSagV: 0.42, Verdict: "meets goals", MeetsGoals: true, Trades: "slower settling"},
			{ROhm: 22e3, CF: 1e-6, Series: "E6", DeadbandCounts: 5, PredictedRipplePPV: 0.031, PredictedSettleS: 0.09,
				PinCurrentA: 2.27e-4, VInfSagV: 0.2, Verdict: "ripple too high", Trades: "faster, noisier"},
		},
		SamplePeriod: &advice.PeriodAdvice{CurrentS: 1e-3, SuggestedS: 5e-4, FloorS: 1.04e-4, Reason: "halves the per-sample step"},
		Topology:     []advice.TopologyAdvice{{Change: "add a follower buffer", PredictedRipplePPV: 0.005, PredictedSettleS: 0.3, Reason: "the load sags V∞"}},
		Current: &advice.Candidate{ROhm: 47e3, CF: 1e-6, Series: "as fitted", DeadbandCounts: 2, PredictedRipplePPV: 0.0244,
			PredictedSettleS: 0.19, PinCurrentA: 1.06e-4, VInfSagV: 0.42, Verdict: "ripple too high", Trades: ""},
		Goals: &advice.GoalsUsed{Mode: "three-state", SupplyV: 5, VrefV: 5, ADCBits: 10, PeriodS: 1e-3, LoadOhm: 5.1e5,
			RipplePPV: 0.02, SettleS: 0.5, PinCurrentA: 0.02, NoiseRMSCounts: 0.62, NoiseMeasured: true, SigmaMultiple: 3, CRatio: 0.92},
		Cautions: []string{"keep pin current inside the datasheet limit"},
		Notes:    []string{"tau measured 8 % below R·C: the capacitor loses capacitance under bias"},
	}
}

// fixtureAfter is the same bench after a change of C and deadband.
func fixtureAfter() *analysis.Summary {
	s := fixtureSummary()
	s.Source = "greenhouse-bias-after.cap"
	s.FirstRejects, s.RejectedLines = nil, 0
	s.Board.CF = ptr(2.2e-6)
	s.Board.DeadbandCounts = ptr(3.0)
	s.Plant.TauChargeS = ptr(0.0902)
	s.Plant.TauDischargeS = nil
	s.Segments = s.Segments[:1]
	g := &s.Segments[0]
	g.RipplePPV, g.RipplePPCounts = ptr(0.0098), ptr(2.0)
	g.DutyHold = ptr(0.95)
	g.DeadbandCounts = ptr(3.0)
	return s
}
