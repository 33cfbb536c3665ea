package analysis

import (
	"fmt"
	"math"

	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/si"
)

// tauInterval returns a fit's time constant in samples with its 95 % interval.
func tauInterval(f fitResult) interval {
	r := tauCI(f, 1)
	return interval{tauOf(f.A, 1), r[0], r[1]}
}

// levelInterval returns a fit's asymptote in counts with its 95 % interval.
func levelInterval(f fitResult) interval {
	q := tQuantile(f.dof())
	return interval{f.VInf, f.VInf - q*f.SeVInf, f.VInf + q*f.SeVInf}
}

// noFit says why a drive has no fit at all.
func (a *Accumulator) noFit(drive string) string {
	if a.n > 0 && float64(a.railLo+a.railHi) > 0.5*float64(a.n) {
		return "every sample sits on a rail: tau is far shorter than the sample period"
	}
	return fmt.Sprintf("not identified: no run of %s far enough from the setpoint; a setpoint step gives one", drive)
}

// plant converts the fits to the Plant figures: only figures the data support, each
// null with a reason otherwise (the identifiability rule of the conventions, and the
// physical ranges v_high in [0, supply + 2 LSB], v_low in [-2 LSB, v_high]), and the
// decision between no load, a load and a buffer (decidePlant).
func (a *Accumulator) plant(pf plantFit, c conv) Plant {
	p := Plant{
		ChargePairs:    int64(a.fits[2].n),
		DischargePairs: int64(a.fits[0].n),
		HoldPairs:      int64(a.bal.n[1]),
		MissingCodes:   []int{},
		StuckCodes:     []int{},
		SupplyTol:      a.opts.SupplyTol,
	}
	if pf.joint[2] {
		p.ChargePairs = int64(pf.fit[2].N)
	}
	if pf.joint[0] {
		p.DischargePairs = int64(pf.fit[0].N)
	}
	T := c.period
	m := a.meta
	volts := !math.IsNaN(c.lsb)
	supplyCounts := math.NaN()
	if m.Has(telemetry.FieldSupply) && volts {
		supplyCounts = m.Supply / c.lsb
	}

	// Noise from the residuals of both drive fits, whatever their figures show.
	var ssr, dof float64
	for _, d := range []int{0, 2} {
		if pf.ok[d] {
			ss, df := pf.fit[d].noiseSS()
			ssr += ss
			dof += df
		}
	}
	if dof > 0 {
		p.NoiseRMSCounts = ptr(a.noiseRMS(ssr, dof))
	} else {
		p.NoiseRMSCountsReason = "not identified: no charge or discharge run to fit"
	}

	// setTau writes one time constant (samples and seconds) when the rule allows it.
	setTau := func(ts interval, samples, secs **float64, ciS **[2]float64, rS, rSec *string) {
		if ok, why := tauOK(ts); !ok {
			*rS, *rSec = why, why
			return
		}
		*samples = ptr(ts.v)
		if math.IsNaN(T) {
			*rSec = "needs the sample period"
			return
		}
		*secs = ptr(ts.v * T)
		*ciS = ci(ts.lo*T, ts.hi*T)
	}
	var tauC, tauH, vHigh, vLow = unknown(), unknown(), unknown(), unknown()
	if pf.ok[2] {
		tauC = tauInterval(pf.fit[2])
		setTau(tauC, &p.TauChargeSamples, &p.TauChargeS, &p.TauChargeCIS, &p.TauChargeSamplesReason, &p.TauChargeSReason)
		vHigh = levelInterval(pf.fit[2])
	} else {
		p.TauChargeSReason = a.noFit("charge")
		p.TauChargeSamplesReason = p.TauChargeSReason
	}
	if pf.ok[0] {
		setTau(tauInterval(pf.fit[0]), &p.TauDischargeSamples, &p.TauDischargeS, &p.TauDischargeCIS, &p.TauDischargeSamplesReason, &p.TauDischargeSReason)
		vLow = levelInterval(pf.fit[0])
		if pf.joint[0] && pf.grounded {
			vLow = unknown()
		}
	} else {
		p.TauDischargeSReason = a.noFit("discharge")
		p.TauDischargeSamplesReason = p.TauDischargeSReason
	}
	holdPairs := 0.0
	switch {
	case pf.ok[1]:
		f := pf.fit[1]
		holdPairs = f.N
		tauH = tauInterval(f)
		// A droop counts only when a is significantly below 1.
		q := 1.959963984540054
		if f.A < 1 && 1-f.A > q*f.SeA {
			setTau(tauH, &p.TauHoldSamples, &p.TauHoldS, &p.TauHoldCIS, &p.TauHoldSamplesReason, &p.TauHoldSReason)
		} else {
			tauH.hi = math.Inf(1)
			p.TauHoldSReason = "no significant droop in hold: nothing seen loading the node"
			p.TauHoldSamplesReason = p.TauHoldSReason
		}
	case a.bal.n[1] == 0:
		p.TauHoldSReason = "no hold in the steady parts"
		p.TauHoldSamplesReason = p.TauHoldSReason
	default:
		p.TauHoldSReason = "not identified: too few hold samples in the steady parts, or no charge and discharge fits to balance them"
		p.TauHoldSamplesReason = p.TauHoldSReason
	}

	// The levels, within their physical ranges.
	lsbV := 1.0
	if volts {
		lsbV = c.lsb
	}
	if vHigh.known() && !math.IsNaN(supplyCounts) && vHigh.v > supplyCounts+2 && vHigh.lo <= supplyCounts+2 {
		// Above the supply, but its interval reaches back below it: the estimate
		// constrained to the physical range is the supply itself (the top of the range
		// then says nothing beyond the supply: no load, no drop).
		vHigh = interval{v: supplyCounts, lo: vHigh.lo, hi: supplyCounts + 2}
	}
	if vHigh.known() {
		ok, why := scaleOK(vHigh)
		switch {
		case vHigh.v < 0:
			ok, why = false, "the charge asymptote is below ground: not physical (a poor fit)"
		case !math.IsNaN(supplyCounts) && vHigh.v > supplyCounts+2:
			ok, why = false, fmt.Sprintf("the charge asymptote %s is above the %s supply (+2 LSB): not physical", c.fmtV(vHigh.v), si.Format(m.Supply, "V"))
		}
		if ok {
			p.VHighCounts = ptr(vHigh.v)
			if volts {
				p.VHighV, p.VHighCIV = ptr(c.v(vHigh.v)), ci(c.v(vHigh.lo), c.v(vHigh.hi))
			}
		} else {
			p.VHighCountsReason = why
		}
	} else if pf.ok[2] {
		p.VHighCountsReason = "not identified: the charge shows no asymptote"
	} else {
		p.VHighCountsReason = p.TauChargeSReason
	}
	if vLow.known() {
		ok, why := levelOK(vLow, 1, "counts")
		switch {
		case vLow.hi < -2:
			ok, why = false, fmt.Sprintf("the discharge heads for %s, below ground: the sense point sits behind a follower (see sense_drop_v)", c.fmtV(vLow.v))
		case ok && vLow.v < -2:
			ok, why = false, "below ground within its interval: not identifiable"
		case vHigh.known() && vLow.v > vHigh.v:
			ok, why = false, "the discharge asymptote is above the charge asymptote: not physical (a poor fit)"
		}
		if ok {
			p.VLowCounts = ptr(vLow.v)
			if volts {
				p.VLowV, p.VLowCIV = ptr(c.v(vLow.v)), ci(c.v(vLow.lo), c.v(vLow.hi))
			}
		} else {
			p.VLowCountsReason = why
		}
	} else if pf.joint[0] && pf.grounded {
		p.VLowCountsReason = "not identified: taken as ground by the joint fit"
	} else if pf.ok[0] {
		p.VLowCountsReason = "not identified: the discharge shows no asymptote"
	} else {
		p.VLowCountsReason = p.TauDischargeSReason
	}
	if p.VHighV == nil {
		p.VHighVReason = p.VHighCountsReason
		if p.VHighVReason == "" {
			p.VHighVReason = "needs vref and adc_bits"
		}
	}
	if p.VLowV == nil {
		p.VLowVReason = p.VLowCountsReason
		if p.VLowVReason == "" {
			p.VLowVReason = "needs vref and adc_bits"
		}
	}
	// The discharge asymptote the decision reads: the narrowest of the discharge fit's,
	// the steady balance's (a two-state loop's discharges are too short to fit) and the
	// discharge fit's at the charge's factor (a three-state loop's one discharge run is).
	vLowBal, vLowShared := a.dischargeFromBalance(pf), dischargeSharedFactor(pf)
	vLowEv := narrower(narrower(vLow, vLowBal), vLowShared)
	if p.VLowCounts == nil && vLowEv != vLow && vLowEv.hi < -2 {
		from := "from the balance of the steady parts"
		if vLowEv == vLowShared {
			from = "the discharge fitted at the charge's time constant"
		}
		p.VLowCountsReason = fmt.Sprintf("the discharge heads for %s, below ground (%s): the sense point sits behind a follower (see sense_drop_v)", c.fmtV(vLowEv.v), from)
		if p.VLowV == nil {
			p.VLowVReason = p.VLowCountsReason
		}
	}
	p.MissingCodes, p.StuckCodes = a.codeFaults(pf)

	// Load or buffer.
	ev := plantEvidence{tauC: tauC, tauH: tauH, holdPairs: holdPairs, supply: math.NaN(), supplyTol: a.opts.SupplyTol,
		r: math.NaN(), lsb: lsbV, vHigh: vHigh, vLow: vLowEv, lowCharges: a.lowChargeEvidence(pf)}
	if volts {
		ev.vHigh = interval{c.v(vHigh.v), c.v(vHigh.lo), c.v(vHigh.hi)}
		ev.vLow = interval{c.v(vLowEv.v), c.v(vLowEv.lo), c.v(vLowEv.hi)}
		if m.Has(telemetry.FieldSupply) {
			ev.supply = m.Supply
		}
	}
	if m.Has(telemetry.FieldR) && m.R > 0 {
		ev.r = m.R
	}
	dec := decidePlant(ev)
	if dec.kind != "" {
		k := dec.kind
		p.Kind = &k
	} else {
		p.KindReason = dec.kindReason
	}
	p.LoadRatio, p.LoadRatioReason = ptr(dec.ratio.v), dec.ratioReason
	if p.LoadRatio != nil {
		p.LoadRatioCI, p.LoadRatioReason = ci(dec.ratio.lo, dec.ratio.hi), ""
		p.LoadFrom = dec.loadFrom
	}
	p.LoadOhm, p.LoadOhmReason = ptr(dec.load.v), dec.loadReason
	if p.LoadOhm != nil {
		p.LoadOhmCI, p.LoadOhmReason = ci(dec.load.lo, dec.load.hi), ""
	}
	p.SenseDropV, p.SenseDropVReason = ptr(dec.drop.v), dec.dropReason
	if p.SenseDropV != nil {
		p.SenseDropCIV, p.SenseDropVReason, p.SenseDropFrom = ci(dec.drop.lo, dec.drop.hi), "", dec.dropFrom
	}
	p.notes = append(p.notes, dec.notes...)
	switch dec.kind {
	case KindLoad:
		p.loadEstimate = dec.estimate
	case KindBuffer:
		p.dropEstimate = dec.dropEstimate
	}
	p.notes = append(p.notes, metaLoadCheck(m, ev, dec, tauC, tauH)...)

	a.effective(&p, m)
	return p
}

