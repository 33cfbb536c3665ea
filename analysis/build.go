package analysis

import (
	"math"

	"github.com/caploop/caploop/telemetry"
)

// ptr returns a pointer to v, or nil when v is NaN or infinite (null in JSON).
func ptr(v float64) *float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return &v
}

// ci returns a pointer to [lo, hi], or nil when either end is not finite.
func ci(lo, hi float64) *[2]float64 {
	if math.IsNaN(lo) || math.IsNaN(hi) || math.IsInf(lo, 0) || math.IsInf(hi, 0) {
		return nil
	}
	return &[2]float64{lo, hi}
}

// conv holds the unit conversions of one Summary.
type conv struct {
	perTick float64 // seconds per tick (NaN when unknown)
	period  float64 // sample period, s
	lsb     float64 // volts per count (NaN when unknown)
	origin  float64 // tick of the first sample
}

func (c conv) s(ticks float64) float64  { return (ticks - c.origin) * c.perTick }
func (c conv) ds(ticks float64) float64 { return ticks * c.perTick }
func (c conv) v(counts float64) float64 { return counts * c.lsb }

// plantFit is the identified plant in counts and samples.
type plantFit struct {
	fit [3]fitResult
	ok  [3]bool
}

// Summary returns the figures so far. It may be called at any time and repeatedly; its
// cost does not depend on the number of samples seen. The open segment is reported
// with its figures so far.
func (a *Accumulator) Summary() *Summary {
	a.syncFinisher()
	perTick, period, from := a.clk.seconds(a.meta)
	c := conv{perTick: perTick, period: period, lsb: a.meta.LSB(), origin: a.first}
	sum := &Summary{
		Source:        a.opts.Source,
		Samples:       a.n,
		RejectedLines: a.stats.Rejected,
		FirstRejects:  []Reject{},
		DroppedValues: a.stats.Dropped,
		FirstDrops:    []Reject{},
		SamplePeriodS: ptr(period),
		PeriodFrom:    from,
		JitterS:       ptr(a.clk.jitter()),
		Gaps:          a.clk.gaps,
		InferredDrive: a.inferred,
		Board:         boardOf(a.meta),
		Segments:      []Segment{},
		Steps:         []StepFigures{},
		Diagnostics:   []Diagnostic{},
	}
	for _, r := range a.stats.FirstRejects {
		if r != nil {
			sum.FirstRejects = append(sum.FirstRejects, Reject{Line: r.Line, Reason: r.Error()})
		}
	}
	for _, r := range a.stats.FirstDrops {
		if r != nil {
			sum.FirstDrops = append(sum.FirstDrops, Reject{Line: r.Line, Reason: r.Error()})
		}
	}
	if a.n > 0 {
		sum.DurationS = c.ds(a.last - a.first)
		if a.n > 1 && !math.IsNaN(perTick) {
			// n samples span n periods (the last one holds its drive for one more).
			sum.DurationS += c.ds(a.clk.periodTicks())
		}
		if math.IsNaN(sum.DurationS) {
			sum.DurationS = 0
		}
	}

	var pf plantFit
	pf.fit[0], pf.ok[0] = a.fits[0].free()
	pf.fit[2], pf.ok[2] = a.fits[2].free()
	hc := 0.0
	if pf.ok[0] && !math.IsNaN(pf.fit[0].VInf) {
		hc = pf.fit[0].VInf
	}
	pf.fit[1], pf.ok[1] = a.holdFit(pf, hc)
	sum.Plant = a.plant(pf, c)

	figs := a.segs
	var cur segFig
	if a.seg.n > 0 && a.kept < a.opts.MaxSegments {
		cur, a.buf = a.seg.finish(&a.spec, a.buf)
		if a.bestSpec.sn == 0 || a.seg.sn > a.bestSpec.sn {
			a.keepSpectrum(a.seg)
		}
		figs = append(figs[:len(figs):len(figs)], cur)
	}
	for i := range figs {
		f := &figs[i]
		seg := a.segment(f, pf, c)
		sum.Segments = append(sum.Segments, seg)
		if f.hasStep {
			sum.Steps = append(sum.Steps, stepOf(f, c))
		}
	}
	if a.segSeen > int64(len(figs)) {
		sum.SegmentsOmitted = a.segSeen - int64(len(figs))
		sum.StepsOmitted = sum.SegmentsOmitted
	}
	sum.Tracking = a.trk.figures(c)
	sum.Traces = a.traces(pf, c)
	sum.Diagnostics = a.diagnose(sum, figs, pf, c)
	return sum
}

