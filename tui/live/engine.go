package live

import (
	"math"
	"strconv"
	"strings"
	"time"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/advice"
	"github.com/caploop/caploop/telemetry"
)

// engine is the per-sample work every source shares: time base, display points, analysis,
// counters and pacing of snapshots. It runs on the pipeline goroutine only.
type engine struct {
	p        *Pipeline
	acc      analyzer
	newAcc   func() analyzer
	meta     telemetry.Meta
	t0       int64
	anchor   float64
	haveT0   bool
	lastT    float64
	pts      []Point
	evs      []Event
	samples  int64
	rejected int64
	gaps     int64
	lastN    int64
	haveN    bool
	stats    Stats
	now      func() time.Time

	lastSum    time.Time
	lastAdv    time.Time
	rateAt     time.Time
	rateCount  int64
	statsExtra func(st *Stats)
	lineStats  func() telemetry.Stats // the parser's counts, for the rejected lines

	sumSamples int64 // samples at the last summary

	advIn   advice.Inputs // the inputs of the newest advice asked for
	advHave bool          // advIn is set

	statsNow bool // deliver the counters with the next flush (a replay control changed them)

	connectedAt time.Time // live: last (re)connection
	asked       bool      // live: "info" sent since it
	silence     *silence  // live: hint when a connected port gives no reading
	linkLines   func() int64
}

func newEngine(p *Pipeline, newAcc func() analyzer) *engine {
	c := &engine{p: p, newAcc: newAcc, now: time.Now}
	c.acc = newAcc()
	c.stats.Name = p.name
	c.rateAt = c.now()
	return c
}

// restart forgets everything (replay seek back).
func (c *engine) restart() {
	c.acc = c.newAcc()
	c.meta = telemetry.Meta{}
	c.haveT0, c.haveN = false, false
	c.lastT, c.samples, c.rejected, c.gaps = 0, 0, 0, 0
	c.sumSamples = -1
	c.advHave = false
	c.pts = c.pts[:0]
	c.evs = c.evs[:0]
	c.p.deliver(nil, nil, func(b *Snapshot) {
		b.Points = b.Points[:0]
		b.Events = b.Events[:0]
		b.Reset = true
		c.p.advSeq = 0
	})
}

// maxClockJump is the largest forward jump of board time, in seconds, taken as real
// (a dropout) when there is no host clock to check it against.
const maxClockJump = 60

// seconds returns the sample's time on the screen's clock. With both board time t and
// host time, it follows t (precise) anchored to the host clock, and re-anchors when they
// drift apart by more than a second (board reset, reconnect); with one of them it uses
// that one; with neither, the sample index times the period. The result never goes back.
func (c *engine) seconds(s telemetry.Sample) float64 {
	var t float64
	hasT, hasHost := s.Has(telemetry.HasT), s.Has(telemetry.HasHost)
	switch {
	case hasT && hasHost:
		host := float64(s.Host) / 1e9
		if !c.haveT0 {
			c.t0, c.anchor, c.haveT0 = s.T, host, true
		}
		t = c.anchor + float64(s.T-c.t0)/1e6
		if math.Abs(t-host) > 1 {
			c.t0, c.anchor = s.T, host
			t = host
		}
	case hasT:
		if !c.haveT0 {
			c.t0, c.haveT0 = s.T, true
		}
		t = float64(s.T-c.t0) / 1e6
		// Without host times a board reset shows only as a jump of t: back, or (read as
		// a wrap of the 32-bit clock) far ahead. Continue the screen's clock from here.
		if t < c.lastT-1 || t > c.lastT+maxClockJump {
			c.t0 = s.T - int64(c.lastT*1e6)
			t = c.lastT
		}
	case hasHost:
		t = float64(s.Host) / 1e9
	default:
		per := c.meta.Period
		if !c.meta.Has(telemetry.FieldPeriod) || per <= 0 {
			per = 1e-3
		}
		t = float64(s.Index) * per
	}
	if t < c.lastT {
		t = c.lastT
	}
	return t
}

func (c *engine) setMeta(m telemetry.Meta) {
	old := c.meta
	c.meta = c.meta.Merge(m)
	c.acc.SetMeta(c.meta)
	c.metaEvent(old, m)
	// A deadband change mid-stream (not the first report, not a repeat) is an event
	// carrying the figures of the segment that ran under the old band.
	if m.Has(telemetry.FieldDeadband) && c.samples > 0 && old.Has(telemetry.FieldDeadband) && old.Deadband != m.Deadband {
		ev := Event{T: c.lastT, Kind: EventDeadband, Value: m.Deadband,
			Text: "deadband " + ftoa(old.Deadband) + "→" + ftoa(m.Deadband)}
		sum := c.acc.Summary()
		if seg := CurrentSegment(sum); seg != nil {
			s := *seg
			ev.Segment = &s
		}
		if n := len(sum.Segments); n > 0 {
			ev.SegStartS = sum.Segments[n-1].StartS
		}
		c.evs = append(c.evs, ev)
	}
}

