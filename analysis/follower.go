package analysis

import "math"

// The follower's evidence. Behind an emitter follower the ADC reads s = v - V_BE
// (clipped at 0). In s the follower is exactly a resistive load R_b = (beta+1) R_E to
// ground: a charge heads for (Vs - V_BE) R_b/(R+R_b), a hold drains s towards 0 with
// tau_hold = R_b C, the charge and discharge share tau = C (R || R_b). Only the
// discharge tells it from a plain load: it heads for -V_BE R_b/(R+R_b), below ground,
// so it reaches code 0 while still moving fast and is clipped there (a plain load's
// discharge slows down towards 0). Readings at code 0 are therefore never levels: they
// stay out of every fit (codeSlow) and of the node ripple's trajectory fit.

// dischargeFromBalance returns the discharge asymptote, in counts with its 95 %
// interval, of a two-state loop from the balance of its steady parts, or unknown().
//
// A two-state loop discharges for a sample or two at a time, close to the setpoint, so
// its discharge rarely has a run of its own to fit; but its pin charges and discharges
// through the same resistor, so the discharge has the charge's per-period factor a.
// Over the steady sample pairs (no hold among them), the changes add up to
//
//	Delta = [N_c step_c(xbar_f) + (a - 1)(S_c - N_c xbar_f)] + (1 - a)(N_d V_d - S_d)
//
// where step_c(xbar_f) = ybar_f - xbar_f is the charge fit's mean step at the centre of
// its pairs (its variance s^2/n, independent of a), S and N the sums and counts of the
// readings under each drive (see balance). That is linear in V_d:
//
//	V_d = S_d/N_d + (Delta - charge sum) / (N_d (1 - a))
//
// and its variance follows from the fit's (delta method over step_c and a). The
// readings that chose a drive carry its selection in their noise (a discharge reading
// sits above the setpoint more often), which moves V_d by a fraction of sigma; one
// sigma is added to each side of the interval for it.
func (a *Accumulator) dischargeFromBalance(pf plantFit) interval {
	b := &a.bal
	if b.n[1] > 0 || b.n[0] < 32 || b.n[2] < 32 || !pf.ok[2] {
		return unknown()
	}
	f := pf.fit[2]
	oma := 1 - f.A
	if !(f.A > 0 && oma > 0) || f.SeA > 0.2*oma {
		return unknown()
	}
	s := &a.fits[2]
	if s.n < 8 {
		return unknown()
	}
	xf := s.sx/s.n + s.off
	c0 := (s.sy - s.sx) / s.n // mean step at xbar_f (the offset cancels)
	nc, nd := b.n[2], b.n[0]
	xc := b.s[2] / nc
	charge := nc*c0 - oma*nc*(xc-xf)
	d0 := b.delta - charge
	vd := b.s[0]/nd + d0/(nd*oma)
	// Partial derivatives of V_d with respect to step_c and a.
	dc0 := -nc / (nd * oma)
	da := -nc*(xc-xf)/(nd*oma) + d0/(nd*oma*oma)
	se := math.Sqrt(dc0*dc0*f.S2/f.N + da*da*f.SeA*f.SeA)
	q := tQuantile(f.N-2)*se + math.Sqrt(a.noiseEMA/6)
	if math.IsNaN(vd) || math.IsNaN(q) {
		return unknown()
	}
	return interval{vd, vd - q, vd + q}
}

// lowChargeEvidence returns the charge periods that began and ended within 4 sigma + 1
// count of code 0 (lowZ), when a plain load could not have stayed there: the charge
// fit's step from 0 (its b, counts) is above lowZ + 4 sigma. A plain load's level is
// never below 0, so one charge lifts it by at least b and its reading leaves that zone
// at the first charge; behind a follower a discharged node must first climb to V_BE
// under charge while the sense point reads 0. 0 when the fit cannot tell.
func (a *Accumulator) lowChargeEvidence(pf plantFit) float64 {
	f := pf.fit[2]
	if !pf.ok[2] || !(f.A > 0 && f.A < 1) || f.B <= a.lowZ+4*math.Sqrt(a.noiseEMA/6) {
		return 0
	}
	return float64(a.lowCharges)
}

// narrower returns the known one of x and y with the narrower interval.
func narrower(x, y interval) interval {
	switch {
	case !y.known() || math.IsNaN(y.lo) || math.IsNaN(y.hi):
		return x
	case !x.known() || math.IsNaN(x.lo) || math.IsNaN(x.hi):
		return y
	case y.halfWidth() < x.halfWidth():
		return y
	}
	return x
}