// metaLoadCheck compares a load the meta lines declare with what the data show.
func metaLoadCheck(m telemetry.Meta, ev plantEvidence, dec plantDecision, tauC, tauH interval) []string {
	if !m.Has(telemetry.FieldLoad) || m.Load <= 0 || !m.Has(telemetry.FieldR) || m.R <= 0 {
		return nil
	}
	want := m.Load / m.R
	load := si.Format(m.Load, "Ω")
	switch {
	case dec.droop.known() && !math.IsInf(dec.droop.hi, 1):
		// The droop's interval, even when too wide to show the load as a figure.
		if r := dec.droop; want < r.lo || want > r.hi {
			return []string{fmt.Sprintf("the meta lines declare a load of %s, the hold droop shows %s [%s .. %s]",
				load, si.Format(r.v*m.R, "Ω"), si.Format(r.lo*m.R, "Ω"), si.Format(r.hi*m.R, "Ω"))}
		}
	case dec.load.known():
		if m.Load < dec.load.lo || m.Load > dec.load.hi {
			return []string{fmt.Sprintf("the meta lines declare a load of %s, the data show %s [%s .. %s]",
				load, si.Format(dec.load.v, "Ω"), si.Format(dec.load.lo, "Ω"), si.Format(dec.load.hi, "Ω"))}
		}
	case tauC.known() && ev.holdPairs > 0 && math.IsInf(tauH.hi, 1) && !math.IsNaN(tauH.lo):
		// No significant droop: the load is at least tau_h,lo / tau_c,hi - 1 times R.
		if lo := tauH.lo/tauC.hi - 1; lo > want {
			return []string{fmt.Sprintf("the meta lines declare a load of %s, but the hold droop shows none below %s",
				load, si.Format(lo*m.R, "Ω"))}
		}
	}
	return nil
}

