package tui

import (
	"math"
	"sync"
	"time"

	tea "github.com/charmbracelet/bubbletea"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/advice"
	"github.com/caploop/caploop/telemetry"
)

// Pacing of the pipeline's hand-over to the screen.
const (
	frameInterval   = time.Second / 30       // the screen redraws at most this often
	summaryInterval = 100 * time.Millisecond // summary snapshots at most this often
	adviceInterval  = 2 * time.Second        // advice (which simulates candidates) at most this often
	statsInterval   = time.Second            // rate window
)

// EventKind says what an Event on the plot is.
type EventKind int

// Event kinds.
const (
	EventMark     EventKind = iota // the user marked the moment
	EventMeta                      // the board sent a meta line mid-stream
	EventSent                      // the host sent a command to the board
	EventState                     // link state change: unplugged, reconnected, reset
	EventNote                      // any other host note from a capture
	EventReset                     // the source restarted from the beginning (replay seek back)
	EventDeadband                  // the board confirmed a deadband (Value, counts)
	EventInfo                      // a notice for the message line only
)

// Event is something that happened at a moment of the source: shown on the plot or in
// the message line. Text is sanitised.
type Event struct {
	T     float64
	Kind  EventKind
	Text  string
	Value float64
	// Segment, for EventDeadband, is the figures of the segment that ran under the old
	// band, taken from the accumulator at the moment of the change (the running segment,
	// or the one before it when the running one has no steady part yet); SegStartS is
	// the start of the running segment, in the accumulator's clock.
	Segment   *analysis.Segment
	SegStartS float64
}

// analyzer is the part of analysis.Accumulator the pipeline uses.
type analyzer interface {
	SetMeta(m telemetry.Meta)
	Add(s telemetry.Sample)
	SetStats(st telemetry.Stats)
	Summary() *analysis.Summary
}

// adviser turns a summary into advice; it may take a while (it simulates candidates).
type adviser func(s *analysis.Summary) (*advice.Advice, error)

// mailbox is what the pipeline leaves for the screen between two frames. Points are
// bounded: when the screen lags by more than maxPoints, the oldest undelivered points
// are dropped from the display only (the analysis has seen them all).
type mailbox struct {
	points    []Point
	dropped   int64
	events    []Event
	summary   *analysis.Summary
	advice    *advice.Advice
	adviceErr string
	stats     *SourceStats
	reset     bool
	err       error
	done      bool
}

// Pipeline owns one source: its goroutine parses, analyses and fills the mailbox, and
// the screen's commands take it. Only the pipeline goroutine touches the analysis.
type Pipeline struct {
	name    string
	canSend bool
	replay  bool
	speed   float64 // initial replay speed (0 = as fast as possible)
	maxPts  int

	mu     sync.Mutex
	box    mailbox
	notify chan struct{}
	quit   chan struct{}
	once   sync.Once
	closed chan struct{} // closed when the goroutine has finished

	// Source hooks, set by the constructors.
	sendFn  func(cmd string) error
	markFn  func(note string) error
	closeFn func() error
	ctl     chan control // replay controls; nil for live sources

	// Advice runs beside the pipeline so it never holds up the analysis.
	adv    adviser
	advReq chan *analysis.Summary
	advSeq int64 // samples behind the newest advice delivered (under mu)
}

func newPipeline(name string, maxPoints int, adv adviser) *Pipeline {
	if maxPoints <= 0 {
		maxPoints = DefaultRetain
	}
	p := &Pipeline{
		name:   name,
		maxPts: maxPoints,
		notify: make(chan struct{}, 1),
		quit:   make(chan struct{}),
		closed: make(chan struct{}),
		adv:    adv,
		advReq: make(chan *analysis.Summary, 1),
	}
	if adv != nil {
		go p.adviceLoop()
	}
	return p
}

// DefaultRetain is the default number of points the screen retains for scrolling back:
// about 26 s at 10 k samples/s, 4 min at 1 k samples/s; 6 MiB.
const DefaultRetain = 1 << 18

