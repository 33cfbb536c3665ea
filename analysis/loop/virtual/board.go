package virtual

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"strconv"
	"strings"
	"sync"
	"time"

	"github.com/caploop/caploop/analysis/loop"
	"github.com/caploop/caploop/telemetry"
)

// DefaultVBE is the follower base-emitter drop used when a scenario has a follower
// (RE > 0) and gives no VBE: 0.65 V, the textbook silicon junction drop (common practice).
const DefaultVBE = 0.65

// Banner is the comment line a board prints first when it boots, before its meta lines.
const Banner = "# virtual board boot"

// EventKind names something that happened on the board besides a data line.
type EventKind string

// Event kinds, as they appear in Event.Kind and in the truth files.
const (
	EvBoot       EventKind = "boot"        // banner and meta lines written
	EvSet        EventKind = "set"         // a host line was applied (Detail: the answer)
	EvRejected   EventKind = "rejected"    // a host line was refused (Detail: the answer)
	EvGarbage    EventKind = "garbage"     // a run of garbage bytes (Detail: "line" or "inline")
	EvPartial    EventKind = "partial"     // a data line cut off by a reset or unplug
	EvReset      EventKind = "reset"       // the board reset
	EvUnplug     EventKind = "unplug"      // the board was unplugged
	EvReplug     EventKind = "replug"      // the board was plugged in again
	EvBurstStart EventKind = "burst_start" // a noise burst started
	EvBurstEnd   EventKind = "burst_end"   // a noise burst ended
)

// Event is one thing the board did besides writing a data line.
type Event struct {
	At     float64   `json:"at_s"` // board time since the start of the run, s
	Kind   EventKind `json:"kind"`
	Detail string    `json:"detail,omitempty"`
}

// power states of the board
const (
	stateOn      = iota
	stateBooting // reset or re-plugged: no output until the boot ends
	stateOff     // unplugged: no power, no output
)

// Board is one virtual board. Build it with NewBoard, then Run it once (directly, through
// Stream or through Serve). Send may be called from any goroutine; everything else
// belongs to the goroutine that runs the board.
type Board struct {
	sc  Scenario
	sim *loop.Sim
	rng *rand.Rand // faults: garbage bytes, cut positions

	// Speed is the real-time factor of Run with realtime true: 1 is real time, 10 is ten
	// times faster. Zero means 1. Set it before Run.
	Speed float64
	// Batch is how long Run with realtime true lets the output build up between two
	// writes, as a USB serial bridge sends what is due once per frame: fewer, larger
	// writes cost the reader fewer wake-ups. Zero means 4 ms. Set it before Run.
	Batch time.Duration
	// OnEvent, when set before Run, is called from the running goroutine for every event.
	OnEvent func(Event)

	mu     sync.Mutex
	queue  []string // host lines not yet read by the firmware
	events []Event
	ran    bool

	// running state, owned by the goroutine in Run
	k           int64   // sample periods since the start of the run
	now         float64 // board time since the start of the run, s (nominal grid)
	bootAt      float64 // model time of the first sample after the last boot, s
	bootPending bool    // the next sample is the first after a boot
	bootStart   float64 // run time of the last boot, s (profile restarts here)
	n           int64   // sequence number of the next sample, since boot
	seq         int64   // sequence number of the last sample
	lines       int64   // data lines written
	state       int
	until       float64 // end of the current boot or unplug, run time, s
	mode        telemetry.Mode
	deadband    int
	spOverride  int // -1: follow the profile
	script      int // next script command
	resetDone   bool
	unplugDone  bool
	nextGarb    float64
	burst       bool
	nextBurst   float64
	burstEnd    float64
	cfgNoise    float64
	tw          timedWriter
	out         []byte
	line        []byte
}

// Now returns the board time since the start of the run, s. Call it after Run returns,
// or from OnEvent.
func (b *Board) Now() float64 { return b.now }

// NewBoard checks sc and returns a board powered up at its start.
func NewBoard(sc Scenario) (*Board, error) {
	if err := sc.Validate(); err != nil {
		return nil, err
	}
	sc.Levels = append([]float64(nil), sc.Levels...)
	sc.Script = append([]Command(nil), sc.Script...)
	if sc.Circuit.Follower.RE > 0 && sc.Circuit.Follower.VBE == 0 {
		sc.Circuit.Follower.VBE = DefaultVBE
	}
	cfg := sc.Config()
	sim, err := loop.New(cfg)
	if err != nil {
		return nil, fmt.Errorf("virtual: %w", err)
	}
	b := &Board{
		sc:         sc,
		sim:        sim,
		rng:        rand.New(rand.NewPCG(sc.Seed, 0x626f617264)),
		mode:       sc.Mode,
		deadband:   sc.Deadband,
		spOverride: -1,
		cfgNoise:   sc.ADC.Noise,
	}
	if f := sc.Faults; f.GarbageEvery > 0 {
		b.nextGarb = f.GarbageEvery
	}
	if f := sc.Faults; f.BurstEvery > 0 {
		b.nextBurst = f.BurstEvery
	}
	return b, nil
}

