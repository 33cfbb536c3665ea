package tui

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"time"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/advice"
	"github.com/caploop/caploop/analysis/loop/virtual"
	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/wire"
)

// SourceOptions are the options every source shares.
type SourceOptions struct {
	Analysis analysis.Options // zero = defaults; Source is filled in
	Goals    advice.Goals     // zero = defaults
	Retain   int              // points the screen may hold back for it (0 = DefaultRetain)
	NoAdvice bool             // skip the advice (benchmarks)
}

func (o SourceOptions) analyzer(name string) func() analyzer {
	opts := o.Analysis
	if opts.Source == "" {
		opts.Source = name
	}
	return func() analyzer { return analysis.New(opts) }
}

func (o SourceOptions) adviser() adviser {
	if o.NoAdvice {
		return nil
	}
	g := o.Goals
	return func(s *analysis.Summary) (*advice.Advice, error) { return advice.FromSummary(s, g) }
}

// LiveOptions configure NewLive.
type LiveOptions struct {
	SourceOptions
	Serial wire.SerialConfig
	Record string // capture file path; "" = no recording
	Name   string // shown in the status line; "" = the port path
}

// NewLive starts a pipeline on a serial port through a telemetry.Link: it reconnects by
// itself after an unplug or reset, records when asked, and takes commands and marks.
func NewLive(o LiveOptions) *Pipeline {
	name := o.Name
	if name == "" {
		name = o.Serial.Path
	}
	link := wire.Dial(o.Serial, wire.LinkOptions{RecordPath: o.Record})
	p := newPipeline(name, o.Retain, o.adviser())
	p.canSend = true
	p.sendFn = link.Send
	p.markFn = func(note string) error {
		link.Annotate("mark " + note)
		return nil
	}
	p.closeFn = link.Close
	c := newCore(p, o.analyzer(name))
	c.stats.State = "opening"
	var parser telemetry.Parser
	parser.Name = name
	c.lineStats = parser.Stats
	rec := o.Record
	c.statsExtra = func(st *SourceStats) {
		if rec != "" {
			st.Recording = filepath.Base(rec)
			if fi, err := os.Stat(rec); err == nil {
				st.RecordBytes = fi.Size()
			}
		}
		st.Lost = link.Stats().Dropped
		if err := link.Err(); err != nil && rec != "" {
			st.Recording = "FAILED " + telemetry.SanitizeN([]byte(err.Error()), 60)
		}
	}
	go p.runLive(link, &parser, c)
	return p
}

// askMetaAfter is how long after a (re)connection without meta lines the screen asks
// the board for them with "info": a board that booted before the port was opened has
// already sent them. A board that does not know "info" ignores it.
const askMetaAfter = 500 * time.Millisecond

func (p *Pipeline) runLive(link *wire.Link, parser *telemetry.Parser, c *core) {
	defer close(p.closed)
	start := link.Start()
	tick := time.NewTicker(summaryInterval)
	defer tick.Stop()
	for {
		select {
		case <-p.quit:
			return
		case <-tick.C:
			if c.connectedAt != (time.Time{}) && !c.asked && time.Since(c.connectedAt) > askMetaAfter {
				c.asked = true
				m := parser.Meta()
				if !m.Has(telemetry.FieldVref) || !m.Has(telemetry.FieldADCBits) {
					link.Send("info")
				}
			}
			c.flush(false)
		case b, ok := <-link.Batches():
			if !ok {
				c.stats.State = "closed"
				c.finish(link.Err())
				<-p.quit
				return
			}
			for _, ln := range b {
				c.line(parser, ln, start)
			}
			c.flush(false)
		}
	}
}

// line handles one line of a live link.
func (c *core) line(parser *telemetry.Parser, ln wire.Line, start time.Time) {
	switch ln.Dir {
	case telemetry.FromBoard:
		rec := parser.Parse(ln.Raw, ln.Host.Sub(start).Nanoseconds(), true)
		switch rec.Kind {
		case telemetry.RecSample:
			c.sample(rec.Sample)
		case telemetry.RecMeta:
			c.setMeta(rec.Delta)
		}
	case telemetry.ToBoard:
		c.event(EventSent, telemetry.SanitizeN(ln.Raw, 60))
	case telemetry.HostEvent:
		text := telemetry.SanitizeN(ln.Raw, 60)
		switch kind := ln.EventKind(); kind {
		case "mark":
			c.event(EventMark, strings.TrimSpace(strings.TrimPrefix(text, "mark")))
		case wire.EventConnected, wire.EventReconnected:
			parser.ResetClock()
			c.connectedAt, c.asked, c.haveN = time.Now(), false, false
			c.stats.State = "connected"
			c.event(EventState, kind)
		case wire.EventUnplugged:
			c.stats.State = "UNPLUGGED, waiting for the board"
			c.event(EventState, "unplugged")
		case wire.EventWaiting:
			if c.stats.State != "UNPLUGGED, waiting for the board" {
				c.stats.State = "waiting for the port"
			}
			c.event(EventInfo, telemetry.SanitizeN(ln.Raw, 200))
		case wire.EventPartial:
		default:
			c.event(EventNote, text)
		}
	}
}

