package analysis

import (
	"math"

	"github.com/caploop/caploop/telemetry"
)

// jointSums is the joint fit of charge and discharge with one shared per-period factor,
// for loops where no run of one drive lies far enough from the threshold for a fit of
// its own (a fast loop chattering around its setpoint, tau of a few sample periods, or
// below one).
//
// The pin drives the node through the same resistor whether it charges or discharges
// (a push-pull output, or a pin that floats to hold), so both drives decay with the one
// factor a = exp(-T / tau), tau = C (R || R_load): the charge heads for the Thevenin
// level V_hi, the discharge for ground,
//
//	charge:    V[k+1] = a V[k] + (1 - a) V_hi
//	discharge: V[k+1] = a V[k]                    (+ (1 - a) V_lo, V_lo = 0)
//
// Seen at similar levels v, the two steps (1 - a)(V_hi - v) and -(1 - a) v give a and
// V_hi even when v barely moves between pairs of one drive: the discharge's asymptote is
// known, so its pairs fix a by the ratio of the levels, and the charge's then fix V_hi.
//
// Two estimates come from the same sums (see ivSums.jointFit): the free one (a shared, both
// asymptotes fitted, from the spread of the levels within each drive) needs no
// assumption about the discharge's asymptote; the grounded one (V_lo = 0 counts) works
// at a single pair of levels. The free one is used when its tau is identifiable, the
// grounded one otherwise, and only while the free one does not show the discharge
// heading elsewhere (a follower's sense point heads below ground).
//
// Selection is that of fit.go: a pair (V[k] -> V[k+1]) under drive u[k] enters only when
// the reading before it, V[k-1], under its own drive u[k-1], could not bring V[k] within
// reach of the threshold (4 sigma of noise and MarginCounts beyond the predicted step,
// plus 3 standard errors of the prediction or 2 % of the step, and half a count), so
// u[k] did not depend on the noise of V[k]. The instrument is that prediction of V[k]
// from V[k-1] and u[k-1]: like the lagged reading of fit.go it is independent of the
// noise of V[k] and V[k+1], and it follows V[k] within each drive even where the lagged
// reading does not (after a charge, the first discharge starts high from a low reading;
// after a discharge, the next starts lower from a high one). The step is predicted from
// the joint fit itself once it is known within 20 %; before that, from a pilot fit over
// every charge and discharge pair with the lagged reading as its instrument (biased by
// the selection near the threshold, so its step gets 10 % of room while more than 5 %
// of its pairs lay near the threshold).
type jointSums struct {
	main  [3]ivSums // discharge, (unused), charge: the selected pairs, instrument the predicted V[k]
	pilot [3]ivSums // every charge and discharge pair, instrument V[k-1], until main has a model

	// near counts the pilot's pairs whose reading chose its drive within the guard of
	// the threshold: where the selection biases the noise.
	near float64

	// The step model of the selection: a = 1 - om (standard error seA), targets tgt[0]
	// (discharge) and tgt[2] (charge) with their standard errors seT; frac is the
	// share of the step allowed for a bias of the model: 2 %, or 10 % while the model
	// is the pilot's and more than 5 % of its pairs lay near the threshold. ok once a
	// model is known, fromMain once it comes from main.
	om, seA  float64
	tgt, seT [3]float64
	frac     float64
	ok       bool
	fromMain bool
	// guard is the room kept from the threshold for the noise: 4 sigma of the model's
	// residual noise and MarginCounts (the accumulator's guard reads the noise from
	// second differences within runs of one drive, which a fast loop has few of and
	// curves through).
	guard float64
	// seen is the number of pairs (main and pilot) at the last refresh: the model is
	// refreshed when 16 pairs and an eighth more have come since.
	seen float64
}

// groundSigma is the standard uncertainty of the reading of ground, counts, that the
// grounded estimate carries into its interval: a converter's offset error (within 1-2
// LSB for the usual successive-approximation converters, from memory).
const groundSigma = 1.0