func boardOf(m telemetry.Meta) Board {
	var b Board
	f := func(ok bool, v float64) *float64 {
		if !ok {
			return nil
		}
		return &v
	}
	b.VrefV = f(m.Has(telemetry.FieldVref), m.Vref)
	if m.Has(telemetry.FieldADCBits) {
		n := m.ADCBits
		b.ADCBits = &n
	}
	b.Mode = m.Mode.String()
	b.DeadbandCounts = f(m.Has(telemetry.FieldDeadband), m.Deadband)
	b.SupplyV = f(m.Has(telemetry.FieldSupply), m.Supply)
	b.ROhm = f(m.Has(telemetry.FieldR), m.R)
	b.CF = f(m.Has(telemetry.FieldC), m.C)
	b.LoadOhm = f(m.Has(telemetry.FieldLoad), m.Load)
	return b
}

// plant converts the fits to the Plant figures.
func (a *Accumulator) plant(pf plantFit, c conv) Plant {
	p := Plant{
		ChargePairs:    int64(a.fits[2].n),
		DischargePairs: int64(a.fits[0].n),
		HoldPairs:      int64(a.bal.n[1]),
		MissingCodes:   []int{},
		StuckCodes:     []int{},
	}
	T := c.period
	var ssr, dof float64
	// driveFigures sets the figures of one drive's fit (charge or discharge) and adds its
	// residuals to the noise estimate.
	driveFigures := func(f fitResult, tauSamples, levelCounts, tauS **float64, tauCIS **[2]float64, levelV **float64, levelCIV **[2]float64) {
		*tauSamples, *levelCounts = ptr(tauOf(f.A, 1)), ptr(f.VInf)
		*tauS = ptr(tauOf(f.A, T))
		r := tauCI(f, T)
		*tauCIS = ci(r[0], r[1])
		q := tQuantile(f.N - 2)
		*levelV = ptr(c.v(f.VInf))
		*levelCIV = ci(c.v(f.VInf-q*f.SeVInf), c.v(f.VInf+q*f.SeVInf))
		ssr += f.S2 * (f.N - 2) / (1 + f.A*f.A)
		dof += f.N - 2
	}
	if pf.ok[2] {
		driveFigures(pf.fit[2], &p.TauChargeSamples, &p.VHighCounts, &p.TauChargeS, &p.TauChargeCIS, &p.VHighV, &p.VHighCIV)
	}
	if pf.ok[0] {
		driveFigures(pf.fit[0], &p.TauDischargeSamples, &p.VLowCounts, &p.TauDischargeS, &p.TauDischargeCIS, &p.VLowV, &p.VLowCIV)
	}
	if pf.ok[1] {
		f := pf.fit[1]
		// A droop counts only when a is significantly below 1.
		q := 1.959963984540054
		if f.A < 1 && 1-f.A > q*f.SeA {
			p.TauHoldS = ptr(tauOf(f.A, T))
			p.TauHoldSamples = ptr(tauOf(f.A, 1))
			r := tauCI(f, T)
			p.TauHoldCIS = ci(r[0], r[1])
		}
	}
	if dof > 0 {
		// The residual of y - a x - b is n[k+1] - a n[k]: its variance is (1 + a^2) sigma^2.
		p.NoiseRMSCounts = ptr(math.Sqrt(ssr / dof))
	}
	p.MissingCodes, p.StuckCodes = a.codeFaults()

	m := a.meta
	tau := math.NaN()
	if p.TauChargeS != nil {
		tau = *p.TauChargeS
	}
	if m.Has(telemetry.FieldSupply) && p.VHighV != nil {
		vs, vh := m.Supply, *p.VHighV
		drop := vs - vh
		lsb := c.lsb
		if math.IsNaN(lsb) {
			lsb = 0
		}
		if drop > math.Max(0.01*vs, 3*lsb) {
			if p.TauHoldS != nil && !math.IsNaN(tau) && *p.TauHoldS > tau {
				// A load R_L gives tau_c/tau_h = R/(R+R_L) and v_high = Vs R_L/(R+R_L)
				// = Vs (1 - tau_c/tau_h); what the load does not explain is a drop
				// in a buffer between the node and the sense point.
				th := *p.TauHoldS
				vLoad := vs * (1 - tau/th)
				if m.Has(telemetry.FieldR) && m.R > 0 {
					p.LoadOhm = ptr(m.R * (th - tau) / tau)
				}
				if extra := vLoad - vh; extra > math.Max(0.02*vs, 3*lsb) {
					p.SenseDropV = ptr(extra)
				}
			} else {
				if m.Has(telemetry.FieldR) && m.R > 0 {
					p.LoadOhm = ptr(m.R * vh / drop)
				}
				p.SenseDropV = ptr(drop)
			}
		}
	}
	// The load in parallel with C: the meta lines' or, failing that, the identified one.
	rl := math.NaN()
	switch {
	case m.Has(telemetry.FieldLoad) && m.Load > 0:
		rl = m.Load
	case p.LoadOhm != nil:
		rl = *p.LoadOhm
	}
	if m.Has(telemetry.FieldC) && m.C > 0 && !math.IsNaN(tau) {
		// tau = C (R || R_L), so R = 1 / (C/tau - 1/R_L); without a load, tau / C.
		r := tau / m.C
		if !math.IsNaN(rl) && m.C/tau > 1/rl {
			r = 1 / (m.C/tau - 1/rl)
		}
		p.EffectiveROhm = ptr(r)
	}
	if m.Has(telemetry.FieldR) && m.R > 0 && !math.IsNaN(tau) {
		r := m.R
		if !math.IsNaN(rl) {
			r = r * rl / (r + rl)
		}
		p.EffectiveCF = ptr(tau / r)
	}
	return p
}