// Scenario returns the scenario the board runs (a copy).
func (b *Board) Scenario() Scenario {
	sc := b.sc
	sc.Levels = append([]float64(nil), sc.Levels...)
	sc.Script = append([]Command(nil), sc.Script...)
	return sc
}

// Send queues one host-to-board line, such as "set deadband=9", as if the host had written
// it to the serial port. The firmware reads it before its next sample and answers with a
// meta line (or a "# error: ..." comment). Send never blocks; a line longer than 256 bytes
// is cut, and at most 64 lines wait (older ones are dropped, as a small UART buffer would).
func (b *Board) Send(line string) {
	line = strings.TrimRight(line, "\r\n")
	if len(line) > 256 {
		line = line[:256]
	}
	b.mu.Lock()
	if len(b.queue) >= 64 {
		b.queue = b.queue[1:]
	}
	b.queue = append(b.queue, line)
	b.mu.Unlock()
}

// Events returns what happened so far besides data lines (boots, answers, faults).
func (b *Board) Events() []Event {
	b.mu.Lock()
	defer b.mu.Unlock()
	return append([]Event(nil), b.events...)
}

// Lines returns the number of clean data lines written so far (not counting lines
// corrupted by garbage or cut off). Call it after Run returns, or
// from OnEvent.
func (b *Board) Lines() int64 { return b.lines }

func (b *Board) event(kind EventKind, detail string) {
	e := Event{At: round6(b.now), Kind: kind, Detail: detail}
	b.mu.Lock()
	b.events = append(b.events, e)
	b.mu.Unlock()
	if b.OnEvent != nil {
		b.OnEvent(e)
	}
}

func round6(x float64) float64 { return math.Round(x*1e6) / 1e6 }

// timedWriter is a writer that wants to know the board time of what it is given (the
// capture writer of the test captures): Run calls at before every sample period and
// flushes after it, and reports host lines and host events through host.
type timedWriter interface {
	io.Writer
	at(now float64)
	host(dir telemetry.Direction, text string)
}

// Plugger is a writer that can be unplugged and plugged in again (a pseudo-terminal
// server such as wire.Serve). Run calls Unplug when the scenario unplugs the board and
// Replug when it comes back; other writers just see silence in between.
type Plugger interface {
	Unplug()
	Replug() error
}

// Run powers the board up and writes its output to w: the banner and meta lines, then one
// data line per sample period, until ctx ends or the scenario's Samples or Duration limit
// is reached. With realtime false it runs as fast as it can; with realtime true it paces
// the lines by the sample period (scaled by Speed), writing what is due every Batch. Run
// returns nil at the limit, ctx.Err() when cancelled, or the write error. A board runs
// once.
func (b *Board) Run(ctx context.Context, w io.Writer, realtime bool) error {
	b.mu.Lock()
	if b.ran {
		b.mu.Unlock()
		return errors.New("virtual: a board runs once; make a new one")
	}
	b.ran = true
	b.mu.Unlock()

	speed := b.Speed
	if !(speed > 0) {
		speed = 1
	}
	b.tw, _ = w.(timedWriter)
	if b.tw != nil {
		b.tw.at(0)
	}
	b.boot()
	start := time.Now()
	const chunk = 32 << 10
	batch := b.Batch
	if batch <= 0 {
		batch = 4 * time.Millisecond
	}
	var timer *time.Timer
	for {
		if b.done() {
			return b.flush(w)
		}
		if realtime {
			due := time.Duration(b.now / speed * float64(time.Second))
			if wait := due - time.Since(start); wait > 0 {
				if err := b.flush(w); err != nil {
					return err
				}
				wait = max(wait, batch)
				if timer == nil {
					timer = time.NewTimer(wait)
					defer timer.Stop()
				} else {
					timer.Reset(wait)
				}
				select {
				case <-ctx.Done():
					return ctx.Err()
				case <-timer.C:
				}
			}
		} else if b.k&1023 == 0 {
			if err := ctx.Err(); err != nil {
				return err
			}
		}
		if b.tw != nil {
			b.tw.at(b.now)
		}
		if err := b.tick(w); err != nil {
			return err
		}
		if len(b.out) >= chunk || b.tw != nil {
			if err := b.flush(w); err != nil {
				return err
			}
		}
	}
}

func (b *Board) done() bool {
	if b.sc.Samples > 0 && b.lines >= b.sc.Samples {
		return true
	}
	return b.sc.Duration > 0 && b.now >= b.sc.Duration-1e-12
}