// add takes the pair (p1 -> y) under p1's drive (a charge or a discharge), with the
// instrument p2 (both off the rails, contiguous); guard stands in for the model's own
// until there is one.
func (j *jointSums) add(p2, p1 *memo, y, guard float64) {
	if j.ok {
		guard = j.guard
	}
	d := int(p1.u) + 1
	if !j.fromMain {
		j.pilot[d].add(p2.pv, p1.pv, y)
		if (d == 2 && p1.pv+guard > p1.sp-p1.db) || (d == 0 && p1.pv-guard < p1.sp+p1.db) {
			j.near++
		}
	}
	if !j.ok || p2.u == telemetry.Hold {
		// A hold before a charge or a discharge: the reading had just left the band,
		// near its edge.
		return
	}
	// The predicted step, with 3 standard errors of it (bounded above by the sum of the
	// two terms) or the bias allowance, half a count and the guard as slack.
	// (Plain comparisons: the float max builtin's NaN and signed-zero rules cost more
	// than the rest of the selection here.)
	u2 := int(p2.u) + 1
	dv := j.tgt[u2] - p2.pv
	v := p2.pv + j.om*dv
	adv := math.Abs(dv)
	slack := 3 * (adv*j.seA + j.om*j.seT[u2])
	if b := j.frac * j.om * adv; b > slack {
		slack = b
	}
	// The threshold is sp - db for a charge, sp + db for a discharge: with s = +1 and
	// -1 (the drive's value), V[k] must lie beyond it on its side by the slack.
	if s := float64(p1.u); s*(p1.sp-v)-p1.db > slack+0.5+guard {
		j.main[d].add(v, p1.pv, y)
	}
}

// refresh updates the step model of the selection (called every 64 samples, it works
// when enough new pairs came: see seen); margin is Options.MarginCounts.
func (j *jointSums) refresh(margin float64) {
	n := j.main[0].n + j.main[2].n + j.pilot[0].n + j.pilot[2].n
	if n < j.seen+max(16, j.seen/8) {
		return
	}
	j.seen = n
	r, ok := j.main[0].jointFit(&j.main[2], false)
	j.fromMain = ok && r.model()
	frac := 0.02
	if !j.fromMain {
		r, ok = j.pilot[0].jointFit(&j.pilot[2], false)
		if !ok || !r.model() {
			return
		}
		if j.near > 0.05*(j.pilot[0].n+j.pilot[2].n) {
			frac = 0.1
		}
	}
	j.om, j.seA, j.frac, j.ok = 1-r.fit[0].A, r.fit[0].SeA, frac, true
	// The residual of y - a x - b is n[k+1] - a n[k]: its variance is (1 + a^2) sigma^2.
	f0, f2 := r.fit[0], r.fit[2]
	s2 := (f0.S2*(f0.N-2) + f2.S2*(f2.N-2)) / (f0.N + f2.N - 4)
	j.guard = 4*math.Sqrt(s2/(1+f0.A*f0.A)) + margin
	for _, d := range []int{0, 2} {
		j.tgt[d], j.seT[d] = r.fit[d].VInf, r.fit[d].SeVInf
	}
	if r.grounded {
		j.seT[0] = groundSigma
	}
}

// jointResult is the joint fit: per drive (0 discharge, 2 charge) a fitResult with the
// shared A and SeA, its own N, B, VInf and S2 (its residual variance, so that the noise
// pools as the per-drive fits do); grounded says the discharge's asymptote was taken as
// ground, not fitted; why says why there is none.
type jointResult struct {
	fit      [3]fitResult
	grounded bool
	why      string
}

// model says the result is good enough to predict the steps of the selection: 1 - a
// known within 20 % (one standard error).
func (r jointResult) model() bool {
	f := r.fit[2]
	return f.A > 0 && f.A < 1 && f.SeA < 0.2*(1-f.A) && !math.IsNaN(f.VInf) && !math.IsNaN(r.fit[0].VInf)
}