// NewDemo runs the built-in virtual board on a pseudo-terminal in this process and
// returns a live pipeline on it, so the demo goes through the same serial path as a
// real board (and answers "set deadband=N" the same way).
func NewDemo(sc virtual.Scenario, o SourceOptions) (*Pipeline, error) {
	board, err := virtual.NewBoard(sc)
	if err != nil {
		return nil, err
	}
	ctx, cancel := context.WithCancel(context.Background())
	ready := make(chan string, 1)
	served := make(chan error, 1)
	go func() {
		served <- wire.Serve(ctx, board, wire.ServeOptions{Ready: func(path string) { ready <- path }})
	}()
	var path string
	select {
	case path = <-ready:
	case err := <-served:
		cancel()
		if err == nil {
			err = errors.New("tui: the virtual board stopped before it was ready")
		}
		return nil, err
	case <-time.After(5 * time.Second):
		cancel()
		return nil, errors.New("tui: the virtual board did not start within 5 s")
	}
	p := NewLive(LiveOptions{SourceOptions: o, Serial: wire.SerialConfig{Path: path}, Name: "virtual board"})
	linkClose := p.closeFn
	p.closeFn = func() error {
		err := linkClose()
		cancel()
		<-served
		return err
	}
	return p, nil
}

// ReplayOptions configure NewReplay.
type ReplayOptions struct {
	SourceOptions
	Path   string
	Speed  float64 // 1 = real time, 2, 10; 0 = as fast as possible
	Paused bool    // start held

	open func() (telemetry.Source, error) // opens the input; nil = telemetry.OpenFile(Path)
}

// NewReplay opens a capture or plain telemetry file (gzip too) and replays it at the
// chosen speed, with pause, step and seek from the screen.
func NewReplay(o ReplayOptions) (*Pipeline, error) {
	if o.open == nil {
		path := o.Path
		o.open = func() (telemetry.Source, error) { return telemetry.OpenFile(path) }
	}
	src, err := o.open()
	if err != nil {
		return nil, err
	}
	name := filepath.Base(o.Path)
	p := newPipeline(name, o.Retain, o.adviser())
	p.replay = true
	p.speed = o.Speed
	p.ctl = make(chan control, 16)
	c := newCore(p, o.analyzer(name))
	go p.runReplay(o, src, c)
	return p, nil
}

func (p *Pipeline) runReplay(o ReplayOptions, src telemetry.Source, c *core) {
	defer close(p.closed)
	var sc *telemetry.Scanner
	open := func() {
		sc = telemetry.NewScanner(src)
		sc.Name = o.Path
		c.lineStats = sc.Stats
	}
	open()
	defer func() { src.Close() }()
	speed, paused := o.Speed, o.Paused
	ended := false
	seekTo, stepUntil := -1.0, -1.0
	var wallStart time.Time
	var tStart float64
	paced := false
	setState := func() {
		switch {
		case ended:
			c.stats.State = "ended"
		case paused:
			c.stats.State = "held at " + formatSeconds(c.lastT)
		default:
			c.stats.State = "at " + formatSeconds(c.lastT)
		}
		c.stats.Speed = speed
		c.stats.Position = c.lastT
	}
	apply := func(ctl control) {
		switch {
		case ctl.pause > 0:
			paused = true
		case ctl.pause < 0:
			paused = false
		case ctl.setSpeed:
			speed = ctl.speed
		case ctl.step > 0:
			if paused {
				stepUntil = c.lastT + ctl.step
			}
		case ctl.seek > 0:
			if !ended {
				seekTo = c.lastT + ctl.seek
			}
		case ctl.seek < 0:
			target := max(c.lastT+ctl.seek, 0)
			src.Close()
			s, err := o.open()
			if err != nil {
				c.p.deliver(nil, nil, func(b *mailbox) { b.err = err })
				return
			}
			src = s
			open()
			c.restart()
			ended = false
			seekTo = target
		}
		paced = false
	}
	tick := time.NewTicker(summaryInterval)
	defer tick.Stop()
	for {
		select {
		case <-p.quit:
			return
		case ctl := <-p.ctl:
			apply(ctl)
			continue
		default:
		}
		if ended || (paused && stepUntil < 0 && seekTo < 0) {
			setState()
			c.flush(false)
			select {
			case <-p.quit:
				return
			case ctl := <-p.ctl:
				apply(ctl)
			case <-tick.C:
			}
			continue
		}
		if !sc.Scan() {
			ended = true
			setState()
			err := sc.Err()
			if err != nil {
				err = fmt.Errorf("%s: %w", o.Path, err)
			}
			c.finish(err)
			continue
		}
		switch sc.Kind() {
		case telemetry.RecSample:
			prev := c.lastT
			t := c.sample(sc.Sample())
			if t-prev > 1 {
				paced = false // a gap in the stream: do not sit through it
			}
			switch {
			case seekTo >= 0:
				if t >= seekTo {
					seekTo, paced = -1, false
				}
			case stepUntil >= 0:
				if t >= stepUntil {
					stepUntil, paced = -1, false
				}
			case speed > 0:
				if !paced {
					wallStart, tStart, paced = time.Now(), t, true
				}
				target := wallStart.Add(time.Duration((t - tStart) / speed * float64(time.Second)))
				if d := time.Until(target); d > 2*time.Millisecond {
					setState()
					c.flush(false)
					timer := time.NewTimer(d)
					select {
					case <-p.quit:
						timer.Stop()
						return
					case ctl := <-p.ctl:
						apply(ctl)
					case <-timer.C:
					}
					timer.Stop()
				}
			}
		case telemetry.RecMeta:
			c.setMeta(sc.Delta())
		case telemetry.RecEvent:
			ev := sc.Event()
			if ev.Dir == telemetry.ToBoard {
				c.event(EventSent, ev.Text)
				break
			}
			word, rest, _ := strings.Cut(ev.Text, " ")
			switch word {
			case "mark":
				c.event(EventMark, rest)
			case wire.EventUnplugged, wire.EventReconnected:
				c.event(EventState, word)
			case wire.EventConnected, wire.EventWaiting, wire.EventPartial:
			default:
				c.event(EventNote, ev.Text)
			}
		}
		if len(c.pts) >= 8192 {
			setState()
			c.flush(false)
		}
	}
}
