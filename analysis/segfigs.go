package analysis

import (
	"fmt"
	"math"

	"github.com/caploop/caploop/telemetry"
)

// segment converts one segment's figures.
func (a *Accumulator) segment(f *segFig, pf plantFit, c conv) Segment {
	unreachable := a.unreachable(f, pf)
	if f.plateau && !unreachable {
		g := f.withoutSteady()
		f = &g
	}
	s := Segment{
		SetpointCounts:  f.sp,
		SetpointV:       ptr(c.v(f.sp)),
		StartS:          c.s(f.start),
		EndS:            c.s(f.end) + c.ds(a.clk.periodTicks()),
		SteadyStartS:    ptr(c.s(f.steadyAt)),
		SteadySamples:   f.sn,
		MeanErrorV:      ptr(c.v(f.meanE)),
		MeanErrorCounts: ptr(f.meanE),
		RipplePPV:       ptr(c.v(f.ppE)),
		RipplePPCounts:  ptr(f.ppE),
		RippleRobustPPV: ptr(c.v(f.robPP)),
		RippleRMSV:      ptr(c.v(f.rmsE)),
		RippleRMSCounts: ptr(f.rmsE),
		DutyCharge:      ptr(f.duty[2]),
		DutyHold:        ptr(f.duty[1]),
		DutyDischarge:   ptr(f.duty[0]),
		DeadbandEntries: f.entries,
		DeadbandExits:   f.exits,
		BandJumps:       f.jumps,
		NoiseExits:      f.noiseExits,
		Settled:         f.settled,
		RippleSignalPPV: ptr(c.v(f.sigPP)),
		Tracking:        f.trk,
	}
	if math.IsNaN(c.perTick) {
		s.StartS, s.EndS = 0, 0
	}
	if a.three || f.db > 0 {
		s.DeadbandCounts = ptr(f.db)
	}
	// One frequency vocabulary: the limit cycle is the mean interval between charge
	// onsets, the ripple frequency its inverse, the drive pattern's exact repeat apart.
	s.LimitCyclePeriodS = ptr(f.periodSamples * c.period)
	s.LimitCyclePeriodSamples = ptr(f.periodSamples)
	s.LimitCycleDriveS = ptr(c.ds(f.driveTicks))
	if f.sn > 0 && math.IsNaN(f.periodSamples) {
		s.LimitCyclePeriodSReason = f.periodWhy
	}
	if f.sn > 1 {
		s.SwitchingHz = ptr(float64(f.switches) / (float64(f.sn) * c.period))
		s.RippleFreqHz = ptr(1 / (f.periodSamples * c.period))
	}
	s.PatternPeriodSamples = ptr(f.pattern.samples)
	s.PatternPeriodS = ptr(f.pattern.samples * c.period)
	if s.PatternPeriodSamples != nil {
		n := f.pattern.onsets
		s.PatternOnsets = &n
	} else if f.sn > 0 {
		s.PatternPeriodSReason = f.pattern.why
	}
	if f.sn > 0 {
		s.Rests = f.rests
		nodePP, nodeWhy := f.nodePP, f.nodeWhy
		if w := f.nodeWin; len(w) > 0 {
			m := nodeSpan(&pf, int64(len(w)), f.nodeEnd, len(w))
			w = w[len(w)-m:]
			nodePP, nodeWhy = nodeRippleOf(w, &pf)
		}
		s.RippleNodePPCounts, s.RippleNodePPV = ptr(nodePP), ptr(c.v(nodePP))
		if s.RippleNodePPCounts == nil {
			s.RippleNodePPVReason = nodeWhy
		}
		switch {
		case f.rests && f.duty[1] == 0:
			s.HoldDroopVPerSReason = fmt.Sprintf("the loop rests in %s, not in hold: no hold droop", driveName(int8(f.lastU)))
			if unreachable {
				s.HoldDroopVPerSReason += " (the level tops out short of the setpoint)"
			}
		case f.rests:
			s.HoldDroopVPerS, s.HoldDroopVPerSReason = holdDroop(f.sp+f.meanE, pf, c)
		}
	}
	if f.sn == 0 {
		const why = "no steady part: the setpoint was not reached"
		s.LimitCyclePeriodSReason, s.PatternPeriodSReason, s.RippleNodePPVReason = why, why, why
	}
	s.Unreachable = unreachable
	if s.Unreachable {
		s.LevelV = ptr(c.v(f.level))
		s.ShortfallV = ptr(c.v(math.Abs(f.sp - f.level)))
		if f.sn == 0 {
			// The loop kept one drive to the end: its duty is 1 over the end run.
			d := [3]float64{}
			d[int(f.lastU)+1] = 1
			s.DutyDischarge, s.DutyHold, s.DutyCharge = ptr(d[0]), ptr(d[1]), ptr(d[2])
		}
	}
	return s
}