// effective solves tau = C (R || R_L) for R (with the meta C) or C (with the meta R),
// R_L being the meta load or, failing that, the identified one.
func (a *Accumulator) effective(p *Plant, m telemetry.Meta) {
	if p.TauChargeS == nil {
		p.EffectiveROhmReason, p.EffectiveCFReason = p.TauChargeSReason, p.TauChargeSReason
		return
	}
	tau := *p.TauChargeS
	rl := math.NaN()
	switch {
	case m.Has(telemetry.FieldLoad) && m.Load > 0:
		rl = m.Load
	case p.LoadOhm != nil:
		rl = *p.LoadOhm
	}
	if m.Has(telemetry.FieldC) && m.C > 0 {
		// tau = C (R || R_L), so R = 1 / (C/tau - 1/R_L); without a load, tau / C.
		r := tau / m.C
		if !math.IsNaN(rl) && m.C/tau > 1/rl {
			r = 1 / (m.C/tau - 1/rl)
		}
		p.EffectiveROhm = ptr(r)
	} else {
		p.EffectiveROhmReason = "needs c in the meta lines"
	}
	if m.Has(telemetry.FieldR) && m.R > 0 {
		r := m.R
		if !math.IsNaN(rl) {
			r = r * rl / (r + rl)
		}
		p.EffectiveCF = ptr(tau / r)
	} else {
		p.EffectiveCFReason = "needs r in the meta lines"
	}
}

