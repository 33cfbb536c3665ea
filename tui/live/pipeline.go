package live

import (
	"errors"
	"fmt"
	"sync"
	"time"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/advice"
	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/wire"
)

// Pacing of the pipeline's hand-over to the screen.
const (
	summaryInterval = 100 * time.Millisecond // summary snapshots at most this often
	adviceInterval  = 2 * time.Second        // advice (which simulates candidates) at most this often
	// adviceRel is how far (a fraction) a measured input of the advice (tau, noise,
	// load, ...) must move from the one the shown advice was made from before the
	// advice runs again; a change of anything else (deadband, setpoints, board) counts
	// at once. The measured figures wander by less than this on a steady board.
	adviceRel     = 0.03
	statsInterval = time.Second // rate window
)

// DefaultRetain is the default number of points a pipeline holds for a lagging screen,
// and the screen retains for scrolling back: about 26 s at 10 k samples/s, 4 min at
// 1 k samples/s; 6 MiB.
const DefaultRetain = 1 << 18

// ErrNoSend is returned by Send on a source that does not take commands.
var ErrNoSend = errors.New("live: this source does not take commands")

// Point is one sample as the screen keeps it: time in seconds from the start of the
// source, setpoint, measurement and deadband half-width in display units (volts, or
// counts when the board did not say its reference), and the drive.
type Point struct {
	T  float64
	SP float32
	PV float32
	DB float32 // half-width of the band around SP; negative when unknown
	U  int8
}

// Stats are the counters of a source.
type Stats struct {
	Name        string  // source name: port path, file name, "virtual board"
	State       string  // "connected", "UNPLUGGED, ...", "waiting for the port"; a replay: StateHeld, StateRunning, StateEnded
	Samples     int64   // samples analysed
	Rate        float64 // samples per second, recent
	Rejected    int64   // rejected lines
	Gaps        int64   // missing samples seen from t or n
	Dropped     int64   // points not delivered to the display (the analysis has them all)
	Lost        int64   // lines the link could not hand over in time (recorded, not analysed)
	Recording   string  // capture file name, "" when not recording
	RecordBytes int64   // capture size so far
	Speed       float64 // replay speed, 0 = as fast as possible
	Position    float64 // replay position, s
}

// The states of a replay, in Stats.State.
const (
	StateHeld    = "held"
	StateRunning = "running"
	StateEnded   = "ended"
)

// EventKind says what an Event is.
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
	EventJump                      // a replay jumped (Text: the landmark; Value: the time, or -1 and Text says none was found)
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
	// the start of the running segment, in the accumulator's clock (also for EventSent
	// of a `set` line: segments that start later ran under the new settings).
	Segment   *analysis.Segment
	SegStartS float64
}

// Snapshot is what the pipeline leaves for the screen between two frames. Points are
// bounded: when the screen lags by more than the pipeline's retain count, the oldest
// undelivered points are dropped from the display only (the analysis has seen them all).
type Snapshot struct {
	Points    []Point
	Dropped   int64 // points dropped from the display since the start
	Events    []Event
	Summary   *analysis.Summary // nil: no new summary since the last snapshot
	Advice    *advice.Advice    // nil: no new advice
	AdviceErr string
	Stats     *Stats // nil: no new counters
	Reset     bool   // the source restarted: forget the points shown so far
	Err       error  // the source failed
	Done      bool   // the source ended
}

