package live

import (
	"os"
	"path/filepath"
	"strings"
	"time"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/advice"
	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/wire"
)

// Options are the options every source shares.
type Options struct {
	Analysis analysis.Options // zero = defaults; Source is filled in
	Goals    advice.Goals     // zero = defaults
	Retain   int              // points held for a lagging screen (0 = DefaultRetain)
	NoAdvice bool             // skip the advice (benchmarks)
}

func (o Options) analyzer(name string) func() analyzer {
	opts := o.Analysis
	if opts.Source == "" {
		opts.Source = name
	}
	return func() analyzer { return analysis.New(opts) }
}

func (o Options) adviser() adviser {
	if o.NoAdvice {
		return nil
	}
	g := o.Goals
	return func(s *analysis.Summary) (*advice.Advice, error) { return advice.FromSummary(s, g) }
}

// adviceInputs returns what the adviser designs from, so the engine can skip the advice
// while it stays put; nil without advice.
func (o Options) adviceInputs() func(s *analysis.Summary) advice.Inputs {
	if o.NoAdvice {
		return nil
	}
	g := o.Goals
	return func(s *analysis.Summary) advice.Inputs { return advice.InputsOfSummary(s, g) }
}

// PortOptions configure NewPort.
type PortOptions struct {
	Options
	Serial wire.SerialConfig
	Record string // capture file path; "" = no recording
	Name   string // shown in the status line; "" = the port path
}

// NewPort starts a pipeline on a serial port through a wire.Link: it reconnects by
// itself after an unplug or reset, records when asked, and takes commands and marks.
func NewPort(o PortOptions) *Pipeline {
	name := o.Name
	if name == "" {
		name = o.Serial.Path
	}
	link := wire.Dial(o.Serial, wire.LinkOptions{RecordPath: o.Record})
	p := newPipeline(name, o.Retain, o.adviser())
	p.advIn = o.adviceInputs()
	p.canSend = true
	p.link = link
	p.sendFn = link.Send
	marks := &markLog{start: link.StartedAt()}
	p.markFn = func(note string) error {
		marks.add(note)
		link.Annotate("mark " + note)
		return nil
	}
	p.closeFn = link.Close
	p.notesFn = func() []string {
		return recordNotes(o.Record, link.Stats().Lines, marks.list(), link.Err())
	}
	c := newEngine(p, o.analyzer(name))
	c.stats.State = "opening"
	var parser telemetry.Parser
	parser.Name = name
	c.lineStats = parser.Stats
	rec := o.Record
	c.statsExtra = func(st *Stats) {
		if rec != "" {
			st.Recording = telemetry.SanitizeN([]byte(filepath.Base(rec)), 60)
			if fi, err := os.Stat(rec); err == nil {
				st.RecordBytes = fi.Size()
			}
		}
		st.Lost = link.Stats().Dropped
		if err := link.Err(); err != nil && rec != "" {
			st.Recording = "FAILED " + telemetry.SanitizeN([]byte(err.Error()), 60)
		}
	}
	c.silence = &silence{cfg: link.Config()}
	c.linkLines = func() int64 { return link.Stats().Lines }
	go p.runLive(link, &parser, c)
	return p
}

// askMetaAfter is how long after a (re)connection without meta lines the screen asks
// the board for them with "info": a board that booted before the port was opened has
// already sent them. A board that does not know "info" ignores it.
const askMetaAfter = 500 * time.Millisecond

func (p *Pipeline) runLive(link *wire.Link, parser *telemetry.Parser, c *engine) {
	defer close(p.closed)
	start := link.StartedAt()
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
			if st, changed, hint := c.silence.check(time.Now(), c.stats.State, c.samples, c.lineCount()); changed {
				c.stats.State = st
				if hint != "" {
					c.event(EventInfo, hint)
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
			p.forward(b)
			for _, ln := range b {
				c.line(parser, ln, start)
			}
			c.flush(false)
		}
	}
}

// line handles one line of a live link.
func (c *engine) line(parser *telemetry.Parser, ln wire.Line, start time.Time) {
	switch ln.Dir {
	case telemetry.FromBoard:
		rec := parser.ParseReceived(ln.Raw, ln.Host.Sub(start).Nanoseconds())
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
			if c.silence != nil {
				c.silence.connected(c.connectedAt, c.samples, c.lineCount())
			}
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
