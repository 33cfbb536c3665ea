package analysis

import (
	"math"

	"github.com/caploop/caploop/telemetry"
)

// memo is what the plant fit remembers of the previous samples.
type memo struct {
	pv     float64
	u      telemetry.Drive
	sp, db float64 // the setpoint and deadband the drive was chosen with
	ok     bool    // a usable reading (not at a rail)
	steady bool    // in the steady part of its segment
	next   bool    // the following sample came without a gap
}

// balance holds the sums of the hold droop estimate over steady sample pairs: the sum
// of the changes pv[k+1] - pv[k], and per drive the count and sum of pv[k].
//
// The hold droop cannot be fitted like charge and discharge (see ivSums): inside the band the readings span a few
// counts, every hold decision selects its reading (so the noise of the regressor is
// never independent of the selection), and the droop per sample is a fraction of a
// count. It comes instead from the balance of the steady parts, where what the charges
// add the holds and discharges take away. Summed over steady sample pairs,
//
//	sum (pv[k+1] - pv[k]) = sum_d [ (a_d - 1) S_d + b_d N_d ],   S_d = sum of pv[k] with drive d
//
// and with the charge and discharge fits known and the hold asymptote c taken as the
// discharge asymptote (the node decays towards ground in both),
//
//	1 - a_hold = [ (a_c - 1) S_c + b_c N_c + (a_d - 1) S_d + b_d N_d - sum (pv[k+1] - pv[k]) ] / (S_h - c N_h)
//
// which is linear in the readings, so their noise averages out instead of biasing it.
type balance struct {
	delta float64
	s, n  [3]float64
}

// Accumulator is the streaming analysis of one sample stream: feed it samples with Add
// (and meta lines with SetMeta) and ask for the Summary at any time. It keeps bounded
// memory whatever the stream's length, costs O(1) amortised per sample, and Summary's
// cost does not grow with the samples seen, so the live screen and the headless summary
// share it. Its plant fits are explained beside their sums: ivSums (charge and
// discharge) and balance (hold droop).
type Accumulator struct {
	opts  Options
	meta  telemetry.Meta
	stats telemetry.Stats
	db    float64
	mode  telemetry.Mode
	three bool // band jumps count

	clk      clock
	n        int64
	first    float64
	last     float64
	inferred bool

	seg      *segState
	fin      *finisher // finishes closed segments on its own goroutine (nil: inline)
	kept     int       // closed segments kept (finished or being finished)
	segs     []segFig
	segSeen  int64
	zooms    []ZoomTrace
	zoomSeg  []int
	stepTr   []stepRaw
	spec     spectral
	buf      []float64
	bestSpec specKeep

	fits       [3]ivSums  // discharge, (unused), charge
	runs       [3]runFit  // the same pairs, fitted as runs (discharge, unused, charge)
	jt         jointSums  // charge and discharge with one shared factor (jointfit.go)
	noiseEMA   float64    // running mean of squared second differences, counts^2
	gSlack     float64    // glitch margins (glitchFactors): noise and quantisation, counts
	gUp, gDn   float64    // glitch margins: factors on the charge and discharge reach
	sd2, sdN   float64    // squared second differences of hold triples well inside the band (see noiseRMS)
	inner      float64    // 2 sigma of noise plus half a count: "well inside"
	guard      float64    // 4 sigma of noise plus MarginCounts
	stepEMA    [3]float64 // running mean of |pv[k+1] - pv[k]| per drive, counts
	stepA      [3]float64
	stepV      [3]float64
	stepOK     [3]bool
	stepRel    [3]float64 // relative standard error of 1 - stepA
	bal        balance
	mem        [2]memo // the previous sample (*p1) and the one before (*p2)
	p1, p2     *memo
	codes      []uint32
	maxCode    int
	codeLim    int // codes 0 < code < codeLim are in codes and off both rails
	railLo     int64
	railHi     int64
	steadyHist [2*histHalf + 1]int64 // error bins of the steady samples of the closed segments

	ov  overview
	trk tracker
	st  streamState // events, glitches and suspect lines (events.go)

	lowCharges int64   // charge periods that began and ended within lowZ of code 0 (follower.go)
	lowZ       float64 // 4 sigma of noise plus a count

	// glitchFactors: plantReach's model for glitch's common case.
	gOff         bool    // plantReach is NaN whatever the reading
	gBoth        bool    // both drives identified
	gOmUp, gOmDn float64 // 1 - a of the charge and the discharge

	fitSeen [3]float64 // refreshGuard: pairs in fits[d] when it last read its step model
}