// Name returns the source name.
func (p *Pipeline) Name() string { return p.name }

// CanSend reports whether the source takes commands (a live link).
func (p *Pipeline) CanSend() bool { return p.canSend }

// Replay reports whether the source is a replayed file with speed and seek controls.
func (p *Pipeline) Replay() bool { return p.replay }

// Send writes a command line to the board.
func (p *Pipeline) Send(cmd string) error {
	if p.sendFn == nil {
		return errNoSend
	}
	return p.sendFn(cmd)
}

// Mark stores a note in the capture (when recording) and returns once it is queued.
func (p *Pipeline) Mark(note string) error {
	if p.markFn == nil {
		return nil
	}
	return p.markFn(note)
}

// Close stops the source and waits for the pipeline goroutine to finish.
func (p *Pipeline) Close() error {
	var err error
	p.once.Do(func() {
		close(p.quit)
		if p.closeFn != nil {
			err = p.closeFn()
		}
	})
	<-p.closed
	return err
}

func (p *Pipeline) stopping() bool {
	select {
	case <-p.quit:
		return true
	default:
		return false
	}
}

// deliver moves a batch into the mailbox and wakes the screen. It never blocks on the
// screen: if the screen is behind, points pile up to maxPts and then the oldest go.
func (p *Pipeline) deliver(pts []Point, evs []Event, f func(b *mailbox)) {
	p.mu.Lock()
	b := &p.box
	b.points = append(b.points, pts...)
	if over := len(b.points) - p.maxPts; over > 0 {
		// Drop half the backlog at once so the copy is amortised.
		k := over + p.maxPts/2
		if k > len(b.points) {
			k = len(b.points)
		}
		n := copy(b.points, b.points[k:])
		b.points = b.points[:n]
		b.dropped += int64(k)
	}
	b.events = append(b.events, evs...)
	if f != nil {
		f(b)
	}
	p.mu.Unlock()
	select {
	case p.notify <- struct{}{}:
	default:
	}
}

// take empties the mailbox.
func (p *Pipeline) take() mailbox {
	p.mu.Lock()
	b := p.box
	p.box = mailbox{points: make([]Point, 0, min(cap(b.points), 1<<14)), dropped: b.dropped}
	p.mu.Unlock()
	return b
}

func (p *Pipeline) adviceLoop() {
	for {
		select {
		case <-p.quit:
			return
		case s := <-p.advReq:
			p.deliverAdvice(s)
		}
	}
}

// deliverAdvice computes the advice for s and hands it to the screen, unless advice for
// a newer summary got there first (the final advice must not be overwritten by a late
// one for an older summary).
func (p *Pipeline) deliverAdvice(s *analysis.Summary) {
	a, err := p.adv(s)
	es := ""
	if err != nil {
		es = telemetry.Sanitize([]byte(err.Error()))
	}
	p.deliver(nil, nil, func(b *mailbox) {
		if s.Samples < p.advSeq {
			return
		}
		p.advSeq = s.Samples
		b.advice, b.adviceErr = a, es
	})
}

// requestAdvice hands the newest summary to the advice goroutine, replacing a waiting one.
func (p *Pipeline) requestAdvice(s *analysis.Summary) {
	if p.adv == nil {
		return
	}
	for {
		select {
		case p.advReq <- s:
			return
		default:
		}
		select {
		case <-p.advReq:
		default:
		}
	}
}

// Messages from the pipeline to the screen.
type (
	samplesMsg struct {
		src *Pipeline
		box mailbox
	}
	sourceErrMsg struct {
		src *Pipeline
		err error
	}
	sourceDoneMsg struct{ src *Pipeline }
)