// Empty reports whether the snapshot carries nothing for the screen but an end or an
// error.
func (s *Snapshot) Empty() bool {
	return len(s.Points) == 0 && s.Summary == nil && s.Advice == nil
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

// Pipeline owns one source: its goroutine parses, analyses and fills the snapshot, and
// the screen takes it. Only the pipeline goroutine touches the analysis.
type Pipeline struct {
	name    string
	canSend bool
	replay  bool
	speed   float64 // initial replay speed (0 = as fast as possible)
	held    bool    // the replay starts held
	maxPts  int

	mu       sync.Mutex
	box      Snapshot
	notify   chan struct{}
	quit     chan struct{}
	once     sync.Once
	closeErr error         // set once by Close
	closed   chan struct{} // closed when the goroutine has finished

	// Source hooks, set by the constructors.
	sendFn  func(cmd string) error
	markFn  func(note string) error
	closeFn func() error
	notesFn func() []string // QuitNotes; nil = nothing to say
	ctl     chan control    // replay controls; nil for live sources

	// Advice runs beside the pipeline so it never holds up the analysis.
	adv    adviser
	advIn  func(s *analysis.Summary) advice.Inputs // what adv designs from; nil = always advise
	advReq chan adviceReq
	advSeq int64 // samples behind the newest advice delivered (under mu)

	// A tune run driven over the link (tunerun.go); link is nil on other sources.
	link   *wire.Link
	tuneMu sync.Mutex
	tune   *TuneRun
	linkUp bool // the link is connected (under tuneMu)
}

func newPipeline(name string, maxPoints int, adv adviser) *Pipeline {
	if maxPoints <= 0 {
		maxPoints = DefaultRetain
	}
	p := &Pipeline{
		name:   telemetry.SanitizeN([]byte(name), 80), // a file or port name is outside text
		maxPts: maxPoints,
		notify: make(chan struct{}, 1),
		quit:   make(chan struct{}),
		closed: make(chan struct{}),
		adv:    adv,
		advReq: make(chan adviceReq, 1),
	}
	if adv != nil {
		go p.adviceLoop()
	}
	return p
}

// IdleOptions configure NewIdle.
type IdleOptions struct {
	Replay bool                   // report itself as a replay
	Send   func(cmd string) error // takes commands when not nil
}

// NewIdle returns a pipeline without a source: nothing arrives until it is closed. It
// lets a screen be driven by hand (tests, fixtures).
func NewIdle(name string, o IdleOptions) *Pipeline {
	p := newPipeline(name, 0, nil)
	p.replay = o.Replay
	p.canSend = o.Send != nil
	p.sendFn = o.Send
	p.closeFn = func() error { close(p.closed); return nil }
	return p
}

// Name returns the source name.
func (p *Pipeline) Name() string { return p.name }

// CanSend reports whether the source takes commands (a live link).
func (p *Pipeline) CanSend() bool { return p.canSend }

// Replay reports whether the source is a replayed file with speed and seek controls.
func (p *Pipeline) Replay() bool { return p.replay }

// Held reports whether the replay started held.
func (p *Pipeline) Held() bool { return p.held }

// Speed returns the replay speed the pipeline started with (0 = as fast as possible).
func (p *Pipeline) Speed() float64 { return p.speed }

// Send writes a command line to the board.
func (p *Pipeline) Send(cmd string) error {
	if p.sendFn == nil {
		return ErrNoSend
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

// CloseWait bounds how long Close waits for the source to stop: a quit must end the
// program within a second even when the input is blocked (a FIFO whose writer stays
// open, a stuck device). The link flushes its capture within its own, shorter bound.
const CloseWait = 500 * time.Millisecond

// ErrStillBlocked is returned (wrapped) by Close when the source was still blocked in a
// read or write after CloseWait; it was left behind, which is harmless when the program
// ends next.
var ErrStillBlocked = errors.New("the input was still blocked; left it")

// Close stops the source and waits up to CloseWait for it and the pipeline goroutine to
// finish. It returns the source's close error (a recording that could not be written),
// or ErrStillBlocked.
func (p *Pipeline) Close() error {
	p.once.Do(func() {
		p.stopTune() // restore the board's settings while the link still reads
		close(p.quit)
		done := make(chan error, 1)
		go func() {
			var err error
			if p.closeFn != nil {
				err = p.closeFn()
			}
			<-p.closed
			done <- err
		}()
		t := time.NewTimer(CloseWait)
		defer t.Stop()
		select {
		case p.closeErr = <-done:
		case <-t.C:
			p.closeErr = fmt.Errorf("%s: %w", p.name, ErrStillBlocked)
		}
	})
	return p.closeErr
}

// Ready returns a channel that receives when a new snapshot waits to be taken.
func (p *Pipeline) Ready() <-chan struct{} { return p.notify }

// Done returns a channel closed once the pipeline has stopped (after Close).
func (p *Pipeline) Done() <-chan struct{} { return p.closed }

// Take returns the snapshot gathered since the last Take and starts a new one. It
// never blocks on the source.
func (p *Pipeline) Take() Snapshot {
	p.mu.Lock()
	b := p.box
	p.box = Snapshot{Points: make([]Point, 0, min(cap(b.Points), 1<<14)), Dropped: b.Dropped}
	p.mu.Unlock()
	return b
}

// deliver moves a batch into the snapshot and wakes the screen. It never blocks on the
// screen: if the screen is behind, points pile up to maxPts and then the oldest go.
func (p *Pipeline) deliver(pts []Point, evs []Event, f func(b *Snapshot)) {
	p.mu.Lock()
	b := &p.box
	b.Points = append(b.Points, pts...)
	if over := len(b.Points) - p.maxPts; over > 0 {
		// Drop half the backlog at once so the copy is amortised.
		k := over + p.maxPts/2
		if k > len(b.Points) {
			k = len(b.Points)
		}
		n := copy(b.Points, b.Points[k:])
		b.Points = b.Points[:n]
		b.Dropped += int64(k)
	}
	b.Events = append(b.Events, evs...)
	if f != nil {
		f(b)
	}
	p.mu.Unlock()
	select {
	case p.notify <- struct{}{}:
	default:
	}
}

// adviceReq asks the advice goroutine for the advice of a summary; again says the
// advice's inputs have not moved materially since the last one it computed, which it
// hands over once more, for this summary, instead of simulating the same candidates.
type adviceReq struct {
	s     *analysis.Summary
	again bool
}

func (p *Pipeline) adviceLoop() {
	var last *advice.Advice
	var lastErr error
	have := false
	for {
		select {
		case <-p.quit:
			return
		case r := <-p.advReq:
			if !r.again || !have {
				last, lastErr = p.adv(r.s)
				have = true
			}
			p.handAdvice(r.s, last, lastErr)
		}
	}
}

// deliverAdvice computes the advice for s and hands it to the screen.
func (p *Pipeline) deliverAdvice(s *analysis.Summary) {
	a, err := p.adv(s)
	p.handAdvice(s, a, err)
}

// handAdvice hands the advice for s to the screen, unless advice for a newer summary got
// there first (the final advice must not be overwritten by a late one for an older
// summary).
func (p *Pipeline) handAdvice(s *analysis.Summary, a *advice.Advice, err error) {
	es := ""
	if err != nil {
		es = telemetry.Sanitize([]byte(err.Error()))
	}
	p.deliver(nil, nil, func(b *Snapshot) {
		if s.Samples < p.advSeq {
			return
		}
		p.advSeq = s.Samples
		b.Advice, b.AdviceErr = a, es
	})
}

// requestAdvice hands the newest summary to the advice goroutine, replacing a waiting
// one; again is set when the advice's inputs are those of the last request.
func (p *Pipeline) requestAdvice(s *analysis.Summary, again bool) {
	if p.adv == nil {
		return
	}
	r := adviceReq{s: s, again: again}
	for {
		select {
		case p.advReq <- r:
			return
		default:
		}
		select {
		case old := <-p.advReq:
			// The replaced request may have been the one with the new inputs.
			r.again = r.again && old.again
		default:
		}
	}
}

// control is a request from the screen to a replay: hold (1) or run (-1), change the
// speed, step ahead by some seconds while held, seek by some seconds, or jump to the
// next (dir 1) or previous (dir -1) landmark or to a fraction of the capture (>= 0).
type control struct {
	pause    int
	speed    float64
	setSpeed bool
	step     float64
	seek     float64
	jump     bool
	landmark Landmark
	dir      int
	fraction float64
}

// control hands c to the replay goroutine without blocking the screen; live sources
// ignore it.
func (p *Pipeline) control(c control) {
	if p.ctl == nil {
		return
	}
	select {
	case p.ctl <- c:
	default:
	}
}

// Hold holds a replay where it is; live sources ignore it.
func (p *Pipeline) Hold() { p.control(control{pause: 1}) }

// Run resumes a held replay.
func (p *Pipeline) Run() { p.control(control{pause: -1}) }

// SetSpeed sets a replay's speed: 1 is real time, 0 as fast as possible.
func (p *Pipeline) SetSpeed(speed float64) { p.control(control{speed: speed, setSpeed: true}) }

// Step plays a held replay ahead by the given seconds of capture time and holds again.
func (p *Pipeline) Step(seconds float64) { p.control(control{step: seconds}) }

// Next jumps a replay to the next landmark of kind l; the snapshot's EventJump says
// where it went, or that there is none.
func (p *Pipeline) Next(l Landmark) {
	p.control(control{jump: true, landmark: l, dir: 1, fraction: -1})
}

// Prev jumps a replay back to the previous landmark of kind l.
func (p *Pipeline) Prev(l Landmark) {
	p.control(control{jump: true, landmark: l, dir: -1, fraction: -1})
}

// SeekFraction moves a replay to a fraction f (0..1) of the way through the capture,
// back or ahead, also after its end: 0 rewinds it.
func (p *Pipeline) SeekFraction(f float64) { p.control(control{jump: true, fraction: f}) }

// Seek moves a replay by the given seconds: ahead (positive) or back (negative, which
// restarts the analysis from the start of the capture and plays up to the target).
func (p *Pipeline) Seek(seconds float64) { p.control(control{seek: seconds}) }
