package analysis

import (
	"fmt"
	"math"

	"github.com/caploop/caploop/telemetry"
)

// cycPattern is the exact repeat of the drive pattern over the last steady samples:
// its length in samples and the number of charge onsets (discharge onsets for a
// discharge-only cycle) in one repeat; samples is NaN, with why, when there is none.
type cycPattern struct {
	samples float64
	onsets  int
	why     string
}

// outBreak is one step of a segment's "last sample outside" staircase: the last
// sample number (1-based) whose rounded error was beyond k counts, for every threshold
// from k up to the next break's k.
type outBreak struct {
	k    int32
	last int64
}

// limitCycle returns the limit cycle of the steady part: the mean interval between
// charge onsets (between discharge onsets when the cycle has no charge), in samples and
// in ticks, or NaN with the reason.
func (s *segState) limitCycle() (samples, ticks float64, why string) {
	nan := math.NaN()
	switch {
	case s.switches == 0:
		return nan, nan, "the drive never switched in the steady part: the loop rests"
	case s.rests():
		return nan, nan, "the drive did not cycle in the steady part (at most one onset of each drive): the loop rests"
	case s.onsets >= 2:
		ticks = (s.lastOn - s.firstOn) / float64(s.onsets-1)
	case s.onsets == 0 && s.dOnsets >= 2:
		ticks = (s.lastDOn - s.firstDOn) / float64(s.dOnsets-1)
	default:
		return nan, nan, "fewer than two charge onsets in the steady part"
	}
	return ticks / s.ticksPerSample(), ticks, ""
}

// rests says the loop does not cycle in the steady part: the drive never switched, or
// at most once into each drive (the last correction after the band was reached, a
// reading that noise pushed out of the band once), so there is no interval between
// onsets to measure; or it has not switched over the last half of the steady part (a
// few bounces after the reach, then hold for good): the cycle is over.
func (s *segState) rests() bool {
	return s.switches == 0 || (s.onsets < 2 && s.dOnsets < 2) || (s.sn >= 32 && 2*s.endRun > s.sn)
}

// restsAtEnd says the loop has sat in one drive for at least 32 samples since its last
// transient, within the steady part, and rests: see rests, or besides the onset that
// started the steady part at most one more of each drive (a correction that noise
// triggered once). The ripple of a resting loop is taken over that end run.
func (s *segState) restsAtEnd() bool {
	if s.endRun < 32 || s.endRun >= s.sn {
		return false
	}
	return s.rests() || (s.firm && s.onsets <= 2 && s.dOnsets <= 2 && s.onsets+s.dOnsets <= 3)
}

// keepNode keeps a steady reading and its drive for the node ripple.
func (s *segState) keepNode(pv float64, u telemetry.Drive) {
	s.node[s.npos] = nodeEntry{pv: float32(pv), u: int8(u)}
	if s.npos++; s.npos == nodeLen {
		s.npos = 0
	}
}

// nodeAt returns the i-th of the last m steady readings kept for the node ripple, oldest
// first.
func (s *segState) nodeAt(i, m int) nodeEntry {
	j := s.npos - m + i
	if j < 0 {
		j += nodeLen
	}
	return s.node[j]
}

// nodeSpan returns the number of last steady samples the node ripple reads: 4 time
// constants of the slowest fitted drive, at least window (the spectrum's) and at most
// nodeLen, within the sn steady samples, and within the end run when the loop rests at
// the end (endRun > 0; the measured ripple reads that run too). The level of a slow
// loop wanders over a time constant (a two-state loop at tau 1000 T moves the mean of
// its cycle by about 2 counts as the noise picks its switching), which the measured
// ripple over the steady part sees and a window of half a time constant would not.
func nodeSpan(pf *plantFit, sn, endRun int64, window int) int {
	tau := 0.0
	for _, d := range []int{0, 2} {
		if f := pf.fit[d]; pf.ok[d] && f.A > 0 && f.A < 1 {
			tau = max(tau, -1/math.Log(f.A))
		}
	}
	m := int64(min(max(float64(window), math.Ceil(4*tau)), nodeLen))
	m = min(m, sn)
	if endRun > 0 {
		m = min(m, endRun)
	}
	return int(m)
}

