package analysis

import (
	"fmt"
	"math"
)

// Plant kinds: what explains the top of the range.
const (
	KindNone   = "none"   // nothing between the node and the sense point, no load seen
	KindLoad   = "load"   // a resistive load (or leak) from the node to ground
	KindBuffer = "buffer" // a follower: it drops the sensed level and loads the node
)

// DefaultSupplyTol is the supply tolerance assumed when Options.SupplyTol is zero: a USB
// supply's 5 % (common practice).
const DefaultSupplyTol = 0.05

// Why a figure is null (the <name>_reason strings that say so).
const (
	reasonSupplyLimited = "not identifiable (supply-limited)"
	reasonNoSupply      = "needs supply in the meta lines"
	reasonNoR           = "needs r in the meta lines (load_ratio is R_load/R)"
)

// interval is a figure with its 95 % interval; NaN value means unknown.
type interval struct{ v, lo, hi float64 }

func unknown() interval               { return interval{math.NaN(), math.NaN(), math.NaN()} }
func (i interval) known() bool        { return !math.IsNaN(i.v) && !math.IsInf(i.v, 0) }
func (i interval) halfWidth() float64 { return (i.hi - i.lo) / 2 }

// scaleOK applies the identifiability rule of a scale figure (tau, a load, an effective
// R or C): its 95 % half-width is at most 10 % of its value.
func scaleOK(i interval) (bool, string) {
	if !i.known() {
		return false, "not identified"
	}
	if math.IsInf(i.hi, 0) || math.IsInf(i.lo, 0) || math.IsNaN(i.lo) || math.IsNaN(i.hi) {
		return false, "not identifiable: its 95 % interval is unbounded"
	}
	if hw := i.halfWidth(); hw > 0.1*math.Abs(i.v) {
		return false, fmt.Sprintf("not identifiable: its 95 %% interval is ±%.0f %% (more than 10 %%)", 100*hw/math.Abs(i.v))
	}
	return true, ""
}

// levelOK applies the rule of a figure that may sit near zero (v_low, a drop): its 95 %
// half-width is at most 2 LSB, or 10 % of its value when that is larger.
func levelOK(i interval, lsb float64, unit string) (bool, string) {
	if !i.known() {
		return false, "not identified"
	}
	if math.IsNaN(i.lo) || math.IsNaN(i.hi) {
		return false, "not identifiable: no interval"
	}
	if hw := i.halfWidth(); hw > math.Max(2*lsb, 0.1*math.Abs(i.v)) {
		return false, fmt.Sprintf("not identifiable: its 95 %% interval is ±%.3g %s (more than 2 LSB and 10 %%)", hw, unit)
	}
	return true, ""
}

// tauOK applies the time-constant rule: tau below 0.3 sample periods is never shown
// (every sample sits on a rail, one period moves the level all the way), otherwise the
// scale rule.
func tauOK(samples interval) (bool, string) {
	if samples.known() && samples.v < 0.3 {
		return false, fmt.Sprintf("tau is %.3g times shorter than the sample period: every sample sits on a rail", 1/samples.v)
	}
	return scaleOK(samples)
}

// plantEvidence is what the load-or-buffer decision reads: the identified levels of the
// sense point (volts, or counts when the scale is unknown, with lsb 1), the time
// constants in samples, and the meta lines' supply and R.
type plantEvidence struct {
	vHigh, vLow interval // sense-point asymptotes of charge and discharge
	tauC, tauH  interval // charge and hold time constants, samples; tauH.hi may be +Inf
	holdPairs   float64  // hold sample pairs behind tauH (0: no hold seen)
	lowCharges  float64  // charges that left the reading near code 0 where a plain load could not
	supply      float64  // V, NaN unknown
	supplyTol   float64  // relative
	r           float64  // ohm, NaN unknown
	lsb         float64  // volts per count (1 when working in counts)
}

// plantDecision is the outcome: the kind and the figures behind it, each with a reason
// when it is null.
type plantDecision struct {
	kind, kindReason string
	ratio            interval // R_load / R
	ratioReason      string
	load             interval // ohm
	loadReason       string
	loadFrom         string   // "hold_droop" or "v_high"
	drop             interval // sense drop, V
	dropReason       string
	dropFrom         string   // "v_low" or "v_high"
	droop            interval // R_load / R from the hold droop before the 10 % rule (unknown without a droop)
	notes            []string
	estimate         float64 // the load's central value, ohm, even when not identifiable (0 = none)
	dropEstimate     float64 // a buffer's drop, V, its central value even when not identifiable (0 = none)
}

