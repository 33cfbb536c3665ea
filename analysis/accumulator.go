package analysis

import (
	"math"

	"github.com/caploop/caploop/telemetry"
)

// Options tune the accumulator. The zero value picks the defaults.
type Options struct {
	// Source names the capture in the Summary (a file name, a port path).
	Source string
	// MaxSegments bounds the listed segments and steps (0 = 4096). Later ones are
	// counted in SegmentsOmitted and StepsOmitted.
	MaxSegments int
	// Window is the number of steady readings per segment kept for the autocorrelation
	// and the spectrum (0 = 512: limit cycles up to 256 samples show in the
	// autocorrelation, longer ones come from the drive pattern; a larger window costs
	// more at each segment's end, two FFTs of twice its length).
	Window int
	// MarginCounts is the extra room, in counts, beyond one expected step and 4 sigma of
	// noise, that the reading before a sample pair must keep from the controller's
	// switching threshold for the pair to enter the plant fit (0 = 2): readings near a
	// threshold chose their drive partly by noise, which biases the fit.
	MarginCounts float64
	// TraceBuckets is the length of the overview trace (0 = 1024).
	TraceBuckets int
	// ConversionS is the ADC conversion time the sample period is compared with
	// (0 = 104 µs: 13 ADC clocks at 125 kHz for a 10-bit successive-approximation ADC,
	// classic 8-bit microcontroller datasheets, from memory).
	ConversionS float64
	// TrackSamples and TrackStepCounts set the tracking rule (see Tracking): a setpoint
	// change of at most TrackStepCounts counts (0 = 16) less than TrackSamples samples
	// (0 = 32) after the previous one is a tracking move, and the TrackSamples samples
	// from it on are tracking samples.
	TrackSamples    int
	TrackStepCounts float64
	// SupplyTol is the relative tolerance of the supply (0 = DefaultSupplyTol, 5 %): a
	// load or a drop seen only in v_high must exceed it to be reported.
	SupplyTol float64
}

func (o Options) withDefaults() Options {
	if o.MaxSegments <= 0 {
		o.MaxSegments = 4096
	}
	if o.Window <= 0 {
		o.Window = 512
	}
	if o.MarginCounts <= 0 {
		o.MarginCounts = 2
	}
	if o.TraceBuckets <= 0 {
		o.TraceBuckets = 1024
	}
	if o.TraceBuckets%2 == 1 {
		o.TraceBuckets++
	}
	if o.ConversionS <= 0 {
		o.ConversionS = 104e-6
	}
	if o.TrackSamples <= 0 {
		o.TrackSamples = 32
	}
	if o.TrackStepCounts <= 0 {
		o.TrackStepCounts = 16
	}
	if o.SupplyTol <= 0 {
		o.SupplyTol = DefaultSupplyTol
	}
	return o
}

