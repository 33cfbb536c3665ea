package analysis

import "math"

// The trajectory fit of the runs of one drive. The pair fit (ivSums) sees each reading
// only through its difference from the previous one, a couple of counts against the
// noise when tau is many sample periods, so it needs thousands of pairs to pin a near 1.
// A run of readings V[0..m-1] under one constant drive follows
//
//	V[k] = VInf + c a^k,   c = V[0] - VInf
//
// and its curvature pins a far better. a and VInf are shared by every run of the drive,
// c belongs to the run. The readings of a run are the pairs of ivSums that follow each
// other (the same selection: readings the controller's threshold could not have chosen
// their drive on, off the rails, no sample missing), held in a buffer of at most
// runChunk readings; a longer run is fitted in chunks, each with its own c.
//
// Only runs of at least runMinOwn readings enter. Where a run ends depends on its own
// readings (each is the instrument that admits the next pair): a stopping rule, harmless
// to a long run but not to the runs of two or three readings of a limit cycle, whose
// last reading it selects (with them, over 300 seeds of a two-state loop at tau 27 T,
// the fit put tau 1.9 % high and the pair fit, whose every pair is admitted by the
// reading before it, 0.1 %). Those are left to the pair fit. Over 200 seeds, tau from a
// single run is off by -0.15 % on average with 16 readings, -0.11 % with 50.
//
// The long runs are kept whole (runPool readings at most) and fitted together with the
// sums by Gauss-Newton on (a, VInf), each run's c eliminated (Schur complement). When
// that fit pins a within 2 % (1 sigma of 1 - a), or the pool is full, every pooled run
// is linearised there and folded into the normal equations of (a, VInf),
//
//	SSR(theta) = s0 - 2 g'theta + theta' H theta,
//
// which carry it on as a quadratic: the memory is the pool and a few sums, whatever the
// stream's length.
type runFit struct {
	buf     []float64 // the open run's readings, oldest first
	lastN   int64     // sample number of buf's last reading
	pool    []float64 // long runs kept whole until the fit pins a (readings, run after run)
	lens    []int     // their lengths
	sums    runSums
	skipped int64  // pooled runs dropped with no fit to linearise them at
	last    runRef // the last joint fit: where the next one starts
	// The fit of the closed runs, kept until a run closes (result without an open
	// long run returns it).
	cache            fitResult
	cacheOK, cacheOn bool
}

// runChunk is the most readings one run holds before it is fitted as a chunk.
const runChunk = 2048

// runMinOwn is the shortest run that enters the fit.
const runMinOwn = 12

// runPool is the most readings the runs kept whole may hold.
const runPool = 3 * runChunk

// runSums are the normal equations of theta = (a - aRef, VInf - off), summed over runs.
type runSums struct {
	h00, h01, h11 float64
	g0, g1        float64
	s0            float64
	n, runs       float64
	aRef, off     float64
	refSet        bool
}

// runRef is a point to linearise runs at when the fit has none: the pair fit.
type runRef struct {
	a, vinf float64
	ok      bool
}

// add appends the pair x -> y ending at sample i. A pair that does not continue the open
// run closes it; a full buffer closes it too, and the run goes on in a new chunk from y.
func (r *runFit) add(i int64, x, y float64, ref runRef) {
	if cont := len(r.buf) > 0 && i-1 == r.lastN; !cont || len(r.buf) >= runChunk {
		r.close(ref)
		if !cont {
			r.buf = append(r.buf, x)
		}
	}
	r.buf = append(r.buf, y)
	r.lastN = i
}

// close adds the open run, when it is long enough, to the pool and empties the buffer.
// The pool is refitted with the sums; when that fit pins a within 2 % (1 sigma of
// 1 - a), or the pool is full, each pooled run is linearised there (at ref when there is
// no fit) and folded into the sums.
func (r *runFit) close(ref runRef) {
	y := r.buf
	r.buf = r.buf[:0]
	if len(y) < runMinOwn {
		return
	}
	r.pool = append(r.pool, y...)
	r.lens = append(r.lens, len(y))
	r.cacheOn = false
	f, ok := r.joint(nil, ref)
	full := len(r.pool) > runPool-runChunk
	if !full && !(ok && f.SeA <= 0.02*(1-f.A)) {
		return
	}
	p := runRef{a: f.A, vinf: f.VInf, ok: ok}
	if !ok {
		p = ref
	}
	off := 0
	for _, m := range r.lens {
		if p.ok {
			r.sums.add(contribAt(r.pool[off:off+m], p.a, p.vinf), m)
		} else {
			r.skipped++
		}
		off += m
	}
	r.pool, r.lens = r.pool[:0], r.lens[:0]
}