// holdDroop returns the hold droop rate at level (counts), in volts per second, positive
// when the level falls, from the identified hold fit; null with the reason without one.
func holdDroop(level float64, pf plantFit, c conv) (*float64, string) {
	if !pf.ok[1] {
		return nil, "no hold droop identified (too few hold samples or no charge/discharge fit)"
	}
	f := pf.fit[1]
	if !(f.A < 1 && 1-f.A > 1.959963984540054*f.SeA) {
		return nil, "no significant droop in hold"
	}
	perSample := (1-f.A)*level - f.B // V[k] - V[k+1]
	r := ptr(c.v(perSample) / c.period)
	if r == nil {
		return nil, "the ADC scale or the sample period is unknown"
	}
	return r, ""
}

// unreachable says a segment never reached its setpoint and could not: the setpoint is
// beyond the identified asymptote of the drive that heads for it, or the loop kept one
// drive for the last 5 time constants (or 2000 samples without a fit) without
// reaching it.
func (a *Accumulator) unreachable(f *segFig, pf plantFit) bool {
	if f.settled || f.n < 16 {
		return false
	}
	up := f.lastPV < f.sp
	d := 0
	if up {
		d = 2
	}
	if pf.ok[d] && !math.IsNaN(pf.fit[d].VInf) {
		vinf := pf.fit[d].VInf
		if (up && f.sp > vinf-0.5) || (!up && f.sp < vinf+0.5) {
			return true
		}
		if pf.fit[d].A > 0 && pf.fit[d].A < 1 {
			tauS := -1 / math.Log(pf.fit[d].A)
			return float64(f.endRun) > 5*tauS
		}
	}
	return f.endRun > 2000
}

// settleTol returns the settling tolerance at setpoint sp with deadband db, in counts:
// db plus one step at sp, at least 1 % of full scale (when the ADC bits are known). The
// step is the larger of the charge and discharge steps at sp: a loop in its limit cycle
// leaves the band by up to one step of the drive that crossed it (a two-state loop
// reads up to one discharge step below its setpoint every cycle), so a tolerance of
// one charge step alone would call a loop chattering in its cycle unsettled.
//
// Without a fit the running mean step of that drive stands in; the discharge step
// counts only when the segment's steady part discharged.
func (a *Accumulator) settleTol(f *segFig, pf plantFit) float64 {
	sp, db := f.sp, f.db
	step := a.stepNear(sp, pf)
	if math.IsNaN(step) {
		step = a.stepEMA[2] // the running mean charge step, before there is a fit
	}
	if f.duty[0] > 0 {
		if pf.ok[0] && !math.IsNaN(pf.fit[0].VInf) {
			step = max(step, (1-pf.fit[0].A)*(sp-pf.fit[0].VInf))
		} else {
			step = max(step, a.stepEMA[0])
		}
	}
	tol := db + max(0, step)
	if a.meta.Has(telemetry.FieldADCBits) && a.meta.ADCBits > 0 {
		tol = max(tol, 0.01*math.Ldexp(1, a.meta.ADCBits))
	}
	return tol
}

// stepOf converts the step into a segment.
func (a *Accumulator) stepOf(f *segFig, pf plantFit, c conv) StepFigures {
	st := StepFigures{
		AtS:        c.s(f.start),
		FromV:      ptr(c.v(f.from)),
		ToV:        ptr(c.v(f.sp)),
		FromCounts: f.from,
		ToCounts:   f.sp,
		RiseS:      ptr(c.ds(f.rise)),
		OvershootV: ptr(c.v(f.overshoot)),
		SlewVPerS:  ptr(c.v(f.slewTicks) / c.perTick),
	}
	if math.IsNaN(c.perTick) {
		st.AtS = 0
	}
	tol := a.settleTol(f, pf)
	st.SettleTolCounts, st.SettleTolV = ptr(tol), ptr(c.v(tol))
	// The readings are judged against the tolerance widened by their quantisation (one
	// count over two readings) and 4.5 sigma of the ADC noise, so that a reading's noise
	// alone does not mark the loop unsettled.
	last := lastOutside(f.outside, tol+1+4.5*math.Sqrt(a.noiseEMA/6))
	switch {
	case math.Abs(f.sp-f.from) <= tol:
		st.SettleSReason = fmt.Sprintf("the step of %.4g counts is within the settling tolerance of +-%.3g counts", math.Abs(f.sp-f.from), tol)
	case last >= f.n || f.n < 2:
		st.SettleSReason = fmt.Sprintf("did not stay within +-%.3g counts before the segment ended", tol)
	default:
		// The sample after the last one outside the tolerance.
		st.SettleS = ptr(c.ds(float64(last) * f.tps))
		if st.SettleS == nil {
			st.SettleSReason = "the sample period is unknown"
		}
	}
	return st
}