// holdFit returns the hold droop from the steady balance (see Accumulator), with the
// asymptote at c counts. SeA propagates the standard errors of the charge and
// discharge fits; N is the number of hold pairs.
func (a *Accumulator) holdFit(pf plantFit, c float64) (fitResult, bool) {
	b := &a.bal
	den := b.s[1] - c*b.n[1]
	if b.n[1] < 16 || den <= 0 {
		return fitResult{}, false
	}
	num := -b.delta
	var v2 float64
	for _, d := range []int{0, 2} {
		if b.n[d] == 0 {
			continue
		}
		if !pf.ok[d] || math.IsNaN(pf.fit[d].VInf) {
			return fitResult{}, false
		}
		f := pf.fit[d]
		// (a-1) S + b N = (1-a) (N VInf - S)
		term := (1 - f.A) * (b.n[d]*f.VInf - b.s[d])
		num += term
		rel := f.SeA / (1 - f.A)
		dv := (1 - f.A) * b.n[d] * f.SeVInf
		v2 += term*term*rel*rel + dv*dv
	}
	oneMinusA := num / den
	r := fitResult{N: b.n[1], A: 1 - oneMinusA, SeA: math.Sqrt(v2) / den, VInf: c}
	r.B = c * oneMinusA
	return r, true
}

// codeFaults reads the code histogram: a missing code has no hits while both neighbours
// have at least 16 (the reading swept across it many times); a stuck code has at least 50 hits and
// 8 times the mean of its four nearest neighbours, none of which is within 3 counts of
// a setpoint seen (where a settled loop sits on purpose).
func (a *Accumulator) codeFaults() (missing, stuck []int) {
	missing, stuck = []int{}, []int{}
	h := a.codes
	nearSP := func(code int) bool {
		for i := range a.segs {
			if math.Abs(float64(code)-a.segs[i].sp) <= 3+a.segs[i].db {
				return true
			}
		}
		return a.seg.n > 0 && math.Abs(float64(code)-a.seg.sp) <= 3+a.seg.db
	}
	for i := 2; i+2 < len(h); i++ {
		if h[i] == 0 && h[i-1] >= 16 && h[i+1] >= 16 && len(missing) < 64 {
			missing = append(missing, i)
		}
		nb := float64(h[i-2]+h[i-1]+h[i+1]+h[i+2]) / 4
		if h[i] >= 50 && float64(h[i]) >= 8*nb && len(stuck) < 64 && !nearSP(i) && i != a.maxCode {
			stuck = append(stuck, i)
		}
	}
	return missing, stuck
}