// wait returns the command that waits for the next frame's worth of data, no sooner
// than frameInterval after the previous one.
func (p *Pipeline) wait(since time.Time) tea.Cmd {
	return func() tea.Msg {
		if d := time.Until(since.Add(frameInterval)); d > 0 {
			time.Sleep(d)
		}
		select {
		case <-p.notify:
		case <-p.closed:
		}
		b := p.take()
		switch {
		case b.err != nil && len(b.points) == 0 && b.summary == nil:
			return sourceErrMsg{p, b.err}
		case b.done && len(b.points) == 0 && b.summary == nil && b.advice == nil:
			return sourceDoneMsg{p}
		}
		return samplesMsg{p, b}
	}
}

// core is the per-sample work every source shares: time base, display points, analysis,
// counters and pacing of snapshots. It runs on the pipeline goroutine only.
type core struct {
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
	stats    SourceStats
	now      func() time.Time

	lastSum    time.Time
	lastAdv    time.Time
	rateAt     time.Time
	rateCount  int64
	statsExtra func(st *SourceStats)
	lineStats  func() telemetry.Stats // the parser's counts, for the rejected lines

	sumSamples int64 // samples at the last summary

	connectedAt time.Time // live: last (re)connection
	asked       bool      // live: "info" sent since it
}

func newCore(p *Pipeline, newAcc func() analyzer) *core {
	c := &core{p: p, newAcc: newAcc, now: time.Now}
	c.acc = newAcc()
	c.stats.Name = p.name
	c.rateAt = c.now()
	return c
}

// restart forgets everything (replay seek back).
func (c *core) restart() {
	c.acc = c.newAcc()
	c.meta = telemetry.Meta{}
	c.haveT0, c.haveN = false, false
	c.lastT, c.samples, c.rejected, c.gaps = 0, 0, 0, 0
	c.sumSamples = -1
	c.pts = c.pts[:0]
	c.evs = c.evs[:0]
	c.p.deliver(nil, nil, func(b *mailbox) {
		b.points = b.points[:0]
		b.events = b.events[:0]
		b.reset = true
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
func (c *core) seconds(s telemetry.Sample) float64 {
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

func (c *core) setMeta(m telemetry.Meta) {
	old := c.meta
	c.meta = c.meta.Merge(m)
	c.acc.SetMeta(c.meta)
	// A deadband change mid-stream (not the first report, not a repeat) is an event
	// carrying the figures of the segment that ran under the old band.
	if m.Has(telemetry.FieldDeadband) && c.samples > 0 && old.Has(telemetry.FieldDeadband) && old.Deadband != m.Deadband {
		ev := Event{T: c.lastT, Kind: EventDeadband, Value: m.Deadband,
			Text: "deadband " + ftoa(old.Deadband) + "→" + ftoa(m.Deadband)}
		sum := c.acc.Summary()
		if seg := currentSegment(sum); seg != nil {
			s := *seg
			ev.Segment = &s
		}
		if n := len(sum.Segments); n > 0 {
			ev.SegStartS = sum.Segments[n-1].StartS
		}
		c.evs = append(c.evs, ev)
	}
}

func (c *core) event(kind EventKind, text string) {
	c.evs = append(c.evs, Event{T: c.lastT, Kind: kind, Text: text})
}

func (c *core) sample(s telemetry.Sample) float64 {
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
func (c *core) flush(force bool) {
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
			c.p.requestAdvice(sum)
			c.lastAdv = now
		}
	}
	var st *SourceStats
	if d := now.Sub(c.rateAt); d >= statsInterval || force || sum != nil {
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
	c.p.deliver(c.pts, c.evs, func(b *mailbox) {
		if sum != nil {
			b.summary = sum
		}
		if st != nil {
			b.stats = st
		}
	})
	c.pts = c.pts[:0]
	c.evs = c.evs[:0]
}

// finish delivers the final summary and advice (computed here, so the last figures are
// complete) and the end or the error of the source.
func (c *core) finish(err error) {
	c.flush(true)
	if c.p.adv != nil {
		c.p.deliverAdvice(c.acc.Summary())
	}
	c.p.deliver(nil, nil, func(b *mailbox) {
		b.err = err
		b.done = true
	})
}
