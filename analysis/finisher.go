package analysis

import (
	"math"
)

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
	s.pf = a.currentPlant()
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
	if len(a.zooms) < maxZooms && (s.sn > 0 || s.n > 1) {
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

// keepSpectrum keeps the spectrum of s when its steady part is the longest so far (a
// reached one: not the level an unreachable setpoint tops out at). It must follow
// s.finish, which left the power spectrum in the workspace.
func (a *Accumulator) keepSpectrum(s *segState) {
	if !s.steady || s.sn <= a.bestSpec.sn || s.sn < 16 || a.spec.n == 0 {
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