// Kept traces: at most this many zoom windows, of this many samples, and step traces.
const (
	maxZooms      = 64
	zoomLen       = 256
	maxStepTraces = 16
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
type balance struct {
	delta float64
	s, n  [3]float64
}

// Accumulator is the streaming analysis of one sample stream: feed it samples with Add
// (and meta lines with SetMeta) and ask for the Summary at any time. It keeps bounded
// memory whatever the stream's length, costs O(1) amortised per sample, and Summary's
// cost does not grow with the samples seen, so the live screen and the headless summary
// share it.
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
//
// The hold droop cannot be fitted the same way: inside the band the readings span a few
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
	noiseEMA   float64    // running mean of squared second differences, counts^2
	guard      float64    // 4 sigma of noise plus MarginCounts
	stepEMA    [3]float64 // running mean of |pv[k+1] - pv[k]| per drive, counts
	stepA      [3]float64
	stepV      [3]float64
	stepOK     [3]bool
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
		if !sg.steady && (in || (sg.n > 1 && sign(e) != sg.firstSign)) {
			sg.steady, sg.steadyAt = true, tick
		}
		if u == sg.prevU && sg.n > 1 {
			sg.endRun++
		} else {
			sg.endRun = 1
		}
		if sg.steady {
			sg.sn++
			sg.sumE += e
			sg.sumE2 += e * e
			if e < sg.minE {
				sg.minE = e
			}
			if e > sg.maxE {
				sg.maxE = e
			}
			sg.hist[b]++
			sg.hLo = min(sg.hLo, b)
			sg.hHi = max(sg.hHi, b)
			sg.duty[u+1]++
			if sg.sn > 1 && u != sg.sprev {
				sg.switches++
				if (a.three || sg.sawHold) && u == -sg.sprev {
					sg.jumps++
				}
				// A charge onset: charge after anything else (so also a switch).
				if u == telemetry.Charge {
					if sg.onsets == 0 {
						sg.firstOn = tick
					}
					sg.lastOn = tick
					sg.onsets++
					sg.trigJ = 0
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
				}
				// Only a charge or a discharge pair can enter a fit, so only they need
				// the reach of p2 (a hold pair, most of them, skips it).
				switch p1.u {
				case telemetry.Charge:
					if _, hi := a.reach(int(p2.u)+1, p2.pv); hi+a.guard < p1.sp-p1.db {
						a.fits[2].add(p2.pv, p1.pv, pv)
					}
				case telemetry.Discharge:
					if lo, _ := a.reach(int(p2.u)+1, p2.pv); lo-a.guard > p1.sp+p1.db {
						a.fits[0].add(p2.pv, p1.pv, pv)
					}
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
	a.guard = 4*math.Sqrt(a.noiseEMA/6) + a.opts.MarginCounts
	for _, d := range []int{0, 2} {
		if a.fits[d].n < 8 {
			continue
		}
		if f, ok := a.fits[d].free(); ok && f.A > 0 && f.A < 1 && !math.IsNaN(f.VInf) && f.SeA < 0.2*(1-f.A) {
			a.stepA[d], a.stepV[d], a.stepOK[d] = f.A, f.VInf, true
		}
	}
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

func (a *Accumulator) openSegment(sp, tick float64, hasFrom bool, from float64) {
	a.seg.reset(a.opts.Window)
	a.seg.sp, a.seg.start, a.seg.end = sp, tick, tick
	a.seg.hasFrom, a.seg.from = hasFrom, from
	a.seg.rising = hasFrom && sp != from
	a.seg.index = int(a.segSeen)
	a.seg.db = a.db
	a.segSeen++
}

// closeSegment finishes the open segment and keeps its figures (bounded). With a
// finisher running (Summarize), the figures are worked out on the finisher's goroutine
// and the accumulator carries on with a spare segment state.
func (a *Accumulator) closeSegment() {
	s := a.seg
	if s.n == 0 {
		return
	}
	s.foldHist(&a.steadyHist)
	if a.kept >= a.opts.MaxSegments {
		return
	}
	a.kept++
	if a.fin != nil {
		a.fin.work <- s
		a.seg = <-a.fin.spare
		return
	}
	a.finishSegment(s)
}

// finishSegment works out the figures, spectrum and traces of the closed segment s.
func (a *Accumulator) finishSegment(s *segState) {
	var f segFig
	f, a.buf = s.finish(&a.spec, a.buf)
	a.keepSpectrum(s)
	a.segs = append(a.segs, f)
	if len(a.zooms) < maxZooms && s.sn > 0 {
		a.zooms = append(a.zooms, s.zoom(zoomLen))
		a.zoomSeg = append(a.zoomSeg, s.index)
	}
	if f.hasStep && len(a.stepTr) < maxStepTraces {
		k := int(min(s.n, stepKeep))
		r := stepRaw{step: s.index, t: append([]float64(nil), s.stepT[:k]...),
			pv: append([]float64(nil), s.stepPV[:k]...), u: append([]int8(nil), s.stepU[:k]...)}
		a.stepTr = append(a.stepTr, r)
	}
}

// finisher finishes closed segments on a goroutine of its own, in order, so that the
// end of a segment (two FFTs and the figures) does not hold up the per-sample work of
// a whole-file pass. Only finishSegment touches the kept figures while it runs: the
// accumulator's Summary waits for it first.
type finisher struct {
	work  chan *segState // closed segments to finish; nil asks for an acknowledgement
	spare chan *segState // finished segment states, to be reused
	ack   chan struct{}
	done  chan struct{}
}

// spareSegments is the number of closed segments that may wait for the finisher.
const spareSegments = 2

// startFinisher moves the finishing of closed segments to a goroutine of its own until
// stopFinisher.
func (a *Accumulator) startFinisher() {
	if a.fin != nil {
		return
	}
	f := &finisher{work: make(chan *segState, spareSegments), spare: make(chan *segState, spareSegments+1),
		ack: make(chan struct{}), done: make(chan struct{})}
	for range spareSegments {
		f.spare <- new(segState)
	}
	go func() {
		defer close(f.done)
		for s := range f.work {
			if s == nil {
				f.ack <- struct{}{}
				continue
			}
			a.finishSegment(s)
			f.spare <- s
		}
	}()
	a.fin = f
}

// syncFinisher waits until the finisher has finished every segment handed to it.
func (a *Accumulator) syncFinisher() {
	if a.fin != nil {
		a.fin.work <- nil
		<-a.fin.ack
	}
}

// stopFinisher waits for the finisher and ends it; closed segments are then finished
// on the caller's goroutine again.
func (a *Accumulator) stopFinisher() {
	if a.fin == nil {
		return
	}
	close(a.fin.work)
	<-a.fin.done
	a.fin = nil
}

// keepSpectrum keeps the spectrum of s when its steady part is the longest so far. It
// must follow s.finish, which left the power spectrum in the workspace.
func (a *Accumulator) keepSpectrum(s *segState) {
	if s.sn <= a.bestSpec.sn || s.sn < 16 || a.spec.n == 0 {
		return
	}
	m := int(min(s.sn, int64(len(s.ring))))
	nb := a.spec.n/2 + 1
	step := max(1, nb/512)
	a.bestSpec.sn = s.sn
	a.bestSpec.freq = a.bestSpec.freq[:0]
	a.bestSpec.amp = a.bestSpec.amp[:0]
	for i := 1; i < nb; i += step {
		p := real(a.spec.coef[i])
		a.bestSpec.freq = append(a.bestSpec.freq, float64(i)/float64(a.spec.n))
		a.bestSpec.amp = append(a.bestSpec.amp, 2*math.Sqrt(math.Max(p, 0))/float64(m))
	}
}

// zoom returns the last n steady samples of s (ticks, counts, drive).
func (s *segState) zoom(n int) ZoomTrace {
	m := int(min(s.sn, int64(len(s.ring)), int64(n)))
	z := ZoomTrace{Segment: s.index, T: make([]float64, m), PV: make([]float64, m), U: make([]float64, m)}
	start := s.rpos - m
	if start < 0 {
		start += len(s.ring)
	}
	for i := 0; i < m; i++ {
		j := (start + i) % len(s.ring)
		z.T[i], z.PV[i], z.U[i] = s.ring[j].t, s.ring[j].pv, float64(s.ring[j].u)
	}
	return z
}

// overview is a min/max envelope of the whole stream in at most cap buckets: when full,
// neighbouring buckets merge and each bucket covers twice as many samples. The open
// bucket lives in scalars, so a sample costs a few comparisons.
type overview struct {
	capN        int
	width, fill int64
	t, sp, sum  []float64
	lo, hi      []float64
	cnt         []float64

	open                          bool
	ct, csp, csum, clo, chi, ccnt float64
}

func (o *overview) init(n int) {
	o.capN, o.width = n, 1
	o.t = make([]float64, 0, n)
	o.sp = make([]float64, 0, n)
	o.sum = make([]float64, 0, n)
	o.lo = make([]float64, 0, n)
	o.hi = make([]float64, 0, n)
	o.cnt = make([]float64, 0, n)
}

func (o *overview) add(t, sp, pv float64) {
	if o.open && o.fill < o.width {
		o.csp = sp
		o.csum += pv
		o.ccnt++
		if pv < o.clo {
			o.clo = pv
		}
		if pv > o.chi {
			o.chi = pv
		}
		o.fill++
		return
	}
	if o.open {
		o.flush()
	}
	o.open = true
	o.ct, o.csp, o.csum, o.clo, o.chi, o.ccnt = t, sp, pv, pv, pv, 1
	o.fill = 1
}

// flush closes the open bucket into the arrays, merging pairs when they are full.
func (o *overview) flush() {
	if len(o.t) == o.capN-1 {
		// The open bucket makes the last one: merge to keep the total within capN.
		o.t = append(o.t, o.ct)
		o.sp = append(o.sp, o.csp)
		o.sum = append(o.sum, o.csum)
		o.lo = append(o.lo, o.clo)
		o.hi = append(o.hi, o.chi)
		o.cnt = append(o.cnt, o.ccnt)
		h := o.capN / 2
		for i := 0; i < h; i++ {
			j, k := 2*i, 2*i+1
			o.t[i] = o.t[j]
			o.sp[i] = o.sp[k]
			o.sum[i] = o.sum[j] + o.sum[k]
			o.lo[i] = min(o.lo[j], o.lo[k])
			o.hi[i] = max(o.hi[j], o.hi[k])
			o.cnt[i] = o.cnt[j] + o.cnt[k]
		}
		o.t, o.sp, o.sum, o.lo, o.hi, o.cnt = o.t[:h], o.sp[:h], o.sum[:h], o.lo[:h], o.hi[:h], o.cnt[:h]
		o.width *= 2
		o.open = false
		return
	}
	o.t = append(o.t, o.ct)
	o.sp = append(o.sp, o.csp)
	o.sum = append(o.sum, o.csum)
	o.lo = append(o.lo, o.clo)
	o.hi = append(o.hi, o.chi)
	o.cnt = append(o.cnt, o.ccnt)
	o.open = false
}

// each calls fn for every bucket, the open one last.
func (o *overview) each(fn func(t, sp, mean, lo, hi float64)) {
	for i := range o.t {
		fn(o.t[i], o.sp[i], o.sum[i]/o.cnt[i], o.lo[i], o.hi[i])
	}
	if o.open {
		fn(o.ct, o.csp, o.csum/o.ccnt, o.clo, o.chi)
	}
}