// decidePlant says whether a load, a buffer or nothing explains the top of the range.
//
// The hold droop needs no supply: with a load R_L the node holds with tau_h = R_L C
// and charges with tau_c = C (R || R_L), so R_L/R = tau_h/tau_c - 1. A follower's base
// loads the node the same way (its input, beta R_E, pulls towards V_BE), and it also
// lowers the sensed level by its drop D: the discharge then heads for -D rho/(1+rho)
// at the sense point, below ground, which no plain load can do (rho = R_L/R). The top of
// the range is (Vs - D) rho/(1+rho) either way, so with a supply Vs the drop is
// D = Vs - v_high (1+rho)/rho; that depends on Vs being exact and counts only beyond
// the supply tolerance. Without a hold droop (two-state loops) v_high alone gives
// rho = v_high/(Vs - v_high), again only beyond the tolerance.
func decidePlant(ev plantEvidence) plantDecision {
	d := plantDecision{ratio: unknown(), load: unknown(), drop: unknown(), droop: unknown()}
	haveVs := !math.IsNaN(ev.supply) && ev.supply > 0
	tolV := ev.supplyTol * ev.supply

	// 1. The load ratio from the hold droop.
	droopLoad := false // the droop shows a load (its interval excludes none)
	noDroop := false   // enough hold and no significant droop: no load
	switch {
	case ev.tauC.known() && ev.tauH.known() && ev.holdPairs > 0:
		// q = tau_h/tau_c; the two fits' errors are independent, so their relative
		// half-widths add in quadrature.
		q := ev.tauH.v / ev.tauC.v
		rel := math.Hypot(ev.tauH.halfWidth()/ev.tauH.v, ev.tauC.halfWidth()/ev.tauC.v)
		r := interval{v: q - 1, lo: q*(1-rel) - 1, hi: q*(1+rel) - 1}
		switch {
		case (math.IsInf(ev.tauH.hi, 1) || math.IsNaN(ev.tauH.hi)) && droopHides(ev):
			// The hold sits in a band too narrow to resolve the droop that a plain
			// load explaining v_high would give: the hold cannot tell.
			d.ratioReason = "the hold droop is too small to resolve against the load v_high implies"
		case math.IsInf(ev.tauH.hi, 1) || math.IsNaN(ev.tauH.hi):
			noDroop = true
			d.ratioReason = "no load seen: the hold droop is not significant"
		case r.v <= 0:
			d.ratioReason = "the hold droops faster than the charge runs: not a resistive load"
		default:
			d.ratio, droopLoad, d.loadFrom, d.droop = r, true, "hold_droop", r
		}
	case ev.holdPairs > 0 && ev.tauC.known():
		noDroop = true
		d.ratioReason = "no load seen: the hold droop is not significant"
	case ev.holdPairs == 0:
		d.ratioReason = "no hold in the capture to show a droop"
	default:
		d.ratioReason = "needs the charge time constant"
	}
	// A droop too wide to show the load, with v_high below the supply by more than its
	// tolerance and no discharge below ground: when the load that v_high implies without
	// a buffer (rho = v_high/(Vs - v_high)) lies inside the droop's interval and is
	// identifiable itself, the two agree and the tighter one is shown.
	if droopLoad && haveVs && ev.vHigh.known() && !(ev.vLow.known() && ev.vLow.hi < -2*ev.lsb) {
		vh := ev.vHigh
		if ok, _ := scaleOK(d.ratio); !ok && vh.hi < ev.supply-math.Max(tolV, 2*ev.lsb) {
			vr := interval{v: vh.v / (ev.supply - vh.v), lo: vh.lo / (ev.supply - vh.lo), hi: vh.hi / (ev.supply - vh.hi)}
			if ok, _ := scaleOK(vr); ok && vr.v >= d.ratio.lo && vr.v <= d.ratio.hi {
				d.ratio, d.loadFrom = vr, "v_high"
			}
		}
	}

	// 2. A drop from the discharge asymptote below ground. In the sense point's terms
	// the follower's base is a load: charge heads for (Vs - D) rho/(1+rho), discharge
	// for -D rho/(1+rho). The droop gives rho without the supply; without a droop
	// (two-state loops) the supply does: rho/(1+rho) = (v_high - v_low)/Vs, so
	// D = -v_low Vs/(v_high - v_low), within the supply's tolerance. With neither, -v_low
	// is the drop less the base's share.
	lowDrop := false
	if ev.vLow.known() && ev.vLow.hi < -2*ev.lsb {
		lowDrop = true
		vl, vh := ev.vLow, ev.vHigh
		switch {
		case droopLoad:
			k := (1 + d.ratio.v) / d.ratio.v
			d.drop = interval{v: -vl.v * k, lo: -vl.hi * k, hi: -vl.lo * k}
		case haveVs && vh.known() && vh.lo > vl.hi:
			drop := func(vl, vh, vs float64) float64 { return -vl * vs / (vh - vl) }
			d.drop = interval{v: drop(vl.v, vh.v, ev.supply),
				lo: drop(vl.hi, vh.hi, ev.supply-tolV), hi: drop(vl.lo, vh.lo, ev.supply+tolV)}
		default:
			d.drop = interval{v: -vl.v, lo: -vl.hi, hi: -vl.lo}
		}
		d.dropFrom = "v_low"
	}

	// A charge cannot leave a plain load's reading near code 0 when its step from 0
	// is far above the noise: the sensed level sits below the node by a drop.
	stuckZero := ev.lowCharges >= 2

	// 3. What v_high says, beyond the supply tolerance.
	highDrop := false
	ambiguous := "" // why a droop's load and a buffer cannot be told apart
	if !ev.vHigh.known() {
		if d.dropReason == "" && !lowDrop {
			d.dropReason = "needs v_high"
		}
	} else if !haveVs {
		if !lowDrop {
			d.dropReason = reasonNoSupply
		}
	} else {
		k, klo, khi := 1.0, 1.0, 1.0
		if droopLoad {
			k = (1 + d.ratio.v) / d.ratio.v
			klo, khi = (1+d.ratio.hi)/d.ratio.hi, (1+d.ratio.lo)/d.ratio.lo
		}
		gap := interval{v: ev.supply - ev.vHigh.v*k, lo: ev.supply - ev.vHigh.hi*khi, hi: ev.supply - ev.vHigh.lo*klo}
		margin := math.Max(tolV, 2*ev.lsb)
		switch {
		case gap.lo > margin && (droopLoad || lowDrop || noDroop):
			// The load is known (or known absent): what is left is a buffer's drop.
			highDrop = true
			switch {
			case !lowDrop:
				d.drop, d.dropFrom = gap, "v_high"
			case !droopLoad && !noDroop:
				// No hold gives the load: the follower's base lowers v_high too, so
				// Vs - v_high only bounds the drop from above (the drop from v_low
				// already read the supply).
				if d.drop.lo > gap.hi+margin {
					d.notes = append(d.notes, fmt.Sprintf("the sense drop from v_low (%.3g V) exceeds the whole gap between v_high and the supply (%.3g V) by more than the supply tolerance", d.drop.v, gap.v))
				}
			case math.Abs(gap.v-d.drop.v) > margin+d.drop.halfWidth()+gap.halfWidth():
				d.notes = append(d.notes, fmt.Sprintf("the sense drop from v_low (%.3g V) and from the supply (%.3g V) disagree by more than the supply tolerance", d.drop.v, gap.v))
			}
		case gap.lo > margin && !stuckZero:
			// No hold to tell: a plain load explains a drop of the top alone.
			vh := ev.vHigh
			d.ratio = interval{v: vh.v / (ev.supply - vh.v), lo: vh.lo / (ev.supply - vh.lo), hi: vh.hi / (ev.supply - vh.hi)}
			if vh.hi >= ev.supply {
				d.ratio.hi = math.Inf(1)
			}
			d.loadFrom = "v_high"
			d.ratioReason = ""
		case gap.hi < -margin:
			d.notes = append(d.notes, fmt.Sprintf("v_high is above what the supply of %.3g V allows (by more than its %.0f %% tolerance)", ev.supply, 100*ev.supplyTol))
		default:
			if !lowDrop {
				d.dropReason = reasonSupplyLimited
			}
			if !droopLoad && !noDroop && d.loadFrom == "" {
				d.ratioReason = reasonSupplyLimited
			}
			if droopLoad && !lowDrop && !stuckZero && gap.lo > 2*ev.lsb && gap.hi > margin {
				// The top sits below what the droop's load explains, by more than its
				// interval but not beyond the supply's tolerance: a follower's drop (its
				// base is the load the droop shows) or a supply a little low. A load
				// alone would be a confident wrong answer.
				ambiguous = fmt.Sprintf("not identifiable: the hold droop shows a load on the node, and the top of the range sits %.2g-%.2g V below what that load explains: a buffer's drop or a supply below its nominal %.3g V (within its %.0f %% tolerance)",
					gap.lo, gap.hi, ev.supply, 100*ev.supplyTol)
			}
		}
		if stuckZero && !lowDrop && !highDrop {
			// A drop is shown (the charges stuck at code 0): v_high against the supply
			// sizes it, within the supply's tolerance; without a droop the base's share
			// is unknown and Vs - v_high only bounds it from above.
			g := interval{v: gap.v, lo: gap.lo - tolV, hi: gap.hi + tolV}
			if !droopLoad {
				g = interval{v: gap.v, lo: 0, hi: gap.hi + tolV}
			}
			d.drop, d.dropFrom = g, "v_high"
		}
	}
	if !lowDrop && !highDrop && d.dropReason == "" {
		d.dropReason = "no drop beyond the supply tolerance"
	}

	// 4. The figures, shown when identifiable.
	hasLoad := d.loadFrom != "" && d.ratio.known()
	buffer := lowDrop || highDrop || stuckZero
	if hasLoad {
		if !math.IsNaN(ev.r) && ev.r > 0 {
			d.estimate = d.ratio.v * ev.r
		}
		if ok, why := scaleOK(d.ratio); !ok {
			d.ratioReason = why
			if math.IsInf(d.ratio.hi, 1) {
				// The interval reaches "none": not a load after all.
				hasLoad = false
				d.ratioReason = "not identifiable: its interval includes no load"
			}
		} else if !math.IsNaN(ev.r) && ev.r > 0 {
			d.load = interval{d.ratio.v * ev.r, d.ratio.lo * ev.r, d.ratio.hi * ev.r}
		}
		if !d.load.known() {
			switch {
			case d.ratioReason != "":
				d.loadReason = d.ratioReason
			default:
				d.loadReason = reasonNoR
			}
		}
		if d.ratioReason != "" {
			d.ratio = unknown()
		}
	} else {
		d.ratio, d.loadFrom = unknown(), ""
		if d.ratioReason == "" {
			d.ratioReason = "not identified"
		}
		d.loadReason = d.ratioReason
	}
	if buffer {
		d.dropEstimate = max(d.drop.v, 0)
		if ok, why := levelOK(d.drop, ev.lsb, "V"); !ok || d.drop.lo <= 0 {
			switch {
			case !d.drop.known() && d.dropReason != "":
				why = "not identifiable: " + d.dropReason + " (the readings stay at code 0 under charge: a drop, not its size)"
			case ok:
				why = "not identifiable: its interval includes no drop"
			}
			d.dropReason, d.drop = why, unknown()
		}
	} else {
		d.drop, d.dropFrom = unknown(), ""
	}
	switch {
	case buffer:
		d.kind = KindBuffer
	case ambiguous != "":
		d.kindReason = ambiguous
	case hasLoad:
		d.kind = KindLoad
	case noDroop:
		d.kind = KindNone
	case haveVs && ev.vHigh.known() && d.dropReason == reasonSupplyLimited:
		// No hold to show a droop, and v_high within the supply tolerance: a small load
		// and none look the same.
		d.kindReason = reasonSupplyLimited
	default:
		d.kind = ""
		d.kindReason = "not identifiable: no hold droop and no v_high to tell a load from a buffer"
	}
	return d
}

// droopHides says a hold without a significant droop still admits the load that v_high
// would imply without a buffer (rho = v_high/(Vs - v_high), tau_h = tau_c (1 + rho)):
// the hold fit's interval for tau_h reaches down to it, so "no load" is not shown.
func droopHides(ev plantEvidence) bool {
	if math.IsNaN(ev.supply) || ev.supply <= 0 || !ev.vHigh.known() || ev.vHigh.v >= ev.supply || !ev.tauC.known() {
		return false
	}
	if ev.supply-ev.vHigh.v <= math.Max(ev.supplyTol*ev.supply, 2*ev.lsb) {
		return false
	}
	rho := ev.vHigh.v / (ev.supply - ev.vHigh.v)
	implied := ev.tauC.v * (1 + rho)
	return !math.IsNaN(ev.tauH.lo) && ev.tauH.lo <= implied
}
