package analysis

import (
	"math"
	"strings"

	"github.com/caploop/caploop/telemetry"
)

// histHalf is the half-width of the per-segment error histograms, in counts; errors
// beyond it land in the edge bins.
const histHalf = 1024

// trigLen is the longest limit cycle, in samples, the onset-aligned average follows.
const trigLen = 512

// stepKeep is the number of samples kept after a setpoint change for the step plot.
const stepKeep = 256

// segState is the running state of the open segment. Its arrays are cleared lazily
// (only the touched range) so that a new segment costs little however short it is.
type segState struct {
	sp, from   float64
	hasFrom    bool
	index      int
	start, end float64 // ticks
	n          int64
	firstSign  int8
	steady     bool  // in the steady part (provisional until firm)
	firm       bool  // the steady part restarted at the first onset after the reach
	reachN     int64 // sample number (1-based) at which the setpoint was reached
	// Drift of the envelope after the first onset: the mean error over blocks of whole
	// cycles (charge onset to charge onset, at least blockMin samples); while two blocks
	// in a row differ by more than noise allows, the steady part starts over at the
	// next block. envOK: a block matched its predecessor, the envelope has stopped.
	blkSum, blkPrev float64
	// lowest and highest error of the open block and of the previous one
	blkLo, blkHi, blkPrevLo, blkPrevHi float64
	blkN                               int64
	hasPrev, envOK                     bool
	steadyAt                           float64
	db                                 float64
	sawHold                            bool
	rising                             bool // a step whose 10 % or 90 % crossing is still to come
	trk                                bool // opened by a tracking move (see Tracking)
	// Before the reach: blocks of blockMin readings while the level approaches (see
	// plateau). plat: a steady part without the reach runs, the level has stopped
	// drifting (within plRef's threshold) short of the setpoint.
	plSum, plPrev, plRef float64
	plN                  int64
	plHasPrev, plat      bool

	// whole segment
	minPV, maxPV   float64
	prevIn         bool
	prevU          telemetry.Drive
	entries, exits int64
	noiseExits     int64
	t10, t90       float64
	has10, has90   bool
	lastSeen       [2*histHalf + 1]int64 // number (1-based) of the last sample in each error bin
	lsLo, lsHi     int
	endRun         int64 // samples with the same drive at the end
	// Lowest and highest error over the end run: the ripple of a loop that rests,
	// measured after its last transient.
	endMinE, endMaxE float64
	lastPV           float64
	stepT, stepPV    [stepKeep]float64
	stepU            [stepKeep]int8
	tail             [tailLen]float64 // the last readings, for the level an unreachable setpoint sits at

	// steady part
	sn              int64
	sumE, sumE2     float64
	minE, maxE      float64
	half            HalfRange // extremes by blocks, for max - min over the last half
	hist            [2*histHalf + 1]uint32
	hLo, hHi        int
	duty            [3]int64 // discharge, hold, charge
	switches, jumps int64
	onsets          int64 // charge onsets
	firstOn, lastOn float64
	dOnsets         int64 // discharge onsets
	firstDOn        float64
	lastDOn         float64
	sprev           telemetry.Drive
	ring            []ringEntry // last Window steady readings
	rpos            int
	node            []nodeEntry // last nodeLen steady readings, for the node ripple
	npos            int
	nodeTmp         []nodeEntry // nodeWindow's copy of a window that wraps round node
	trigSum         [trigLen]float64
	trigCnt         [trigLen]int32
	trigMax         int
	trigJ           int // offset since the last charge onset, -1 before the first

	pf plantFit // the plant identified when the segment closed (for its node ripple)
}

// blockMin is the fewest samples in one block of whole cycles of the drift check.
const blockMin = 64

// tailLen is the number of last readings kept for the level of a segment.
const tailLen = 64

// ringEntry is one steady reading kept in the ring: counts, tick and drive.
// maxNodeRetries bounds the segments whose steady window is kept to work out the node
// ripple again with the summary's plant (512 entries of 24 bytes each).
const maxNodeRetries = 64

type ringEntry struct {
	pv, t float64
	u     int8
}

// nodeLen is the number of last steady readings and drives kept for the node ripple
// (8 bytes each): enough for 4 time constants of a loop at tau 1000 T (see nodeSpan).
const nodeLen = 4096

// nodeEntry is one steady reading kept for the node ripple: counts and drive.
type nodeEntry struct {
	pv float32
	u  int8
}

// binOf returns the histogram bin of error e: round(e) + histHalf, clamped.
func binOf(e float64) int {
	x := e + histHalf + 0.5
	if !(x >= 0) { // also NaN
		return 0
	}
	if x >= 2*histHalf {
		return 2 * histHalf
	}
	return int(x) // x >= 0: truncation is floor
}