func (b *Board) flush(w io.Writer) error {
	if len(b.out) == 0 {
		return nil
	}
	_, err := w.Write(b.out)
	b.out = b.out[:0]
	return err
}

// boot writes the banner and the meta lines and restarts the board clock, the sequence
// number and the setpoint profile. Settings changed by `set` are lost, as on real
// firmware that keeps them in RAM.
func (b *Board) boot() {
	b.restoreDefaults()
	b.out = append(b.out, Banner...)
	b.out = append(b.out, '\n')
	b.out = b.appendMetaLines(b.out)
	b.bootPending = true
	b.bootStart = b.now
	b.n = 0
	b.spOverride = -1
	b.state = stateOn
	b.event(EvBoot, "")
}

// appendMetaLines appends the board's full description as two meta lines, as firmware
// with a small print buffer would send it: the ADC and loop first, then the parts.
func (b *Board) appendMetaLines(dst []byte) []byte { return appendMetaPair(dst, b.meta()) }

func appendMetaPair(dst []byte, m telemetry.Meta) []byte {
	first, second := m, m
	first.Set &= telemetry.FieldVref | telemetry.FieldADCBits | telemetry.FieldPeriod | telemetry.FieldMode | telemetry.FieldDeadband
	second.Set &^= first.Set
	dst = telemetry.AppendMeta(dst, first)
	dst = append(dst, '\n')
	if second.Set != 0 {
		dst = telemetry.AppendMeta(dst, second)
		dst = append(dst, '\n')
	}
	return dst
}

// restoreDefaults puts the firmware's compiled-in settings back into the model.
func (b *Board) restoreDefaults() {
	b.mode, b.deadband = b.sc.Mode, b.sc.Deadband
	cfg := b.sim.Config()
	cfg.Controller = controllerFor(b.mode, b.deadband)
	cfg.Period = b.sc.Period
	cfg.Jitter = b.sc.Jitter
	if err := b.sim.SetConfig(cfg); err != nil {
		// The same values passed New's checks.
		panic("virtual: " + err.Error())
	}
}

// meta is what the board says about itself now: the scenario's meta with the current
// mode, deadband and period.
func (b *Board) meta() telemetry.Meta {
	m := b.sc.Meta()
	m.Mode = b.mode
	m.Deadband = float64(b.deadband)
	m.Period = b.sim.Config().Period
	return m
}

const eps = 1e-9

// tick runs one sample period.
func (b *Board) tick(w io.Writer) error {
	f := &b.sc.Faults
	for b.script < len(b.sc.Script) && b.sc.Script[b.script].At <= b.now+eps {
		line := b.sc.Script[b.script].Line
		b.Send(line)
		if b.tw != nil {
			b.tw.host(telemetry.ToBoard, line)
		}
		b.script++
	}
	b.bursts()
	switch b.state {
	case stateOff:
		b.idle()
		if b.now >= b.until-eps {
			if p, ok := w.(Plugger); ok {
				if err := b.flush(w); err != nil {
					return err
				}
				if err := p.Replug(); err != nil {
					return err
				}
			}
			b.event(EvReplug, "")
			if b.tw != nil {
				b.tw.host(telemetry.HostEvent, "reconnected")
			}
			b.state, b.until = stateBooting, b.now+bootTime(f)
		}
		return nil
	case stateBooting:
		b.idle()
		if b.now >= b.until-eps {
			b.boot()
		}
		return nil
	}

	b.readHost()
	if f.UnplugAfter > 0 && !b.unplugDone && b.now >= f.UnplugAfter-eps {
		b.unplugDone = true
		b.partial()
		b.event(EvUnplug, "")
		if b.tw != nil {
			if err := b.flush(w); err != nil {
				return err
			}
			b.tw.host(telemetry.HostEvent, "unplugged")
		}
		if p, ok := w.(Plugger); ok {
			if err := b.flush(w); err != nil {
				return err
			}
			p.Unplug()
		}
		replug := f.ReplugAfter
		if replug == 0 {
			replug = 1
		}
		b.state, b.until = stateOff, b.now+replug
		b.float()
		return nil
	}
	if f.ResetAfter > 0 && !b.resetDone && b.now >= f.ResetAfter-eps {
		b.resetDone = true
		b.partial()
		b.event(EvReset, "")
		b.state, b.until = stateBooting, b.now+bootTime(f)
		b.float()
		return nil
	}
	inline := false
	if f.GarbageEvery > 0 && b.now >= b.nextGarb-eps {
		b.nextGarb += f.GarbageEvery
		if b.rng.IntN(2) == 0 {
			b.out = append(b.out, b.garbage()...)
			b.out = append(b.out, '\n')
			b.event(EvGarbage, "line")
		} else {
			inline = true
		}
	}
	st := b.sample()
	if !st.Dropped {
		line := b.dataLine(st)
		if inline {
			// The bytes land inside the pv value, so the line can only be rejected.
			i := strings.Index(string(line), " pv=") + len(" pv=") + 1
			b.out = append(b.out, line[:i]...)
			b.out = append(b.out, b.garbage()...)
			b.out = append(b.out, line[i:]...)
			b.event(EvGarbage, "inline")
		} else {
			b.out = append(b.out, line...)
			b.lines++
		}
		b.out = append(b.out, '\n')
	} else if inline {
		b.nextGarb -= f.GarbageEvery // try again with the next line
	}
	b.advanceClock()
	return nil
}