// PlantModel is one consistent view of the identified circuit, what the advice designs
// with. Zero means none (or not identified) for the resistances and the drop.
type PlantModel struct {
	// Kind is KindNone, KindLoad or KindBuffer; "" when the data cannot tell.
	Kind string
	// LoadOhm is the resistance loading the node (a load, a leak, a follower's input),
	// ohm: the identified one when it is identifiable, else the meta load; 0 = none.
	LoadOhm float64
	// LoadRatio is R_load / R (0 = none or unknown).
	LoadRatio float64
	// SenseDropV is a buffer's drop between the node and the sense point, V (0 = none).
	SenseDropV float64
	// SupplyV is the pin's high level, V: the meta supply, else the top of the range
	// with the drop and the load put back; 0 = unknown.
	SupplyV float64
	// TauChargeS is the identified charge time constant, s (0 = not identified).
	TauChargeS float64
	// Identified says Kind, LoadOhm and SenseDropV come from the data (not only the meta lines).
	Identified bool
	// Rough says LoadOhm (a load) or SenseDropV (a buffer) is the central value of a
	// figure whose interval is too wide to show (the data show a load or a buffer, not
	// its size within the identifiability rule).
	Rough bool
}

// Model returns the summary's plant as one consistent PlantModel: a load and a buffer
// drop are never both taken from one voltage drop (see decidePlant).
func (s *Summary) Model() PlantModel {
	p, b := s.Plant, s.Board
	var pm PlantModel
	if p.Kind != nil {
		pm.Kind, pm.Identified = *p.Kind, true
	}
	get := func(v *float64) float64 {
		if v == nil {
			return 0
		}
		return *v
	}
	pm.LoadRatio, pm.SenseDropV, pm.TauChargeS = get(p.LoadRatio), get(p.SenseDropV), get(p.TauChargeS)
	switch {
	case p.LoadOhm != nil:
		pm.LoadOhm = *p.LoadOhm
	case pm.Kind != KindNone && b.LoadOhm != nil:
		pm.LoadOhm = *b.LoadOhm
	case pm.Kind == KindLoad && p.loadEstimate > 0:
		pm.LoadOhm, pm.Rough = p.loadEstimate, true
	}
	if pm.Kind == KindBuffer && pm.SenseDropV == 0 && p.dropEstimate > 0 {
		// The data show a follower but not its drop within 2 LSB or 10 %: its central
		// value, so that the advice designs for a buffer with a drop, never with none.
		pm.SenseDropV, pm.Rough = p.dropEstimate, true
	}
	if pm.LoadRatio == 0 && pm.LoadOhm > 0 && b.ROhm != nil && *b.ROhm > 0 {
		pm.LoadRatio = pm.LoadOhm / *b.ROhm
	}
	switch {
	case b.SupplyV != nil:
		pm.SupplyV = *b.SupplyV
	case p.VHighV != nil:
		top := *p.VHighV
		if pm.LoadRatio > 0 {
			top *= (1 + pm.LoadRatio) / pm.LoadRatio
		}
		pm.SupplyV = top + pm.SenseDropV
	}
	return pm
}