func (c *engine) event(kind EventKind, text string) {
	ev := Event{T: c.lastT, Kind: kind, Text: text}
	if kind == EventSent && strings.HasPrefix(text, "set ") && c.samples > 0 {
		// A change of settings: the screen tells the diagnostics before it from those after.
		if sum := c.acc.Summary(); len(sum.Segments) > 0 {
			ev.SegStartS = sum.Segments[len(sum.Segments)-1].StartS
		}
	}
	c.evs = append(c.evs, ev)
}

func (c *engine) sample(s telemetry.Sample) float64 {
	c.acc.Add(s)
	c.samples++
	if s.Has(telemetry.HasN) {
		if c.haveN && s.N > c.lastN+1 {
			c.gaps += s.N - c.lastN - 1
		}
		c.lastN, c.haveN = s.N, true
	}
	t := c.seconds(s)
	c.lastT = t
	sp, pv, db := s.SP, s.PV, -1.0
	if c.meta.Has(telemetry.FieldDeadband) {
		db = c.meta.Deadband
	}
	if lsb := c.meta.LSB(); !math.IsNaN(lsb) {
		sp, pv = sp*lsb, pv*lsb
		if db >= 0 {
			db *= lsb
		}
	}
	c.pts = append(c.pts, Point{T: t, SP: float32(sp), PV: float32(pv), DB: float32(db), U: int8(s.U)})
	return t
}

// flush hands the batch to the screen, with a summary snapshot when one is due.
func (c *engine) flush(force bool) {
	now := c.now()
	var sum *analysis.Summary
	// A new summary only when samples came in since the last one (or at the end): a held
	// or ended source costs nothing.
	if force || (now.Sub(c.lastSum) >= summaryInterval && c.samples != c.sumSamples) {
		c.sumSamples = c.samples
		if c.lineStats != nil {
			ls := c.lineStats()
			c.rejected = ls.Rejected
			c.acc.SetStats(ls)
		} else {
			c.acc.SetStats(telemetry.Stats{Samples: c.samples, Rejected: c.rejected})
		}
		sum = c.acc.Summary()
		c.lastSum = now
		if force || now.Sub(c.lastAdv) >= adviceInterval {
			c.p.requestAdvice(sum, !c.adviceDue(sum, force))
			c.lastAdv = now
		}
	}
	var st *Stats
	if d := now.Sub(c.rateAt); d >= statsInterval || force || sum != nil || c.statsNow {
		c.statsNow = false
		if d >= statsInterval {
			c.stats.Rate = float64(c.samples-c.rateCount) / d.Seconds()
			c.rateAt, c.rateCount = now, c.samples
		}
		c.stats.Samples, c.stats.Rejected = c.samples, c.rejected
		if sum != nil {
			c.stats.Gaps = max(sum.Gaps, c.gaps)
		} else {
			c.stats.Gaps = max(c.stats.Gaps, c.gaps)
		}
		if c.statsExtra != nil {
			c.statsExtra(&c.stats)
		}
		s := c.stats
		st = &s
	}
	if len(c.pts) == 0 && len(c.evs) == 0 && sum == nil && st == nil {
		return
	}
	c.p.deliver(c.pts, c.evs, func(b *Snapshot) {
		if sum != nil {
			b.Summary = sum
		}
		if st != nil {
			b.Stats = st
		}
	})
	c.pts = c.pts[:0]
	c.evs = c.evs[:0]
}

// adviceDue reports whether the advice should run for sum: always when forced or when
// the pipeline cannot tell the advice's inputs, else only when they moved materially
// (adviceRel) from those of the newest advice asked for. Advice simulates candidates;
// a board running steady would otherwise pay for the same answer every adviceInterval.
// When it is not due, the last advice is handed over again for sum: the screen still
// sees an update every adviceInterval (its "same deadband 3 updates running" counts
// them), and it is the advice these inputs give.
func (c *engine) adviceDue(sum *analysis.Summary, force bool) bool {
	if c.p.advIn == nil {
		return true
	}
	in := c.p.advIn(sum)
	if !force && c.advHave && in.Near(c.advIn, adviceRel) {
		return false
	}
	c.advIn, c.advHave = in, true
	return true
}

// finish delivers the final summary and advice (computed here, so the last figures are
// complete) and the end or the error of the source.
func (c *engine) finish(err error) {
	c.flush(true)
	if c.p.adv != nil {
		c.p.deliverAdvice(c.acc.Summary())
	}
	c.p.deliver(nil, nil, func(b *Snapshot) {
		b.Err = err
		b.Done = true
	})
}

// CurrentSegment returns the newest segment with a steady part, or the newest one; nil
// when there is none.
func CurrentSegment(s *analysis.Summary) *analysis.Segment {
	if s == nil || len(s.Segments) == 0 {
		return nil
	}
	for i := len(s.Segments) - 1; i >= 0; i-- {
		if s.Segments[i].SteadySamples > 0 {
			return &s.Segments[i]
		}
	}
	return &s.Segments[len(s.Segments)-1]
}

func ftoa(v float64) string { return strconv.FormatFloat(v, 'f', -1, 64) }