// result returns the fit of every run so far, the open one included (without closing it).
func (r *runFit) result(ref runRef) (fitResult, bool) {
	if len(r.buf) >= runMinOwn {
		return r.joint(r.buf, ref)
	}
	if !r.cacheOn {
		r.cache, r.cacheOK = r.joint(nil, ref)
		r.cacheOn = true
	}
	return r.cache, r.cacheOK
}

// joint fits the sums, the pooled runs and extra (one more long run, or nil) together:
// Gauss-Newton on (a, VInf), each run's c eliminated, from the sums' own solution, else
// the last joint fit, else the own fit of the longest run, else ref; each step halved
// until the residual sum of squares goes down.
func (r *runFit) joint(extra []float64, ref runRef) (fitResult, bool) {
	runs := r.runList(extra)
	if len(runs) == 0 {
		return r.sums.solve()
	}
	var a, v float64
	if f, ok := r.sums.solve(); ok && f.A > 0 && f.A < 1 {
		a, v = f.A, f.VInf
	} else if r.last.ok {
		a, v = r.last.a, r.last.vinf
	} else {
		long := runs[0]
		for _, y := range runs {
			if len(y) > len(long) {
				long = y
			}
		}
		var found bool
		if a, v, found = ownFit(long); !found {
			if !ref.ok {
				return fitResult{}, false
			}
			a, v = ref.a, ref.vinf
		}
	}
	n, nr := r.sums.n, r.sums.runs
	for _, y := range runs {
		n += float64(len(y))
		nr++
	}
	// total linearises everything at (a, v): H, the step direction g and the SSR.
	total := func(a, v float64) (h00, h01, h11, g0, g1, ssr float64) {
		s := &r.sums
		if s.refSet {
			t0, t1 := a-s.aRef, v-s.off
			ht0, ht1 := s.h00*t0+s.h01*t1, s.h01*t0+s.h11*t1
			h00, h01, h11 = s.h00, s.h01, s.h11
			g0, g1 = s.g0-ht0, s.g1-ht1
			ssr = s.s0 - 2*(s.g0*t0+s.g1*t1) + t0*ht0 + t1*ht1
		}
		for _, y := range runs {
			c := contribAt(y, a, v)
			h00 += c.h00
			h01 += c.h01
			h11 += c.h11
			g0 += c.g0
			g1 += c.g1
			ssr += c.ssr
		}
		return
	}
	h00, h01, h11, g0, g1, ssr := total(a, v)
	for it := 0; it < 50; it++ {
		det := h00*h11 - h01*h01
		if !(det > 0) {
			return fitResult{}, false
		}
		da := (h11*g0 - h01*g1) / det
		dv := (h00*g1 - h01*g0) / det
		// The step's predicted decrease of the SSR, g'H^-1 g: done when it is nothing.
		if g0*da+g1*dv <= 1e-10*ssr+1e-24 {
			break
		}
		moved := false
		for half := 0; half < 20; half++ {
			na, nv := a+da, v+dv
			if na > 0 && na < 1 {
				n00, n01, n11, ng0, ng1, nssr := total(na, nv)
				if nssr <= ssr {
					moved = math.Abs(da) > 1e-12*(1-a) || math.Abs(dv) > 1e-9
					a, v = na, nv
					h00, h01, h11, g0, g1, ssr = n00, n01, n11, ng0, ng1, nssr
					break
				}
			}
			da, dv = da/2, dv/2
		}
		if !moved {
			break
		}
	}
	dof := n - nr - 2
	det := h00*h11 - h01*h01
	if n < 8 || dof < 1 || !(det > 0) {
		return fitResult{}, false
	}
	r.last = runRef{a: a, vinf: v, ok: true}
	s2 := ssr / dof
	f := fitResult{N: n, A: a, SeA: math.Sqrt(s2 * h11 / det), VInf: v, SeVInf: math.Sqrt(s2 * h00 / det),
		CovAV: -s2 * h01 / det, S2: s2, Dof: dof, Runs: true}
	f.B = v * (1 - a)
	return f, true
}