// stepRaw is the start of one step response, kept for the plot.
type stepRaw struct {
	step      int
	t, pv     []float64
	u         []int8
	perSample float64
}

// specKeep is the spectrum of the longest steady part so far.
type specKeep struct {
	sn   int64
	freq []float64 // cycles per sample
	amp  []float64 // counts
}

// New returns an empty accumulator.
func New(opts Options) *Accumulator {
	a := &Accumulator{opts: opts.withDefaults(), seg: new(segState)}
	a.p1, a.p2 = &a.mem[0], &a.mem[1]
	a.seg.reset(a.opts.Window)
	a.ov.init(a.opts.TraceBuckets)
	a.noiseEMA = 6 // 1 count rms until the data say otherwise
	a.stepEMA = [3]float64{16, 16, 16}
	a.refreshGuard()
	return a
}

// SetMeta sets what the board's meta lines say (the current merged meta). A deadband or
// mode change takes effect from the next sample.
func (a *Accumulator) SetMeta(m telemetry.Meta) {
	a.noteMeta(m)
	a.meta = m
	a.db = 0
	a.mode = m.Mode
	if m.Has(telemetry.FieldDeadband) && m.Mode != telemetry.TwoState {
		a.db = m.Deadband
	}
	if a.mode == telemetry.ModeUnknown && a.db > 0 {
		a.mode = telemetry.ThreeState
	}
	a.three = a.mode == telemetry.ThreeState
	if m.Has(telemetry.FieldADCBits) && m.ADCBits > 0 && m.ADCBits <= 16 {
		a.maxCode = 1<<m.ADCBits - 1
	}
	a.setCodeLim()
}

// SetStats records the reader's line counts (rejected lines, first rejects).
func (a *Accumulator) SetStats(st telemetry.Stats) { a.stats = st }

// infer applies the controller rule to a reading: three-state when the mode says so or
// when a deadband is known, else two-state.
func (a *Accumulator) infer(e float64) telemetry.Drive {
	if a.three {
		switch {
		case e > a.db:
			return telemetry.Discharge
		case e < -a.db:
			return telemetry.Charge
		}
		return telemetry.Hold
	}
	if e < 0 {
		return telemetry.Charge
	}
	return telemetry.Discharge
}

// Add feeds one sample.
func (a *Accumulator) Add(s telemetry.Sample) { a.addRun([]telemetry.Sample{s}) }

