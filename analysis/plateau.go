package analysis

import "math"

// The steady part of a segment that has not reached its setpoint (yet): an unreachable
// setpoint's level tops out below it (above it for one beneath the lowest level) and the
// loop keeps one drive for good. Its steady part starts where the level stops drifting:
// the mean of a block of blockMin readings within noise of the previous block's, and it
// starts over whenever a later block's mean leaves that first block's by more than noise
// allows (a slow exponential creeps by less than the threshold per block but by more over
// many). So every block of the steady part lies within the threshold of its first block:
// the level has settled at its final value within noise. The summary keeps such a steady
// part only for a segment it finds unreachable (segFig.withoutSteady drops it otherwise),
// and the reach of the setpoint ends it: the reached steady part starts afresh.

// plateauThreshold is the largest change of a block mean, in counts, that is no drift: a
// quarter count plus 4 sigma of the difference of two means of blockMin noisy readings
// (the envelope check's threshold, envelopeDrifts).
func (a *Accumulator) plateauThreshold() float64 {
	sigma := math.Sqrt(a.noiseEMA / 6)
	return 0.25 + 4*sigma*math.Sqrt(2.0/blockMin)
}

// plateau takes error e (counts) of the reading at tick of a segment that has not
// reached its setpoint, and starts, keeps or restarts its steady part (sg.plat).
func (a *Accumulator) plateau(sg *segState, e, tick float64) {
	sg.plSum += e
	sg.plN++
	if sg.plN < blockMin {
		return
	}
	m := sg.plSum / float64(sg.plN)
	sg.plSum, sg.plN = 0, 0
	thr := a.plateauThreshold()
	if sg.plat && math.Abs(m-sg.plRef) > thr {
		// The level moved on since the steady part began: it was still creeping.
		sg.clearSteady()
		sg.plat = false
	}
	if !sg.plat && sg.plHasPrev && math.Abs(m-sg.plPrev) <= thr {
		sg.plat, sg.plRef, sg.steadyAt = true, m, tick
	}
	sg.plPrev, sg.plHasPrev = m, true
}

// withoutSteady returns f without its steady part: the figures of a segment that reached
// nothing and is not unreachable either (its level stopped short within the capture, but
// the plant does not say it had to).
func (f segFig) withoutSteady() segFig {
	nan := math.NaN()
	f.sn, f.steadyAt = 0, nan
	f.meanE, f.rmsE, f.ppE, f.robPP, f.sigPP = nan, nan, nan, nan, nan
	f.duty = [3]float64{nan, nan, nan}
	f.periodSamples, f.driveTicks, f.periodWhy, f.freq = nan, nan, "", nan
	f.pattern = cycPattern{samples: nan}
	f.rests, f.switches, f.plateau = false, 0, false
	f.nodePP, f.nodeWhy, f.nodeWin = nan, "", nil
	return f
}