// ringAt returns the i-th of the last m steady ring entries, oldest first.
func (s *segState) ringAt(i, m int) *ringEntry {
	j := s.rpos - m + i
	if j < 0 {
		j += len(s.ring)
	}
	return &s.ring[j]
}

// pattern finds the shortest exact repeat of the drive over the last steady samples
// kept (at least two whole repeats).
func (s *segState) pattern() cycPattern {
	m := int(min(s.sn, int64(len(s.ring))))
	p := cycPattern{samples: math.NaN()}
	if m < 16 {
		p.why = "too few steady samples"
		return p
	}
	if s.rests() {
		p.why = "the drive did not cycle in the steady part: the loop rests"
		return p
	}
	for per := 1; per <= m/2; per++ {
		ok := true
		for i := 0; i+per < m; i++ {
			if s.ringAt(i, m).u != s.ringAt(i+per, m).u {
				ok = false
				break
			}
		}
		if !ok {
			continue
		}
		on := func(d int8) int {
			n := 0
			for i := m - per; i < m; i++ {
				if s.ringAt(i, m).u == d && s.ringAt(i-1, m).u != d {
					n++
				}
			}
			return n
		}
		n := on(int8(telemetry.Charge))
		if n == 0 {
			n = on(int8(telemetry.Discharge))
		}
		if n == 0 {
			break // a constant drive over the window: no cycle to repeat
		}
		p.samples, p.onsets = float64(per), n
		return p
	}
	p.why = fmt.Sprintf("the drive pattern does not repeat exactly within the last %d steady samples", m)
	return p
}

// level returns the mean of the last readings of the segment, up to tailLen and within
// the final run of one drive: where the level sits at the end.
func (s *segState) level() float64 {
	k := min(s.n, tailLen, max(s.endRun, 1))
	if k <= 0 {
		return math.NaN()
	}
	var sum float64
	for i := s.n - k + 1; i <= s.n; i++ {
		sum += s.tail[i%tailLen]
	}
	return sum / float64(k)
}

// outsideBreaks builds the staircase of the last sample outside +-k counts from the
// last sample seen in each error bin (see outBreak), into dst, k rising.
func (s *segState) outsideBreaks(dst []outBreak) []outBreak {
	dst = dst[:0]
	if s.n == 0 {
		return dst
	}
	kmax := max(histHalf-s.lsLo, s.lsHi-histHalf)
	var v int64
	for k := kmax - 1; k >= 0; k-- {
		nv := v
		if b := histHalf + k + 1; b <= s.lsHi {
			nv = max(nv, s.lastSeen[b])
		}
		if b := histHalf - k - 1; b >= s.lsLo {
			nv = max(nv, s.lastSeen[b])
		}
		if nv != v {
			dst = append(dst, outBreak{k: int32(k), last: nv})
			v = nv
		}
	}
	for i, j := 0, len(dst)-1; i < j; i, j = i+1, j-1 {
		dst[i], dst[j] = dst[j], dst[i]
	}
	return dst
}

// lastOutside returns the last sample number (1-based) whose rounded error was beyond
// tol counts, 0 when none was.
func lastOutside(br []outBreak, tol float64) int64 {
	k := int32(math.Floor(tol))
	for _, b := range br {
		if b.k >= k {
			return b.last
		}
	}
	return 0
}