// centred returns the sums about the means: n, the means (offset removed) and the
// centred sums of squares and cross products.
func (f *ivSums) centred() (n, zb, xb, yb, Szz, Sxx, Syy, Szx, Szy, Sxy float64) {
	n = f.n
	zb, xb, yb = f.sz/n, f.sx/n, f.sy/n
	Szz = f.szz - n*zb*zb
	Sxx = f.sxx - n*xb*xb
	Syy = f.syy - n*yb*yb
	Szx = f.szx - n*zb*xb
	Szy = f.szy - n*zb*yb
	Sxy = f.sxy - n*xb*yb
	return n, zb + f.off, xb + f.off, yb + f.off, Szz, Sxx, Syy, Szx, Szy, Sxy
}

// about returns the raw sums of products of the values less L (counts).
func (f *ivSums) about(L float64) (Rzz, Rxx, Ryy, Rzx, Rzy, Rxy float64) {
	d := f.off - L
	nd2 := f.n * d * d
	Rzz = f.szz + 2*d*f.sz + nd2
	Rxx = f.sxx + 2*d*f.sx + nd2
	Ryy = f.syy + 2*d*f.sy + nd2
	Rzx = f.szx + d*(f.sz+f.sx) + nd2
	Rzy = f.szy + d*(f.sz+f.sy) + nd2
	Rxy = f.sxy + d*(f.sx+f.sy) + nd2
	return
}

