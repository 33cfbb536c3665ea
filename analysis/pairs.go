package analysis

import (
	"math"
)

// reach returns the range [lo, hi] the next reading can take, in counts, one period
// after reading v under drive index d (0 discharge, 1 hold, 2 charge), noise aside:
// with a fit, v + (1 - a)(VInf - v) within 10 % of the step plus half a count; without
// one (and for hold) from v towards the drive's direction by up to twice the running
// mean of |pv[k+1] - pv[k]| under that drive.
func (a *Accumulator) reach(d int, v float64) (lo, hi float64) {
	if d != 1 && a.stepOK[d] {
		step := (1 - a.stepA[d]) * (a.stepV[d] - v)
		slack := 0.1*math.Abs(step) + 0.5
		return v + step - slack, v + step + slack
	}
	s := 2*a.stepEMA[d] + 0.5
	switch d {
	case 2:
		return v, v + s
	case 0:
		return v - s, v
	}
	return v - s, v + 0.5
}

// refreshGuard updates the selection margin from the noise estimate and the step model
// from the fits (every 64 samples, so its cost per sample is small).
func (a *Accumulator) refreshGuard() {
	// A second difference of white noise has variance 6 sigma^2.
	sigma := math.Sqrt(a.noiseEMA / 6)
	a.guard = 4*sigma + a.opts.MarginCounts
	a.inner = 2*sigma + 0.5
	a.lowZ = 4*sigma + 1
	a.jt.refresh(a.opts.MarginCounts)
	for _, d := range []int{0, 2} {
		// The step model is a function of the fit's sums alone: without a new pair
		// since the last look it would come out the same.
		if a.fits[d].n < 8 || a.fits[d].n == a.fitSeen[d] {
			continue
		}
		a.fitSeen[d] = a.fits[d].n
		if f, ok := a.fits[d].free(); ok && f.A > 0 && f.A < 1 && !math.IsNaN(f.VInf) && f.SeA < 0.2*(1-f.A) {
			a.stepA[d], a.stepV[d], a.stepOK[d] = f.A, f.VInf, true
			a.stepRel[d] = f.SeA / (1 - f.A)
		}
	}
	a.glitchFactors(sigma)
}

// codeSlow counts a reading in the ADC code histogram (when it is a code) and at the
// rails, and reports whether it can enter the plant fit (off both rails).
func (a *Accumulator) codeSlow(pv float64) bool {
	code := int(pv)
	ok := pv >= 0 && float64(code) == pv
	if ok {
		if code < len(a.codes) {
			a.codes[code]++
		} else if code < 1<<16 {
			a.growCodes(code)
			a.codes[code]++
		}
	}
	if pv <= 0 {
		a.railLo++
		ok = false
	} else if a.maxCode > 0 && pv >= float64(a.maxCode) {
		a.railHi++
		ok = false
	}
	return ok
}

// setCodeLim sets codeLim: the codes below it are in the histogram and below the top
// rail.
func (a *Accumulator) setCodeLim() {
	a.codeLim = len(a.codes)
	if a.maxCode > 0 {
		a.codeLim = min(a.codeLim, a.maxCode)
	}
}

func (a *Accumulator) growCodes(code int) {
	n := 1024
	for n <= code {
		n <<= 1
	}
	c := make([]uint32, n)
	copy(c, a.codes)
	a.codes = c
	a.setCodeLim()
}

// glitchFactors sets the glitch rule's margins (see glitch) from the noise sigma and
// the step fits: 6 sigma of noise and a count of quantisation; the identified step known
// within 10 % or 3 standard errors of its fit, whichever is larger.
func (a *Accumulator) glitchFactors(sigma float64) {
	a.gSlack = 6*sigma + 1
	a.gUp, a.gDn = 1+max(0.1, 3*a.stepRel[2]), 1+max(0.1, 3*a.stepRel[0])
	if !a.stepOK[2] {
		a.gUp = a.gDn
	}
	if !a.stepOK[0] {
		a.gDn = a.gUp
	}
	// plantReach's model for glitch: off when it returns NaN whatever the reading (no
	// drive identified, or the drive standing in for a missing one at tau <= 2 T), and
	// its common case, both drives identified, with their 1 - a.
	okUp, okDn := a.stepOK[2], a.stepOK[0]
	a.gOff = (!okUp && !okDn) || (okUp && a.stepA[2] <= reachLimit) || (okDn && a.stepA[0] <= reachLimit)
	a.gBoth = okUp && okDn
	a.gOmUp, a.gOmDn = 1-a.stepA[2], 1-a.stepA[0]
}