// runList returns the pooled runs and extra as slices.
func (r *runFit) runList(extra []float64) [][]float64 {
	if len(r.lens) == 0 && len(extra) == 0 {
		return nil
	}
	out := make([][]float64, 0, len(r.lens)+1)
	off := 0
	for _, m := range r.lens {
		out = append(out, r.pool[off:off+m])
		off += m
	}
	if len(extra) > 0 {
		out = append(out, extra)
	}
	return out
}

// add adds one linearised run of m readings to the sums.
func (s *runSums) add(c runContrib, m int) {
	if !s.refSet {
		s.aRef, s.off, s.refSet = c.a, c.v, true
	}
	t0, t1 := c.a-s.aRef, c.v-s.off
	ht0 := c.h00*t0 + c.h01*t1
	ht1 := c.h01*t0 + c.h11*t1
	s.h00 += c.h00
	s.h01 += c.h01
	s.h11 += c.h11
	s.g0 += c.g0 + ht0
	s.g1 += c.g1 + ht1
	s.s0 += c.ssr + 2*(c.g0*t0+c.g1*t1) + t0*ht0 + t1*ht1
	s.n += float64(m)
	s.runs++
}

// solve returns the fit of the runs added so far: theta = H^-1 g, the residual variance
// SSR / (n - runs - 2) and the standard errors from s^2 H^-1. ok is false with fewer than
// 8 readings, no residual degrees of freedom or a singular H.
func (s *runSums) solve() (r fitResult, ok bool) {
	dof := s.n - s.runs - 2
	if s.n < 8 || dof < 1 {
		return r, false
	}
	det := s.h00*s.h11 - s.h01*s.h01
	if !(det > 0) || det < 1e-12*s.h00*s.h11 {
		return r, false
	}
	i00, i01, i11 := s.h11/det, -s.h01/det, s.h00/det
	t0 := i00*s.g0 + i01*s.g1
	t1 := i01*s.g0 + i11*s.g1
	ssr := s.s0 - (s.g0*t0 + s.g1*t1)
	if ssr < 0 {
		ssr = 0
	}
	s2 := ssr / dof
	r = fitResult{N: s.n, A: s.aRef + t0, SeA: math.Sqrt(s2 * i00), VInf: s.off + t1, SeVInf: math.Sqrt(s2 * i11),
		CovAV: s2 * i01, S2: s2, Dof: dof, Runs: true}
	r.B = r.VInf * (1 - r.A)
	return r, true
}

// runContrib is one run linearised at (a, v), its c at the best value for them and then
// eliminated: H (2x2, in a and VInf), g = J'r and the residual sum of squares there.
type runContrib struct {
	a, v          float64
	h00, h01, h11 float64
	g0, g1        float64
	ssr           float64
}

// contribAt linearises the run y at (a, v): f[k] = v + c w[k], w[k] = a^k, with the
// derivatives df/da = c k a^(k-1), df/dv = 1, df/dc = w[k].
func contribAt(y []float64, a, v float64) runContrib {
	// c at its best for (a, v).
	var sw, sww float64
	w := 1.0
	for _, yk := range y {
		sw += w * (yk - v)
		sww += w * w
		w *= a
	}
	c := sw / sww
	var maa, mav, mac, mvv, mvc, mcc, ra, rv, rc, ssr float64
	w, wPrev := 1.0, 0.0 // a^k and a^(k-1)
	for k, yk := range y {
		ja := c * float64(k) * wPrev
		if k == 0 {
			ja = 0
		}
		jc := w
		res := yk - v - c*w
		maa += ja * ja
		mav += ja
		mac += ja * jc
		mvv++
		mvc += jc
		mcc += jc * jc
		ra += ja * res
		rv += res
		rc += jc * res
		ssr += res * res
		wPrev = w
		w *= a
	}
	out := runContrib{a: a, v: v, ssr: ssr}
	out.h00 = maa - mac*mac/mcc
	out.h01 = mav - mac*mvc/mcc
	out.h11 = mvv - mvc*mvc/mcc
	out.g0 = ra - mac*rc/mcc
	out.g1 = rv - mvc*rc/mcc
	return out
}