// currentPlant returns the plant identified so far: the pair fits, the run fits where
// tighter (preferRuns), the joint fit where a drive lacks one (fillJoint), and the hold
// droop from the balance. Summary and each segment's close use it alike.
func (a *Accumulator) currentPlant() plantFit {
	var pf plantFit
	pf.fit[0], pf.ok[0] = a.fits[0].free()
	pf.fit[2], pf.ok[2] = a.fits[2].free()
	a.preferRuns(&pf)
	a.fillJoint(&pf)
	// The hold decays towards the discharge asymptote (a load pulls the node to ground),
	// except behind a follower, whose discharge heads below ground at the sense point
	// while its hold stops at 0 there (the node stops at V_BE).
	hc := 0.0
	if pf.ok[0] && !math.IsNaN(pf.fit[0].VInf) && pf.fit[0].VInf > -2 {
		hc = pf.fit[0].VInf
	}
	pf.fit[1], pf.ok[1] = a.holdFit(pf, hc)
	return pf
}

// nodeRipple returns the noise-free peak-to-peak of the node over the last steady
// samples kept, in counts: the plant identified when the segment closed,
// V[k+1] = a_u V[k] + b_u (the exact exponential step of each drive over one period),
// driven by the observed drives. The trajectory is V[k] = Phi[k] V0 + c[k] + g[k] h,
// h a constant added per sample by the hold when its droop is not identified, by a
// drive without a fit of its own, or else by every drive (the level the fits' small
// errors would drift to), and V0 and h are the least-squares fit of it to the
// readings, so the noise averages out of the start value without smoothing the
// waveform. Samples while
// Phi > 0.05 (the start value still matters) are left out when they are less than half
// the window.
func (s *segState) nodeRipple() (float64, string) {
	var end int64
	if s.restsAtEnd() {
		end = s.endRun
	}
	m := nodeSpan(&s.pf, s.sn, end, len(s.ring))
	if m < 8 {
		return math.NaN(), "too few steady samples"
	}
	return nodeRippleOf(s.nodeWindow(m), &s.pf)
}

// nodeWindow returns the last m steady readings kept for the node ripple, oldest first,
// in one slice: part of the ring when they do not wrap round it, else a copy (in a
// scratch slice of s, valid until the next call).
func (s *segState) nodeWindow(m int) []nodeEntry {
	if m <= s.npos {
		return s.node[s.npos-m : s.npos]
	}
	if s.nodeTmp == nil {
		s.nodeTmp = make([]nodeEntry, nodeLen)
	}
	w := s.nodeTmp[:m]
	k := copy(w, s.node[nodeLen-(m-s.npos):])
	copy(w[k:], s.node[:s.npos])
	return w
}

// noFitWhy ends the reason of a node ripple that lacked a drive's fit: a later plant
// may have it (see segFig.nodeWin).
const noFitWhy = " fit to drive the plant with"