func bootTime(f *Faults) float64 {
	if f.BootTime > 0 {
		return f.BootTime
	}
	return 0.05
}

// sample takes one sample with the current setpoint and advances the sequence number.
func (b *Board) sample() loop.Sample {
	sp := b.spOverride
	if sp < 0 {
		sp = b.sc.Counts(b.sc.Setpoint(b.now - b.bootStart))
	}
	st := b.sim.Next(sp)
	if b.bootPending {
		b.bootAt, b.bootPending = st.T, false
	}
	b.seq = b.n
	b.n++
	return st
}

// dataLine formats st as the firmware prints it: t is the board clock in µs since boot
// plus T0, wrapping at 2^32; n counts samples since boot, lost ones included.
func (b *Board) dataLine(st loop.Sample) []byte {
	us := uint32(int64(math.Round((st.T - b.bootAt) * 1e6)))
	s := telemetry.Sample{
		T:     int64(b.sc.T0 + us),
		N:     b.seq,
		SP:    float64(st.SP),
		PV:    float64(st.PV),
		U:     st.U,
		Flags: telemetry.HasT | telemetry.HasN | telemetry.HasU,
	}
	b.line = telemetry.AppendData(b.line[:0], s)
	return b.line
}

// partial samples once and writes the start of its data line, cut before the pv value is
// complete, as when power or the firmware dies mid-line.
func (b *Board) partial() {
	st := b.sample()
	line := b.dataLine(st)
	end := strings.Index(string(line), " pv=") + len(" pv=")
	cut := 2 + b.rng.IntN(end-2)
	b.out = append(b.out, line[:cut]...)
	b.event(EvPartial, strconv.Itoa(cut)+" bytes")
	b.advanceClock()
}

// float lets the pin float while the firmware is not running.
func (b *Board) float() {
	if err := b.sim.SetController(loop.Controller{Kind: loop.OpenConst, StepDrive: loop.Hold}); err != nil {
		panic("virtual: " + err.Error())
	}
}

// idle runs one sample period with no firmware: the model advances, nothing is written.
func (b *Board) idle() {
	b.sim.Next(0)
	b.advanceClock()
}

func (b *Board) advanceClock() {
	b.k++
	b.now += b.sim.Config().Period
}

// bursts switches the ADC noise on at the start of a burst and back at its end.
func (b *Board) bursts() {
	f := &b.sc.Faults
	if f.BurstEvery <= 0 || f.BurstLen <= 0 {
		return
	}
	if !b.burst && b.now >= b.nextBurst-eps {
		b.burst, b.burstEnd = true, b.nextBurst+f.BurstLen
		b.nextBurst += f.BurstEvery
		b.sim.SetNoise(f.BurstNoise)
		b.event(EvBurstStart, strconv.FormatFloat(f.BurstNoise, 'g', -1, 64)+" counts rms")
	}
	if b.burst && b.now >= b.burstEnd-eps {
		b.burst = false
		b.sim.SetNoise(b.cfgNoise)
		b.event(EvBurstEnd, "")
	}
}

// hostile are the bytes garbage is mostly made of: NUL, control characters, ESC, DEL,
// a CSI byte, bytes that are never valid UTF-8 and lone continuation bytes. No line
// terminators and no flow-control characters.
var hostile = []byte{0x00, 0x01, 0x07, 0x08, 0x1b, 0x7f, 0x9b, 0xff, 0xfe, 0xc0, 0x80, 0xbf, 0x03, 0x1a}

// garbage returns 4 to 23 bytes of line noise. It always starts with a hostile byte, so
// it never reads as a comment or a data line.
func (b *Board) garbage() []byte {
	n := 4 + b.rng.IntN(20)
	g := make([]byte, n)
	for i := range g {
		if i > 0 && b.rng.IntN(3) == 0 {
			c := byte(0x21 + b.rng.IntN(0x7e-0x21+1))
			if c == '#' {
				c = '?'
			}
			g[i] = c
		} else {
			g[i] = hostile[b.rng.IntN(len(hostile))]
		}
	}
	return g
}