// jointFit fits the discharge sums dis and the charge sums ch (the receiver is dis)
// with a shared factor a. With the instrument z of the sums (the predicted level for
// main, the lagged reading for the pilot), the free estimate is
//
//	a = (Szy_c + Szy_d) / (Szx_c + Szx_d)                  (centred sums per drive)
//	var(a) = s^2 (Szz_c + Szz_d) / (Szx_c + Szx_d)^2,  s^2 = sum of squared residuals / (n - 3)
//
// and the grounded one, with the discharge's asymptote at 0 counts (its sums raw, about 0),
//
//	a = (Szy_c + Rzy_d) / (Szx_c + Rzx_d)
//	var(a) = s^2 (Szz_c + Rzz_d) / (Szx_c + Rzx_d)^2 + ((1 - a) Rz_d / (Szx_c + Rzx_d))^2 groundSigma^2
//
// (the last term: the reading of ground is known within groundSigma). Each asymptote
// is (ybar - a xbar) / (1 - a), its variance (s^2/n + (xbar - VInf)^2 var(a)) / (1 - a)^2
// (delta method); N is the drive's own pairs, so the intervals of the summary take
// Student's t of the smaller count. The free estimate is taken when tau's 95 % interval
// is within 10 % (identifiable);
// otherwise the grounded one, unless the free one puts the discharge's asymptote more
// than 2 counts from ground, or the two drives' own fits of these pairs show different
// factors (separate resistors for charge and discharge), beyond zCheck standard errors.
// ok is false with fewer than 8 pairs of either drive.
func (dis *ivSums) jointFit(ch *ivSums, strict bool) (r jointResult, ok bool) {
	if dis.n < 8 || ch.n < 8 {
		r.why = "too few charge and discharge pairs away from the threshold"
		return r, false
	}
	if strict && differ(ch, dis) {
		r.why = "charge and discharge decay at different rates (separate resistors?)"
		return r, false
	}
	nc, _, xc, yc, Szzc, Sxxc, Syyc, Szxc, Szyc, Sxyc := ch.centred()
	nd, zd, xd, yd, Szzd, Sxxd, Syyd, Szxd, Szyd, Sxyd := dis.centred()
	ssr := func(a, Syy, Sxy, Sxx float64) float64 { return math.Max(0, Syy-2*a*Sxy+a*a*Sxx) }
	// asym returns the asymptote and its standard error of a drive with means xb, yb.
	asym := func(a, varA, s2, n, xb, yb float64) (v, se float64) {
		v = (yb - a*xb) / (1 - a)
		d := xb - v
		return v, math.Sqrt(s2/n+d*d*varA) / (1 - a)
	}
	set := func(d int, a, varA, n, xb, yb, ss, s2 float64) {
		f := fitResult{N: n, A: a, SeA: math.Sqrt(varA), S2: ss / math.Max(n-2, 1)}
		f.VInf, f.SeVInf = asym(a, varA, s2, n, xb, yb)
		f.CovAV = (f.VInf - xb) * varA / (1 - a) // dVInf/da = (VInf - xbar)/(1 - a)
		f.B = f.VInf * (1 - a)
		r.fit[d] = f
	}

	// The free estimate.
	if den := Szxc + Szxd; den > 0 && Szzc+Szzd > 0 {
		a := (Szyc + Szyd) / den
		ssc, ssd := ssr(a, Syyc, Sxyc, Sxxc), ssr(a, Syyd, Sxyd, Sxxd)
		s2 := (ssc + ssd) / (nc + nd - 3)
		varA := s2 * (Szzc + Szzd) / (den * den)
		if a > 0 && a < 1 {
			fr := fitResult{N: nc + nd, A: a, SeA: math.Sqrt(varA)}
			if identifiable(fr, strict) {
				set(2, a, varA, nc, xc, yc, ssc, s2)
				set(0, a, varA, nd, xd, yd, ssd, s2)
				return r, true
			}
		}
		// The discharge's intercept b = ybar - a xbar is (1 - a) V_lo: ground gives 0.
		// Tested in the intercept, linear in a (the asymptote's delta method fails when
		// a is barely known), against 2 counts of asymptote; not on the pilot (its
		// selection biases the check).
		b := yd - a*xd
		seB := math.Sqrt(s2/nd + xd*xd*varA)
		if strict && math.Abs(b)-zCheck*seB > 2*math.Abs(1-a) {
			r.why = "the discharge heads away from ground (a follower?) and its runs are too short to fit it"
			return r, false
		}
	}

	// The grounded estimate.
	Rzz, Rxx, Ryy, Rzx, Rzy, Rxy := dis.about(0)
	den := Szxc + Rzx
	if den <= 0 {
		r.why = "the charge and discharge pairs do not determine the time constant"
		return r, false
	}
	a := (Szyc + Rzy) / den
	if !(a > 0 && a < 1) {
		r.why = "the joint fit of charge and discharge shows no decay"
		return r, false
	}
	ssc, ssd := ssr(a, Syyc, Sxyc, Sxxc), ssr(a, Ryy, Rxy, Rxx)
	s2 := (ssc + ssd) / (nc + nd - 2)
	g := (1 - a) * nd * zd / den * groundSigma
	varA := s2*(Szzc+Rzz)/(den*den) + g*g
	set(2, a, varA, nc, xc, yc, ssc, s2)
	r.fit[0] = fitResult{N: nd, A: a, SeA: math.Sqrt(varA), S2: ssd / math.Max(nd-2, 1)}
	r.grounded = true
	return r, true
}

// identifiable applies tauOK (the 10 % rule on tau's 95 % interval) to a fit without
// the cost of Student's t quantile where the answer does not depend on it: with 30 or
// more degrees of freedom the quantile lies between 1.96 and 2.05 (2.042 at 30), so an
// interval within the rule at 2.05 is within it, and one outside it at 1.96 is outside.
// Between the two, exact takes the quantile (the summary's rule), else 2 (the step
// model of the selection, refreshed as the pairs come).
func identifiable(f fitResult, exact bool) bool {
	at := func(q float64) bool {
		lo, hi := f.A-q*f.SeA, f.A+q*f.SeA
		i := interval{tauOf(f.A, 1), tauOf(lo, 1), math.Inf(1)}
		if math.IsNaN(i.lo) {
			i.lo = 0
		}
		if hi < 1 {
			i.hi = tauOf(hi, 1)
		}
		ok, _ := tauOK(i)
		return ok
	}
	if f.N-2 >= 30 {
		if at(2.05) {
			return true
		}
		if !at(1.96) {
			return false
		}
	}
	if !exact {
		return at(2)
	}
	ok, _ := tauOK(tauInterval(f))
	return ok
}

