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
	// joint says a drive's fit is the joint one (jointfit.go); grounded that its
	// discharge asymptote was taken as ground; jointWhy why there is no joint fit.
	joint    [3]bool
	grounded bool
	jointWhy string
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

	pf := a.currentPlant()
	sum.Plant = a.plant(pf, c)

	figs := a.segs
	var cur segFig
	if a.seg.n > 0 && a.kept < a.opts.MaxSegments {
		a.seg.pf = pf
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
			sum.Steps = append(sum.Steps, a.stepOf(f, pf, c))
		}
	}
	if a.segSeen > int64(len(figs)) {
		sum.SegmentsOmitted = a.segSeen - int64(len(figs))
		sum.StepsOmitted = sum.SegmentsOmitted
	}
	sum.Events, sum.EventsOmitted = a.eventList(c), a.st.omitted
	sum.Glitches = LineList{Count: a.st.glitches.Count, Lines: append([]int64{}, a.st.glitches.Lines...)}
	sum.SuspectLines = a.suspects()
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
		f := pf.fit[d]
		if !pf.ok[d] || math.IsNaN(f.VInf) {
			// A discharge without a fit of its own (a droop-and-recharge loop rarely
			// discharges far from the band) borrows the charge's time constant (the
			// same pin and resistor) and heads for the hold asymptote c.
			if d != 0 || !pf.ok[2] || math.IsNaN(pf.fit[2].VInf) {
				return fitResult{}, false
			}
			f = fitResult{A: pf.fit[2].A, SeA: pf.fit[2].SeA, VInf: c, SeVInf: 1}
		}
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
// a setpoint seen (where a settled loop sits on purpose), and which is not a rail (see
// railCode).
func (a *Accumulator) codeFaults(pf plantFit) (missing, stuck []int) {
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
		if h[i] >= 50 && float64(h[i]) >= 8*nb && len(stuck) < 64 && !nearSP(i) && !a.railCode(i, pf) {
			stuck = append(stuck, i)
		}
	}
	return missing, stuck
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
	if (a.seg.sn > 0 || a.seg.n > 1) && len(tr.Zoom) < maxZooms {
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