// segment converts one segment's figures.
func (a *Accumulator) segment(f *segFig, pf plantFit, c conv) Segment {
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
	s.LimitCyclePeriodS = ptr(f.periodSamples * c.period)
	s.LimitCyclePeriodSamples = ptr(f.periodSamples)
	s.LimitCycleDriveS = ptr(c.ds(f.driveTicks))
	if f.sn > 1 {
		s.SwitchingHz = ptr(float64(f.switches) / (float64(f.sn) * c.period))
		s.RippleFreqHz = ptr(f.freq / c.period)
	}
	s.Unreachable = a.unreachable(f, pf)
	return s
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

// stepOf converts the step into a segment.
func stepOf(f *segFig, c conv) StepFigures {
	st := StepFigures{
		AtS:        c.s(f.start),
		FromV:      ptr(c.v(f.from)),
		ToV:        ptr(c.v(f.sp)),
		FromCounts: f.from,
		ToCounts:   f.sp,
		RiseS:      ptr(c.ds(f.rise)),
		SettleS:    ptr(c.ds(f.settle)),
		OvershootV: ptr(c.v(f.overshoot)),
		SlewVPerS:  ptr(c.v(f.slewTicks) / c.perTick),
	}
	if math.IsNaN(c.perTick) {
		st.AtS = 0
	}
	return st
}

// traces builds the bounded waveforms.
func (a *Accumulator) traces(pf plantFit, c conv) *Traces {
	tr := &Traces{}
	volts := !math.IsNaN(c.lsb)
	tr.Volts = volts
	val := func(counts float64) float64 {
		if volts {
			return c.v(counts)
		}
		return counts
	}
	secs := func(ticks float64) float64 {
		if math.IsNaN(c.perTick) {
			return ticks - c.origin
		}
		return c.s(ticks)
	}
	a.ov.each(func(t, sp, mean, lo, hi float64) {
		tr.T = append(tr.T, secs(t))
		tr.SP = append(tr.SP, val(sp))
		tr.PV = append(tr.PV, val(mean))
		tr.PVMin = append(tr.PVMin, val(lo))
		tr.PVMax = append(tr.PVMax, val(hi))
	})
	for _, z := range a.zooms {
		zz := ZoomTrace{Segment: z.Segment, T: make([]float64, len(z.T)), PV: make([]float64, len(z.PV)), U: z.U}
		for i := range z.T {
			zz.T[i], zz.PV[i] = secs(z.T[i]), val(z.PV[i])
		}
		tr.Zoom = append(tr.Zoom, zz)
	}
	if a.seg.sn > 0 && len(tr.Zoom) < maxZooms {
		z := a.seg.zoom(zoomLen)
		for i := range z.T {
			z.T[i], z.PV[i] = secs(z.T[i]), val(z.PV[i])
		}
		tr.Zoom = append(tr.Zoom, z)
	}
	// The closed segments' steady errors, and the open segment's so far.
	hist := a.steadyHist
	a.seg.foldHist(&hist)
	lo, hi := -1, -1
	for i, n := range hist {
		if n > 0 {
			if lo < 0 {
				lo = i
			}
			hi = i
		}
	}
	for i := lo; i >= 0 && i <= hi; i++ {
		tr.ErrBins = append(tr.ErrBins, float64(i-histHalf))
		tr.ErrHist = append(tr.ErrHist, float64(hist[i]))
	}
	for i := range a.bestSpec.freq {
		f := a.bestSpec.freq[i]
		if !math.IsNaN(c.period) {
			f /= c.period
		}
		tr.SpecFreq = append(tr.SpecFreq, f)
		tr.SpecAmp = append(tr.SpecAmp, a.bestSpec.amp[i])
	}
	for _, r := range a.stepTr {
		st := StepTrace{Step: r.step, T: make([]float64, len(r.t)), PV: make([]float64, len(r.pv))}
		for i := range r.t {
			st.T[i], st.PV[i] = secs(r.t[i]), val(r.pv[i])
		}
		// The fitted response: the identified plant driven by the recorded drives.
		if len(r.pv) > 0 {
			v := r.pv[0]
			fit := make([]float64, len(r.pv))
			good := true
			for i := range r.pv {
				fit[i] = val(v)
				d := int(r.u[i]) + 1
				if !pf.ok[d] {
					good = false
					break
				}
				v = pf.fit[d].A*v + pf.fit[d].B
			}
			if good {
				st.Fitted = fit
			}
		}
		tr.StepTraces = append(tr.StepTraces, st)
	}
	return tr
}