// zCheck is the normal quantile of the checks of the joint fit's assumptions (a shared
// factor, a discharge heading for ground): 3.3 standard errors, a false alarm in about
// one capture in a thousand.
const zCheck = 3.3

// disagree says two factors differ by more than zCheck standard errors of their
// difference and 1 % of 1 - a.
func disagree(a1, se1, a2, se2 float64) bool {
	d := math.Abs(a1 - a2)
	return d > zCheck*math.Hypot(se1, se2) && d > 0.01*(1-(a1+a2)/2)
}

// differ says the drives' own fits of the pairs show different factors.
func differ(ch, dis *ivSums) bool {
	fc, okc := ch.free()
	fd, okd := dis.free()
	return okc && okd && disagree(fc.A, fc.SeA, fd.A, fd.SeA)
}

// fillJoint gives the drives without a fit of their own (pf.ok false), or whose own fit
// leaves tau unidentifiable (its interval wider than the 10 % rule), the joint fit when
// that identifies tau; a drive whose own fit identifies tau keeps it. The joint fit is
// not used when its factor disagrees with a drive's own fit (see disagree), or its
// charge asymptote lies above the supply (with the supply's tolerance and 2 counts,
// beyond zCheck standard errors).
//
// What no check here can see: in a chatter whose levels do not spread, a charge slower
// than the discharge (a larger resistor on the charge path of a three-state board with
// two switches) looks like a load: the joint factor is then the discharge's.
func (a *Accumulator) fillJoint(pf *plantFit) {
	weak := func(d int) bool {
		if !pf.ok[d] {
			return true
		}
		return !identifiable(pf.fit[d], true)
	}
	r, ok := a.jt.main[0].jointFit(&a.jt.main[2], true)
	if !ok && !weak(0) && !weak(2) {
		return
	}
	if !ok {
		pf.jointWhy = r.why
		return
	}
	for _, d := range []int{0, 2} {
		if f := pf.fit[d]; pf.ok[d] && disagree(f.A, f.SeA, r.fit[d].A, r.fit[d].SeA) {
			pf.jointWhy = "the joint fit of charge and discharge disagrees with the " + driveName(int8(d-1)) + " fit"
			return
		}
	}
	// A charge faster than the discharge (a smaller resistor) shows as a charge
	// asymptote above the supply when fitted with the discharge's factor.
	if m := a.meta; m.Has(telemetry.FieldSupply) && m.Supply > 0 && m.LSB() > 0 {
		top := m.Supply*(1+a.opts.SupplyTol)/m.LSB() + 2
		if f := r.fit[2]; f.VInf-zCheck*f.SeVInf > top {
			pf.jointWhy = "the joint fit puts the charge asymptote above the supply: charge and discharge do not share one time constant (separate resistors?)"
			return
		}
	}
	if !identifiable(r.fit[2], true) {
		// Its tau is not identifiable either: only where a drive has no fit at all.
		for _, d := range []int{0, 2} {
			if !pf.ok[d] {
				pf.fit[d], pf.ok[d], pf.joint[d] = r.fit[d], true, true
			}
		}
		pf.grounded = r.grounded
		return
	}
	for _, d := range []int{0, 2} {
		if weak(d) || tighter(r.fit[d], pf.fit[d]) {
			pf.fit[d], pf.ok[d], pf.joint[d] = r.fit[d], true, true
		}
	}
	pf.grounded = r.grounded
}

// tighter says fit j pins the factor's 1 - a closer (relative standard error) than fit
// f: both drives share the pin's resistor, so where they agree the joint fit of both
// replaces a drive's own wider one.
func tighter(j, f fitResult) bool {
	return j.A < 1 && f.A < 1 && j.SeA/(1-j.A) < f.SeA/(1-f.A)
}