// nodeRippleOf is nodeRipple over the steady entries w, oldest first, with the plant
// pf.
func nodeRippleOf(w []nodeEntry, pf *plantFit) (float64, string) {
	m := len(w)
	var a, b [3]float64
	var seen [3]bool
	for k := 0; k < m-1; k++ {
		seen[w[k].u+1] = true
	}
	for d := 0; d < 3; d++ {
		// A fit drives the plant when 1 - a is known within 50 % (95 %): a time constant
		// the data leave unbounded would only make up a waveform.
		if f := pf.fit[d]; pf.ok[d] && f.A > 0 && f.A < 1 && 1.96*f.SeA <= 0.5*(1-f.A) {
			a[d], b[d] = pf.fit[d].A, pf.fit[d].B
		} else {
			a[d] = math.NaN()
		}
	}
	// At most one drive's constant term is left free and fitted with V0: the hold's
	// whenever the window holds (with a_hold = 1, a constant h per sample, when its
	// droop is not identified), or else a charge or discharge without a fit of its own,
	// which borrows the other's time constant (the same pin and resistor in the usual
	// circuits: the two-state pin, or a pin that floats to hold). The hold's asymptote
	// is never certain (ground for a load, the sense point's zero behind a follower, a
	// leak's or a bias point's level elsewhere), and the droop comes from the balance
	// of every steady part: a droop a few per cent off at this level would make the
	// trajectory drift over the window towards a level the readings do not show (a
	// three-state follower's window read +59 % and +320 % so). Its constant fitted here
	// puts the level where the readings are.
	free, nested := -1, false
	if seen[1] && math.IsNaN(a[1]) {
		a[1], b[1], free = 1, 0, 1
	} else if seen[1] {
		// The identified hold plus a fitted constant: the fit keeps it only when the
		// readings ask for it (see below).
		free, nested = 1, true
	}
	for _, d := range []int{0, 2} {
		o := 2 - d
		if !seen[d] || !math.IsNaN(a[d]) || math.IsNaN(a[o]) {
			continue
		}
		switch {
		case free < 0:
			a[d], b[d], free = a[o], 0, d
		case d == 0:
			// The free term is taken: a discharge heads for ground (b = 0).
			a[d], b[d] = a[o], 0
		}
	}
	// With every drive fitted, a constant h added at every sample is left free instead:
	// it moves the level the trajectory cycles about. Over a window of a few time
	// constants the fits' small errors (a few hundredths of a count per step) add up to a
	// drift of that level (a two-state loop at tau 200 T: +2.3 counts over 512 samples
	// from the true start), which the p-p would count as ripple; the readings' mean pins
	// it.
	const all = 3
	if free < 0 {
		free = all
	}
	// Pass 1: the normal equations of (V0, h). A reading at code 0 or below is not a
	// level: the converter clips there (a follower's discharge reaches the bottom while
	// still moving fast), so it does not enter the fit.
	var spp, spg, sgg, spy, sgy, syy, n float64
	phi, c, g := 1.0, 0.0, 0.0
	skip := -1
	for k := 0; k < m; k++ {
		r := w[k]
		if r.pv > 0 {
			y := float64(r.pv) - c
			spp += phi * phi
			spg += phi * g
			sgg += g * g
			spy += phi * y
			sgy += g * y
			syy += y * y
			n++
		}
		if skip < 0 && phi <= 0.05 {
			skip = k
		}
		d := r.u + 1
		if k < m-1 {
			if math.IsNaN(a[d]) {
				return math.NaN(), "no " + driveName(r.u) + noFitWhy
			}
			phi, c, g = a[d]*phi, a[d]*c+b[d], a[d]*g
			if int(d) == free || free == all {
				g++
			}
		}
	}
	var v0, h float64
	if det := spp*sgg - spg*spg; free >= 0 && sgg > 0 && det > 1e-12*spp*sgg {
		v0, h = (spy*sgg-sgy*spg)/det, (spp*sgy-spg*spy)/det
		if nested {
			// F statistic of the nested models (one parameter): the hold's own
			// asymptote stays unless the fitted constant explains the readings far
			// better. A drifting trajectory gives F in the thousands (a follower's
			// windows: 2600 and 120000); with a right plant the band's selection of
			// the readings that chose hold (their noise is cut at its edges) still
			// gives 6-80 (three-state loads, one against ngspice), more than F(1, n)'s
			// 3.84 allows, and the constant then fits that selection, not the level.
			rssFree := max(syy-v0*spy-h*sgy, 0)
			rssFixed := max(syy-spy*spy/spp, 0)
			if n <= 3 || (rssFixed-rssFree)*(n-2) <= 100*rssFree {
				v0, h = spy/spp, 0
			}
		}
	} else if spp > 1e-9 {
		v0 = spy / spp
	} else {
		return math.NaN(), "the plant forgets its start too fast to place it"
	}
	switch {
	case free == all:
		for d := range b {
			b[d] += h
		}
	case free >= 0:
		b[free] += h
	}
	if skip < 0 || skip > m/2 {
		skip = 0
	}
	// Pass 2: the trajectory, as the converter's input sees it: never below 0 (behind
	// a follower the model's level heads below ground in discharge, the sense point
	// stops at 0).
	v := v0
	lo, hi := math.Inf(1), math.Inf(-1)
	for k := 0; k < m; k++ {
		if k >= skip {
			s := max(v, 0)
			lo, hi = min(lo, s), max(hi, s)
		}
		d := w[k].u + 1
		v = a[d]*v + b[d]
	}
	return hi - lo, ""
}