// reset prepares s for a new segment.
func (s *segState) reset(window int) {
	for i := s.lsLo; i <= s.lsHi && s.n > 0; i++ {
		s.lastSeen[i] = 0
	}
	if len(s.ring) != window {
		s.ring = make([]ringEntry, window)
	}
	if s.node == nil {
		s.node = make([]nodeEntry, nodeLen)
	}
	ring := s.ring
	s.sp, s.from, s.hasFrom, s.index = 0, 0, false, 0
	s.start, s.end, s.n, s.firstSign, s.steady, s.steadyAt, s.db, s.sawHold = 0, 0, 0, 0, false, 0, 0, false
	s.firm, s.reachN = false, 0
	s.blkSum, s.blkPrev, s.blkN, s.hasPrev, s.envOK = 0, 0, 0, false, false
	s.blkLo, s.blkHi = math.Inf(1), math.Inf(-1)
	s.plSum, s.plPrev, s.plRef, s.plN, s.plHasPrev, s.plat = 0, 0, 0, 0, false, false
	s.minPV, s.maxPV, s.prevIn, s.prevU = math.Inf(1), math.Inf(-1), false, 0
	s.trk = false
	s.entries, s.exits, s.noiseExits = 0, 0, 0
	s.t10, s.t90, s.has10, s.has90, s.rising = 0, 0, false, false, false
	s.lsLo, s.lsHi = 2*histHalf, 0
	s.endRun, s.lastPV, s.endMinE, s.endMaxE = 0, 0, 0, 0
	s.ring = ring
	s.clearSteady()
}

// clearSteady empties the steady part's figures: at a new segment, and when the steady
// part restarts at the first drive onset after the setpoint was reached.
func (s *segState) clearSteady() {
	for i := s.hLo; i <= s.hHi && s.sn > 0; i++ {
		s.hist[i] = 0
	}
	for i := 0; i < s.trigMax; i++ {
		s.trigSum[i], s.trigCnt[i] = 0, 0
	}
	s.sn, s.sumE, s.sumE2, s.minE, s.maxE = 0, 0, 0, math.Inf(1), math.Inf(-1)
	s.half.Reset()
	s.hLo, s.hHi = 2*histHalf, 0
	s.duty = [3]int64{}
	s.switches, s.jumps, s.onsets, s.firstOn, s.lastOn, s.sprev = 0, 0, 0, 0, 0, 0
	s.dOnsets, s.firstDOn, s.lastDOn = 0, 0, 0
	s.rpos, s.npos = 0, 0
	s.trigMax, s.trigJ = 0, -1
}

// foldHist adds the error histogram of the steady part to h.
// Only a reached steady part counts: the level an unreachable setpoint tops out at is
// no error of the loop's regulation.
func (s *segState) foldHist(h *[2*histHalf + 1]int64) {
	if !s.steady {
		return
	}
	for i := s.hLo; i <= s.hHi && s.sn > 0; i++ {
		h[i] += int64(s.hist[i])
	}
}

func sign(e float64) int8 {
	switch {
	case e > 0:
		return 1
	case e < 0:
		return -1
	}
	return 0
}

// window copies the kept steady readings, oldest first, into dst.
func (s *segState) window(dst []float64) []float64 {
	m := int(min(s.sn, int64(len(s.ring))))
	dst = dst[:0]
	start := s.rpos - m
	if start < 0 {
		start += len(s.ring)
	}
	for i := 0; i < m; i++ {
		j := start + i
		if j >= len(s.ring) {
			j -= len(s.ring)
		}
		dst = append(dst, s.ring[j].pv)
	}
	return dst
}

// quantile returns the error (counts) below which a fraction q of the steady samples lie,
// from the histogram (1-count bins).
func (s *segState) quantile(q float64) float64 {
	if s.sn == 0 {
		return math.NaN()
	}
	want := q * float64(s.sn)
	var c float64
	for i := s.hLo; i <= s.hHi; i++ {
		c += float64(s.hist[i])
		if c > want {
			return float64(i - histHalf)
		}
	}
	return float64(s.hHi - histHalf)
}

// segFig is a finished (or provisional) segment in counts and ticks; NaN where a figure
// does not apply. The Summary converts it to volts and seconds.
type segFig struct {
	index                   int
	sp, db                  float64
	start, end, steadyAt    float64
	n, sn                   int64
	settled                 bool
	meanE, rmsE, ppE, robPP float64
	sigPP                   float64
	duty                    [3]float64
	periodSamples           float64 // limit cycle: mean interval between onsets, samples
	periodWhy               string  // why periodSamples is NaN
	driveTicks              float64 // mean interval between charge (else discharge) onsets
	pattern                 cycPattern
	rests                   bool    // the drive did not cycle in the steady part (segState.rests)
	plateau                 bool    // a steady part without the reach (see plateau)
	freq                    float64 // strongest line of the ripple spectrum, cycles per sample
	switches                int64
	entries, exits, jumps   int64
	noiseExits              int64
	lastU                   telemetry.Drive
	endRun                  int64
	lastPV                  float64
	level                   float64 // mean of the last readings (up to tailLen, within the end run)
	tps                     float64 // ticks per sample
	nodePP                  float64 // noise-free node p-p from the plant and the drives
	nodeWhy                 string
	nodeWin                 []nodeEntry // the node window, kept when nodePP lacked a fit
	nodeEnd                 int64       // the end run when the loop rests at the end (else 0)
	// outside[i] is the last sample number (1-based) whose error was beyond
	// outside[i].k counts (rounded); k rises, last falls. For the settling time.
	outside []outBreak
	// step into this segment
	hasStep                    bool
	from                       float64
	rise, overshoot, slewTicks float64
	trk                        bool // opened by a tracking move
}