// profileSSR is the residual sum of squares of the run y for a fixed a, with VInf and c
// at their least-squares values (returned too); NaN when they are not determined.
func profileSSR(y []float64, a float64) (ssr, v, c float64) {
	var sw, sww, sy, swy, syy float64
	w := 1.0
	y0 := y[0]
	for _, yk := range y {
		d := yk - y0
		sw += w
		sww += w * w
		sy += d
		swy += w * d
		syy += d * d
		w *= a
	}
	n := float64(len(y))
	det := n*sww - sw*sw
	if !(det > 1e-12*n*sww) {
		return math.NaN(), math.NaN(), math.NaN()
	}
	v = (sww*sy - sw*swy) / det
	c = (n*swy - sw*sy) / det
	return syy - v*sy - c*swy, v + y0, c
}

// ownFit fits one run alone: the profile SSR over u = ln tau (tau in samples, a =
// exp(-1/tau)) on a coarse grid from 0.2 to 10^6 samples, then a golden-section search
// around its lowest point. found is false when the lowest point is at an end of the grid
// (no curvature to fit) or the profile is undetermined.
func ownFit(y []float64) (a, v float64, found bool) {
	const lo, hi, steps = -1.6094379124341003, 13.815510557964274, 32 // ln 0.2, ln 1e6
	aOf := func(u float64) float64 { return math.Exp(-math.Exp(-u)) }
	f := func(u float64) float64 {
		s, _, _ := profileSSR(y, aOf(u))
		if math.IsNaN(s) {
			return math.Inf(1)
		}
		return s
	}
	h := (hi - lo) / steps
	best, bestU := math.Inf(1), 0
	for i := 0; i <= steps; i++ {
		if s := f(lo + float64(i)*h); s < best {
			best, bestU = s, i
		}
	}
	if bestU == 0 || bestU == steps || math.IsInf(best, 1) {
		return 0, 0, false
	}
	// Golden section on [u-h, u+h].
	const g = 0.6180339887498949
	x0, x3 := lo+float64(bestU-1)*h, lo+float64(bestU+1)*h
	x1, x2 := x3-g*(x3-x0), x0+g*(x3-x0)
	f1, f2 := f(x1), f(x2)
	for x3-x0 > 1e-9 {
		if f1 < f2 {
			x3, x2, f2 = x2, x1, f1
			x1 = x3 - g*(x3-x0)
			f1 = f(x1)
		} else {
			x0, x1, f1 = x1, x2, f2
			x2 = x0 + g*(x3-x0)
			f2 = f(x2)
		}
	}
	a = aOf((x0 + x3) / 2)
	_, v, _ = profileSSR(y, a)
	return a, v, !math.IsNaN(v)
}

// runRefOf is the point the runs of drive d are linearised at when they do not pin a
// themselves: the pair fit's step model (when it pins 1 - a within 5 %).
func (a *Accumulator) runRefOf(d int) runRef {
	return runRef{a: a.stepA[d], vinf: a.stepV[d], ok: a.stepOK[d] && a.stepRel[d] <= 0.05}
}

// feedRun feeds the run fit of drive d (0 discharge, 2 charge) the pair x -> y ending at
// the current sample.
func (a *Accumulator) feedRun(d int, x, y float64) {
	a.runs[d].add(a.n, x, y, a.runRefOf(d))
}

// preferRuns replaces the pair fit of charge and discharge by the run fit where the run
// fit pins a tighter.
func (a *Accumulator) preferRuns(pf *plantFit) {
	for _, d := range []int{0, 2} {
		f, ok := a.runs[d].result(a.runRefOf(d))
		if !ok || !(f.A > 0 && f.A < 1) {
			continue
		}
		if !pf.ok[d] || f.SeA < pf.fit[d].SeA {
			pf.fit[d], pf.ok[d] = f, true
		}
	}
}