// diagnosePlant says what explains the top of the range, and where the data and the
// meta lines disagree.
func (a *Accumulator) diagnosePlant(p Plant, add func(code, sev, format string, args ...any)) {
	if p.SenseDropV != nil {
		from := "the supply and the load leave it unexplained"
		if p.SenseDropFrom == "v_low" {
			from = "the discharge heads below ground at the sense point"
		}
		add(DiagSenseDrop, "info", "A buffer between the node and the ADC lowers the sensed level by %s (%s): a follower (an emitter follower drops about 0.65 V). Setpoints above the supply less this drop are out of reach.",
			si.Format(*p.SenseDropV, "V"), from)
	}
	if p.SenseDropV == nil && p.Kind != nil && *p.Kind == KindBuffer {
		add(DiagSenseDrop, "info", "The discharge heads below ground at the sense point: a buffer (a follower) lowers the sensed level; its drop is %s. Setpoints above the supply less this drop are out of reach.",
			p.SenseDropVReason)
	}
	if p.LoadRatio != nil {
		what := "A load on the node"
		if p.Kind != nil && *p.Kind == KindBuffer {
			what = "The buffer's input (and any load) on the node"
		}
		how := "the hold droop (tau_hold / tau_charge)"
		if p.LoadFrom == "v_high" {
			how = "v_high against the supply (no hold to show a droop)"
		}
		val := fmt.Sprintf("%.3g times R", *p.LoadRatio)
		if p.LoadOhm != nil {
			val = si.Format(*p.LoadOhm, "Ω") + " (" + val + ")"
		}
		add(DiagLoad, "info", "%s is %s, from %s: it lowers the top of the range and shortens tau.", what, val, how)
	}
	for _, n := range p.notes {
		add(DiagPlantMismatch, "warning", "%s%s.", string(n[0]-'a'+'A'), n[1:])
	}
}