func driveName(u int8) string {
	switch telemetry.Drive(u) {
	case telemetry.Charge:
		return "charge"
	case telemetry.Discharge:
		return "discharge"
	}
	return "hold"
}

// envelopeDrifts closes the open block of whole cycles of sg (at a charge onset) and
// says whether its mean error moved from the previous block's by more than a quarter
// count plus 4 sigma of the noise of the two means, or either of its extremes by more
// than a count plus 4 sigma: the level is still converging to its limit cycle (a
// two-state loop near mid-duty creeps over many cycles; a fast loop's cycle grows to its
// full swing over its first cycles), so the steady part starts over here. The first block
// that matches ends the check.
func (a *Accumulator) envelopeDrifts(sg *segState) bool {
	m := sg.blkSum / float64(sg.blkN)
	sigma := math.Sqrt(a.noiseEMA / 6)
	drift := false
	if sg.hasPrev {
		thr := 0.25 + 4*sigma*math.Sqrt(2/float64(sg.blkN))
		ext := 1 + 4*sigma
		drift = math.Abs(m-sg.blkPrev) > thr ||
			math.Abs(sg.blkLo-sg.blkPrevLo) > ext || math.Abs(sg.blkHi-sg.blkPrevHi) > ext
		sg.envOK = !drift
	}
	sg.blkPrev, sg.hasPrev = m, true
	sg.blkPrevLo, sg.blkPrevHi = sg.blkLo, sg.blkHi
	sg.blkSum, sg.blkN = 0, 0
	sg.blkLo, sg.blkHi = math.Inf(1), math.Inf(-1)
	return drift
}

// railCode says the readings pile up on code because of the plant, not the converter:
// it is the full-scale code, the highest or lowest code read, or within 2 counts and 4
// sigma of noise of an identified asymptote (where a level tops out: a buffer's
// saturation, a loaded divider, an unreachable setpoint).
func (a *Accumulator) railCode(code int, pf plantFit) bool {
	if code == a.maxCode {
		return true
	}
	lo, hi := -1, -1
	for i, n := range a.codes {
		if n > 0 {
			if lo < 0 {
				lo = i
			}
			hi = i
		}
	}
	if code == lo || code == hi {
		return true
	}
	near := 2 + 4*math.Sqrt(a.noiseEMA/6)
	for _, d := range []int{0, 2} {
		if pf.ok[d] && math.Abs(float64(code)-pf.fit[d].VInf) <= near {
			return true
		}
	}
	return false
}

// noiseRMS returns the ADC noise, rms counts with quantisation: the plant fits'
// residual variance ssr/dof pooled with the second differences of hold triples whose
// middle reading lay well inside the band (2 sigma and half a count from its edges). A
// second difference of white noise has variance 6 sigma^2, and overlapping triples share
// readings, so sdN triples count as sdN/3 degrees of freedom. In three-state captures
// the fits see few pairs (a few dozen per step) while the hold triples number
// thousands; the band's edges select the noise of the readings that chose a hold, so
// only triples far from them enter, and only where the band is at least twice that
// margin wide (a narrower band truncates the noise of every reading inside it).
func (a *Accumulator) noiseRMS(ssr, dof float64) float64 {
	if a.sdN < 64 {
		return math.Sqrt(ssr / dof)
	}
	dsd := a.sdN / 3
	return math.Sqrt((ssr + dsd*a.sd2/(6*a.sdN)) / (dof + dsd))
}