// addRun feeds the samples of ss in order (Summarize hands over its batches through it,
// without copies). It is the hot path of every pass: the clock's common case, the open
// segment's per-sample update and the overview's open bucket are written out here rather
// than called, and work whose result a sample cannot use is skipped.
func (a *Accumulator) addRun(ss []telemetry.Sample) {
	for i := range ss {
		s := &ss[i]

		// Clock: the common case of clock.tick (board time near the period), else tick.
		var tick float64
		var contiguous bool
		c := &a.clk
		if dt := float64(s.T - c.prevT); c.fast && s.Flags&(telemetry.HasT|telemetry.HasHost) == telemetry.HasT &&
			dt >= c.lo && dt <= c.hi {
			c.prevT = s.T
			c.jn++
			c.js += dt
			c.jss += dt * dt
			tick = c.base + float64(s.T-c.t0)
			c.lastTick = tick
			contiguous = true
		} else {
			tick, contiguous = c.tick(s)
		}

		u := s.U
		pv := s.PV
		if s.Flags&telemetry.HasU == 0 {
			u = a.infer(pv - s.SP)
			a.inferred = true
		} else if uint8(u+1) > 2 { // not one of -1, 0, 1
			u = telemetry.Hold
		}
		if s.Flags&suspectMask != suspectMask {
			a.suspect(s.Flags, s.Line)
		}
		// Events and breaks split the segment; a glitch keeps its drive (the firmware
		// acted on it) but the last good reading stands in for it in every level figure.
		var split, reset bool
		if (a.n > 0 && !contiguous) || a.st.pending {
			split, reset = a.breaks(s, tick, contiguous)
		}
		glitch := a.glitch(pv, s.Line, contiguous)
		if glitch {
			pv = a.st.good
		}
		if a.n == 0 {
			a.first = tick
			a.openSegment(s.SP, tick, false, 0)
		} else if reset {
			// A restarted board: a new segment, never a step.
			a.closeSegment()
			a.openSegment(s.SP, tick, false, 0)
		} else if s.SP != a.seg.sp {
			from := a.seg.sp
			a.closeSegment()
			a.openSegment(s.SP, tick, true, from)
			a.seg.trk = a.trk.move(a.n, from, s.SP, &a.opts)
		} else if a.db != a.seg.db || split {
			// A new band on the same setpoint (tuning): a new segment, but no step.
			a.closeSegment()
			a.openSegment(s.SP, tick, false, 0)
		}
		a.n++
		a.last = tick

		// The open segment (its state is segState; this is its per-sample update).
		sg := a.seg // sg.db == a.db: a new band opened a new segment above
		e := pv - sg.sp
		sg.n++
		sg.end = tick
		sg.lastPV = pv
		if a.n <= a.trk.end {
			a.trk.add(a.n, e, s.SP, u, a.three)
		}
		if pv < sg.minPV {
			sg.minPV = pv
		}
		if pv > sg.maxPV {
			sg.maxPV = pv
		}
		if sg.n <= stepKeep {
			k := sg.n - 1
			sg.stepT[k], sg.stepPV[k], sg.stepU[k] = tick, pv, int8(u)
		}
		if sg.rising {
			p := (pv - sg.from) / (sg.sp - sg.from)
			if !sg.has10 && p >= 0.1 {
				sg.t10, sg.has10 = tick, true
			}
			if !sg.has90 && p >= 0.9 {
				sg.t90, sg.has90 = tick, true
			}
			sg.rising = !(sg.has10 && sg.has90)
		}
		b := binOf(e)
		sg.lastSeen[b] = sg.n
		sg.lsLo = min(sg.lsLo, b)
		sg.lsHi = max(sg.lsHi, b)
		in := math.Abs(e) <= sg.db
		if sg.n == 1 {
			sg.firstSign = sign(e)
		} else if in != sg.prevIn {
			if in {
				sg.entries++
			} else {
				sg.exits++
				if e > 0 && sg.prevU == telemetry.Hold {
					sg.noiseExits++
				}
			}
		}
		sg.tail[sg.n%tailLen] = pv
		if !sg.steady && (in || (sg.n > 1 && sign(e) != sg.firstSign)) {
			if sg.plat {
				sg.clearSteady() // the level stalled short of the setpoint, then reached it
				sg.plat = false
			}
			sg.steady, sg.steadyAt, sg.reachN = true, tick, sg.n
		} else if !sg.steady {
			a.plateau(sg, e, tick)
		}
		// The steady part starts over at the first drive onset (a charge or a discharge
		// after another drive) after the reach: the level is then in its limit cycle,
		// past the first traverse of the band.
		restart := sg.steady && !sg.firm && sg.n > sg.reachN && u != sg.prevU && u != telemetry.Hold
		if restart {
			sg.clearSteady()
			sg.firm, sg.steadyAt = true, tick
		} else if sg.firm && !sg.envOK && u == telemetry.Charge && sg.prevU != telemetry.Charge && sg.blkN >= blockMin {
			restart = a.envelopeDrifts(sg)
			if restart {
				sg.clearSteady()
				sg.steadyAt = tick
			}
		}
		if sg.firm && !sg.envOK {
			sg.blkSum += e
			sg.blkN++
			sg.blkLo, sg.blkHi = min(sg.blkLo, e), max(sg.blkHi, e)
		}
		if u == sg.prevU && sg.n > 1 {
			sg.endRun++
			sg.endMinE, sg.endMaxE = min(sg.endMinE, e), max(sg.endMaxE, e)
		} else {
			sg.endRun = 1
			sg.endMinE, sg.endMaxE = e, e
		}
		if sg.steady || sg.plat {
			sg.sn++
			sg.sumE += e
			sg.sumE2 += e * e
			if e < sg.minE {
				sg.minE = e
			}
			if e > sg.maxE {
				sg.maxE = e
			}
			if h := &sg.half; h.cn+1 < h.size { // HalfRange.Add's common case
				h.clo, h.chi = min(h.clo, e), max(h.chi, e)
				h.cn++
			} else {
				h.Add(e)
			}
			sg.hist[b]++
			sg.hLo = min(sg.hLo, b)
			sg.hHi = max(sg.hHi, b)
			sg.duty[u+1]++
			if (sg.sn > 1 && u != sg.sprev) || restart {
				if !restart {
					sg.switches++
					if (a.three || sg.sawHold) && u == -sg.sprev {
						sg.jumps++
					}
				}
				// An onset: a charge (discharge) after anything else. The restart's
				// sample is one by its definition.
				switch u {
				case telemetry.Charge:
					if sg.onsets == 0 {
						sg.firstOn = tick
					}
					sg.lastOn = tick
					sg.onsets++
					sg.trigJ = 0
				case telemetry.Discharge:
					if sg.dOnsets == 0 {
						sg.firstDOn = tick
					}
					sg.lastDOn = tick
					sg.dOnsets++
				}
			}
			if j := sg.trigJ; j >= 0 && j < trigLen {
				sg.trigSum[j] += e
				sg.trigCnt[j]++
				sg.trigJ = j + 1
				sg.trigMax = max(sg.trigMax, j+1)
			}
			r := sg.rpos
			sg.ring[r] = ringEntry{pv: pv, t: tick, u: int8(u)}
			r++
			if r == len(sg.ring) {
				r = 0
			}
			sg.rpos = r
			sg.keepNode(pv, u)
			sg.sprev = u
		}
		sg.sawHold = sg.sawHold || u == telemetry.Hold
		sg.prevIn = in
		sg.prevU = u

		// ADC code histogram and rails: a whole reading inside the histogram and off
		// both rails takes the short way, everything else codeSlow.
		code := int(pv)
		var ok bool
		if float64(code) == pv && code > 0 && code < a.codeLim {
			a.codes[code]++
			ok = true
		} else {
			ok = a.codeSlow(pv)
		}
		if pv <= a.lowZ && a.p1.pv <= a.lowZ && a.p1.u == telemetry.Charge && contiguous && a.n > 1 {
			a.lowCharges++ // a charge that left the reading near code 0 (see follower.go)
		}
		ok = ok && !glitch

		// Plant fit: pair (p1 -> this) with instrument p2.
		p1, p2 := a.p1, a.p2
		p1.next = contiguous
		if ok && p1.ok && contiguous {
			d1 := int(p1.u) + 1
			a.stepEMA[d1] += (math.Abs(pv-p1.pv) - a.stepEMA[d1]) * (1.0 / 256)
			if p2.ok && p2.next {
				if p1.u == p2.u {
					// Noise from second differences inside runs of one drive, where the
					// exponential's own curvature is far below a count.
					d2 := pv - 2*p1.pv + p2.pv
					a.noiseEMA += (d2*d2 - a.noiseEMA) * (1.0 / 256)
					if p1.u == telemetry.Hold && p1.db >= 2*a.inner && math.Abs(p1.pv-p1.sp) <= p1.db-a.inner {
						a.sd2 += d2 * d2
						a.sdN++
					}
				}
				// Only a charge or a discharge pair can enter a fit, so only they need
				// the reach of p2 (a hold pair, most of them, skips it).
				switch p1.u {
				case telemetry.Charge:
					if _, hi := a.reach(int(p2.u)+1, p2.pv); hi+a.guard < p1.sp-p1.db {
						a.fits[2].add(p2.pv, p1.pv, pv)
						a.feedRun(2, p1.pv, pv)
					}
				case telemetry.Discharge:
					if lo, _ := a.reach(int(p2.u)+1, p2.pv); lo-a.guard > p1.sp+p1.db {
						a.fits[0].add(p2.pv, p1.pv, pv)
						a.feedRun(0, p1.pv, pv)
					}
				}
				if p1.u != telemetry.Hold {
					a.jt.add(p2, p1, pv, a.guard)
				}
			}
			if p1.steady {
				d := p1.u + 1
				a.bal.delta += pv - p1.pv
				a.bal.s[d] += p1.pv
				a.bal.n[d]++
			}
		}
		// The new sample becomes p1, the old p1 becomes p2: flip the pair, overwrite p2.
		p2.pv, p2.u, p2.ok, p2.next, p2.steady, p2.sp, p2.db = pv, u, ok, false, sg.steady, s.SP, a.db
		a.p1, a.p2 = p2, p1
		if a.n&63 == 0 {
			a.refreshGuard()
		}

		// Overview: the open bucket's common case of overview.add, else add.
		if o := &a.ov; o.open && o.fill < o.width {
			o.csp = s.SP
			o.csum += pv
			o.ccnt++
			if pv < o.clo {
				o.clo = pv
			}
			if pv > o.chi {
				o.chi = pv
			}
			o.fill++
		} else {
			o.add(tick, s.SP, pv)
		}
	}
}