// finish computes the figures of s without changing it (except the workspace sp).
func (s *segState) finish(ws *spectral, buf []float64) (segFig, []float64) {
	f := segFig{
		index: s.index, sp: s.sp, db: s.db, start: s.start, end: s.end, steadyAt: math.NaN(),
		n: s.n, sn: s.sn, settled: s.steady,
		meanE: math.NaN(), rmsE: math.NaN(), ppE: math.NaN(), robPP: math.NaN(), sigPP: math.NaN(),
		duty: [3]float64{math.NaN(), math.NaN(), math.NaN()}, periodSamples: math.NaN(),
		driveTicks: math.NaN(), freq: math.NaN(), nodePP: math.NaN(), pattern: cycPattern{samples: math.NaN()},
		switches: s.switches, entries: s.entries, exits: s.exits, jumps: s.jumps, noiseExits: s.noiseExits,
		lastU: s.prevU, endRun: s.endRun, lastPV: s.lastPV, trk: s.trk,
		rise: math.NaN(), overshoot: math.NaN(), slewTicks: math.NaN(),
	}
	if s.steady || s.plat {
		f.steadyAt, f.plateau = s.steadyAt, s.plat
	}
	if s.sn > 0 {
		n := float64(s.sn)
		f.meanE = s.sumE / n
		v := s.sumE2/n - f.meanE*f.meanE
		if v < 0 {
			v = 0
		}
		f.rmsE = math.Sqrt(v)
		f.ppE = s.half.PP(s.sn)
		if s.restsAtEnd() {
			// The loop bounced and then rests: its steady ripple is what it shows
			// after the last transient, the end run of one drive.
			f.ppE = s.endMaxE - s.endMinE
		}
		f.robPP = s.quantile(0.995) - s.quantile(0.005)
		for i := range f.duty {
			f.duty[i] = float64(s.duty[i]) / n
		}
		if s.onsets >= 8 {
			// The mean waveform aligned on charge onsets, over offsets that at least half
			// of the cycles reach.
			lo, hi := math.Inf(1), math.Inf(-1)
			need := int32(s.onsets / 2)
			for j := 0; j < s.trigMax; j++ {
				if s.trigCnt[j] < need || s.trigCnt[j] == 0 {
					break
				}
				m := s.trigSum[j] / float64(s.trigCnt[j])
				lo, hi = min(lo, m), max(hi, m)
			}
			if hi >= lo {
				f.sigPP = hi - lo
			}
		}
		f.periodSamples, f.driveTicks, f.periodWhy = s.limitCycle()
		f.rests = s.rests()
		buf = s.window(buf)
		f.freq = ws.analyse(buf)
		f.pattern = s.pattern()
		f.nodePP, f.nodeWhy = s.nodeRipple()
		if s.plat && s.switches == 0 {
			// One drive over a level that stopped drifting (see plateau): no cycle, the
			// node moves by less than the drift threshold over the whole steady part.
			f.nodePP, f.nodeWhy = 0, ""
		}
		if math.IsNaN(f.nodePP) && strings.HasSuffix(f.nodeWhy, noFitWhy) && s.index < maxNodeRetries {
			// The plant at this segment's end lacked a drive: keep the window, the
			// summary's plant may have it (a later setpoint step gives the runs).
			m := int(min(s.sn, nodeLen))
			f.nodeWin = make([]nodeEntry, m)
			for k := range f.nodeWin {
				f.nodeWin[k] = s.nodeAt(k, m)
			}
			if s.restsAtEnd() {
				f.nodeEnd = s.endRun
			}
		}
	}
	f.tps = s.ticksPerSample()
	f.level = s.level()
	f.outside = s.outsideBreaks(f.outside)
	if s.hasFrom && s.sp != s.from {
		f.hasStep, f.from = true, s.from
		if s.has10 && s.has90 {
			f.rise = s.t90 - s.t10
			if f.rise > 0 {
				f.slewTicks = 0.8 * (s.sp - s.from) / f.rise
			}
		}
		if s.sp > s.from {
			f.overshoot = max(0, s.maxPV-s.sp)
		} else {
			f.overshoot = max(0, s.sp-s.minPV)
		}
	}
	return f, buf
}

// ticksPerSample is the mean tick step of the segment (1 without board time).
func (s *segState) ticksPerSample() float64 {
	if s.n < 2 || s.end <= s.start {
		return 1
	}
	return (s.end - s.start) / float64(s.n-1)
}
