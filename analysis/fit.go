package analysis

import (
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// ivSums holds the streaming sums of the first-order fit
//
//	y = a x + b,   x = pv[k], y = pv[k+1], instrument z = pv[k-1]
//
// over sample triples taken while the drive was constant. Values are stored minus a fixed
// offset to keep the sums small.
//
// The plant identification fits V[k+1] = a V[k] + b (counts) separately for each drive
// over sample pairs where the drive was constant, with an instrumental variable: the
// regressor V[k] is a noisy reading, and ordinary least squares would shrink a towards 0
// by var(noise)/var(V) (errors in variables), which matters because tau = -T / ln a is
// very sensitive to a near 1. The lagged reading V[k-1] is used as the instrument
//
//	a = sum (z - zbar)(y - ybar) / sum (z - zbar)(x - xbar),   z = V[k-1], x = V[k], y = V[k+1]
//
// which is consistent because the ADC noise of V[k-1] is independent of the noise in
// V[k] and V[k+1]. The selection of pairs must not look at the noise of V[k] or
// V[k+1] either: selecting "charge" selects negative noise in the reading that chose it.
// So a pair enters only when V[k-1] was so far from the controller's switching
// threshold that V[k] could not reach it: the range V[k] can take from V[k-1] under
// the drive chosen after V[k-1] (from the fit so far, or from the running mean step
// before there is one), widened by 4 sigma of the running noise estimate and
// MarginCounts, stays below the threshold (above it for discharge). No reading may be
// at an ADC rail, and no sample missing.
type ivSums struct {
	n             float64
	sz, sx, sy    float64
	szz, sxx, syy float64
	szx, szy, sxy float64
	off           float64
	offSet        bool
	minX, maxX    float64
}

func (f *ivSums) add(z, x, y float64) {
	if !f.offSet {
		f.off, f.offSet = x, true
		f.minX, f.maxX = x, x
	}
	if x < f.minX {
		f.minX = x
	}
	if x > f.maxX {
		f.maxX = x
	}
	z -= f.off
	x -= f.off
	y -= f.off
	f.n++
	f.sz += z
	f.sx += x
	f.sy += y
	f.szz += z * z
	f.sxx += x * x
	f.syy += y * y
	f.szx += z * x
	f.szy += z * y
	f.sxy += x * y
}

// fitResult is one identified first-order drive: V[k+1] = A V[k] + B (counts).
type fitResult struct {
	N      float64
	A, SeA float64
	B      float64
	// VInf is the asymptote B/(1-A) in counts with its standard error.
	VInf, SeVInf float64
	// CovAV is the covariance of A and VInf (counts): what a better-known A moves VInf
	// by (dischargeSharedFactor). 0 when the fit does not give it.
	CovAV float64
	// S2 is the residual variance (counts^2).
	S2 float64
	// Runs marks a fit of the runs' trajectories (runFit): its residuals are readings
	// about the fitted level (variance sigma^2), with Dof degrees of freedom. Otherwise
	// the pair fit's: residual n[k+1] - a n[k], N - 2 degrees of freedom.
	Runs bool
	Dof  float64
}

// dof returns the residual degrees of freedom.
func (r fitResult) dof() float64 {
	if r.Runs {
		return r.Dof
	}
	return r.N - 2
}

// noiseSS returns the fit's share of the noise estimate: the sum of squares of the
// reading noise its residuals show, and its degrees of freedom.
func (r fitResult) noiseSS() (ss, dof float64) {
	if r.Runs {
		return r.S2 * r.Dof, r.Dof
	}
	// The residual of y - a x - b is n[k+1] - a n[k]: its variance is (1 + a^2) sigma^2.
	return r.S2 * (r.N - 2) / (1 + r.A*r.A), r.N - 2
}

// free fits a and b with the lagged instrument:
//
//	a = Szy / Szx,  b = ybar - a xbar       (S.. centred cross sums)
//	var(a) = s^2 Szz / Szx^2
//	s^2 = (Syy - 2 a Sxy + a^2 Sxx) / (n - 2)
//
// ok is false with fewer than 8 triples or a degenerate instrument.
func (f *ivSums) free() (r fitResult, ok bool) {
	if f.n < 8 {
		return r, false
	}
	n := f.n
	zb, xb, yb := f.sz/n, f.sx/n, f.sy/n
	Szz := f.szz - n*zb*zb
	Sxx := f.sxx - n*xb*xb
	Syy := f.syy - n*yb*yb
	Szx := f.szx - n*zb*xb
	Szy := f.szy - n*zb*yb
	Sxy := f.sxy - n*xb*yb
	if Szx <= 0 || Sxx <= 0 || Szz <= 0 {
		return r, false
	}
	a := Szy / Szx
	b := yb - a*xb
	ss := Syy - 2*a*Sxy + a*a*Sxx
	if ss < 0 {
		ss = 0
	}
	s2 := ss / (n - 2)
	varA := s2 * Szz / (Szx * Szx)
	r = fitResult{N: n, A: a, SeA: math.Sqrt(varA), S2: s2}
	r.B = b + f.off*(1-a) // undo the offset: y' = a x' + b with y' = y-off
	if a < 1 {
		vinf := b / (1 - a)
		// var(VInf) = (s^2/n + (xbar - VInf)^2 var(a)) / (1-a)^2  (delta method)
		d := xb - vinf
		r.SeVInf = math.Sqrt((s2/n + d*d*varA) / ((1 - a) * (1 - a)))
		// dVInf/da = (VInf - xbar)/(1 - a); ybar is uncorrelated with a.
		r.CovAV = -d * varA / (1 - a)
		r.VInf = vinf + f.off
	} else {
		r.VInf = math.NaN()
		r.SeVInf = math.NaN()
	}
	return r, true
}

// tQuantile returns the two-sided 95 % quantile of Student's t with dof degrees of freedom.
func tQuantile(dof float64) float64 {
	if dof < 1 {
		return math.NaN()
	}
	if dof > 1e6 {
		return 1.959963984540054
	}
	return distuv.StudentsT{Mu: 0, Sigma: 1, Nu: dof}.Quantile(0.975)
}

// tauOf returns the time constant of a per-period factor a: tau = -T / ln a, NaN unless
// 0 < a < 1.
func tauOf(a, period float64) float64 {
	if !(a > 0 && a < 1) {
		return math.NaN()
	}
	return -period / math.Log(a)
}

// tauCI returns the 95 % interval of tau from a and its standard error; the upper end is
// +Inf when the interval of a reaches 1.
func tauCI(r fitResult, period float64) [2]float64 {
	q := tQuantile(r.dof())
	lo, hi := r.A-q*r.SeA, r.A+q*r.SeA
	tl := tauOf(lo, period)
	th := math.Inf(1)
	if hi < 1 {
		th = tauOf(hi, period)
	}
	if math.IsNaN(tl) {
		tl = 0
	}
	return [2]float64{tl, th}
}
