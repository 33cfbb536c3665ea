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
// and its variance follows from the fit's (delta method over step_c and a). step_c is
// the mean step of the charge fit's own pairs (Accumulator.fits[2]), so its variance is
// their residual variance over their count, whichever fit gives a: a run fit's S2 is
// the reading noise sigma^2 (a pair's residual n[k+1] - a n[k] has (1 + a^2) sigma^2)
// and its N counts readings of the runs, not those pairs. (Treating the pairs as
// independent is conservative: the steps of consecutive pairs telescope.) The readings
// that chose a drive carry its selection in their noise (a discharge reading sits above
// the setpoint more often), but S_c and S_d enter V_d only as their sum, the sum of
// every steady reading, in which the selection cancels; their noise, sigma sqrt(N), and
// that of Delta (its two end readings) are added.
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
	s2 := f.S2 // the pairs' residual variance
	if f.Runs {
		s2 = (1 + f.A*f.A) * f.S2
	}
	sig2 := a.noiseEMA / 6 // sigma^2 of one reading
	nr := b.n[0] + b.n[2]
	se := math.Sqrt(dc0*dc0*s2/s.n + da*da*f.SeA*f.SeA + sig2*(nr+2/(oma*oma))/(nd*nd))
	q := tQuantile(math.Min(s.n-2, f.dof())) * se
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

// sharedSEScale widens the standard error of dischargeSharedFactor: over 100 seeds of a
// three-state follower loop (12 bit, tau 167 T, TestDischargeSharedFactor's) both of its
// parts, the discharge run's own and the charge's factor, scattered 1.2 times the
// standard errors their run fits give (91 % inside the unscaled 95 % interval; scaled,
// 94 of 100 other seeds).
const sharedSEScale = 1.25

// dischargeSharedFactor returns the discharge asymptote, in counts with its 95 %
// interval, of the discharge fit taken at the charge fit's factor, or unknown().
//
// The pin charges and discharges the node through the same resistor, so both drives
// decay with one factor a (with a load or a follower's base: tau = C (R || R_load)).
// A three-state loop discharges only after a setpoint step down, one run of a few tens
// of readings over a small part of its decay: fitted on its own, a and the asymptote
// trade against each other and the asymptote, far below the run, is known only within
// tens of counts. The charge, recurring all through the capture, pins a far better.
// Conditioned on it (the fit's (a, V_inf) estimate linearised, as its interval already
// is): V = V_inf + (cov/var_a)(a_c - a), with variance var_V - cov^2/var_a (what the
// discharge's own readings leave) plus (cov/var_a)^2 var(a_c). The first part comes
// from the discharge's readings alone, the second from the charge's: independent.
// Used only when the charge's factor is the tighter one, the two agree (disagree: a
// board with separate charge and discharge resistors keeps the discharge's own fit)
// and the discharge's fit is its own: the joint fit's discharge (selected pairs near the
// threshold, its instrument a prediction) was found to scatter 1.7 times its standard
// error about the truth once lent a run fit's factor (100 seeds of a two-state follower
// loop, 84 % inside its 95 % interval), where the balance (dischargeFromBalance) holds.
// The standard error is scaled by sharedSEScale.
func dischargeSharedFactor(pf plantFit) interval {
	if !pf.ok[0] || !pf.ok[2] || pf.joint[0] {
		return unknown()
	}
	d, c := pf.fit[0], pf.fit[2]
	if !(d.A > 0 && d.A < 1 && c.A > 0 && c.A < 1) || !(d.SeA > 0) || !(c.SeA < d.SeA) {
		return unknown()
	}
	if disagree(d.A, d.SeA, c.A, c.SeA) {
		return unknown()
	}
	varA := d.SeA * d.SeA
	beta := d.CovAV / varA
	own := max(d.SeVInf*d.SeVInf-d.CovAV*d.CovAV/varA, 0)
	v := d.VInf + beta*(c.A-d.A)
	q := sharedSEScale * tQuantile(math.Min(d.dof(), c.dof())) * math.Sqrt(own+beta*beta*c.SeA*c.SeA)
	if math.IsNaN(v) || math.IsNaN(q) {
		return unknown()
	}
	return interval{v, v - q, v + q}
}
