package live

import (
	"sort"
	"strings"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/wire"
)

// Landmark is a kind of moment a replay can jump to.
type Landmark int

// The landmarks of a capture.
const (
	LandmarkStep    Landmark = iota // the setpoint changes
	LandmarkSegment                 // a run of constant settings starts: the first sample, a setpoint or deadband change, a reconnection
	LandmarkMark                    // a mark made on the screen while recording
	LandmarkEvent                   // a command sent to the board, a change of its settings, an unplug or reconnection, a note
	numLandmarks
)

var landmarkNames = [...]string{"setpoint step", "segment", "mark", "event"}

// String returns the landmark's name: "setpoint step", "segment", "mark", "event".
func (l Landmark) String() string { return landmarkNames[l] }

// maxLandmarks bounds each list of an outline (a capture with more keeps the first ones).
const maxLandmarks = 1 << 16

// Outline is the map of a capture a replay jumps by: the times of its first and last
// samples and of its landmarks, on the replay's clock, in time order.
type Outline struct {
	Start, End float64
	times      [numLandmarks][]float64
}

// Times returns the times of the landmarks of kind l.
func (o *Outline) Times(l Landmark) []float64 { return o.times[l] }

// Next returns the first landmark of kind l after t.
func (o *Outline) Next(l Landmark, t float64) (float64, bool) {
	ts := o.times[l]
	i := sort.SearchFloat64s(ts, t)
	for i < len(ts) && ts[i] <= t {
		i++
	}
	if i == len(ts) {
		return 0, false
	}
	return ts[i], true
}

// Prev returns the last landmark of kind l before t.
func (o *Outline) Prev(l Landmark, t float64) (float64, bool) {
	ts := o.times[l]
	i := sort.SearchFloat64s(ts, t) - 1
	if i < 0 {
		return 0, false
	}
	return ts[i], true
}

// Fraction returns the time a fraction f (0..1) of the way through the capture.
func (o *Outline) Fraction(f float64) float64 {
	f = min(max(f, 0), 1)
	return o.Start + f*(o.End-o.Start)
}

func (o *Outline) add(l Landmark, t float64) {
	ts := o.times[l]
	if len(ts) >= maxLandmarks || (len(ts) > 0 && ts[len(ts)-1] == t) {
		return
	}
	o.times[l] = append(ts, t)
}

// nopAnalyzer stands in for the accumulator where only the clock matters.
type nopAnalyzer struct{}

func (nopAnalyzer) SetMeta(telemetry.Meta)     {}
func (nopAnalyzer) Add(telemetry.Sample)       {}
func (nopAnalyzer) SetStats(telemetry.Stats)   {}
func (nopAnalyzer) Summary() *analysis.Summary { return &analysis.Summary{} }

// buildOutline reads a whole capture with the replay's own clock and records its
// landmarks. It stops early, returning nil, when quit closes.
func buildOutline(src telemetry.Source, quit <-chan struct{}) (*Outline, error) {
	defer src.Close()
	sc := telemetry.NewScanner(src)
	c := &engine{newAcc: func() analyzer { return nopAnalyzer{} }}
	c.acc = nopAnalyzer{}
	o := &Outline{}
	var lastSP float64
	first := true
	for k := 0; sc.Scan(); k++ {
		if k%65536 == 0 {
			select {
			case <-quit:
				return nil, nil
			default:
			}
		}
		switch sc.Kind() {
		case telemetry.RecSample:
			s := sc.Sample()
			t := c.seconds(s)
			c.lastT = t
			c.samples++
			switch {
			case first:
				o.Start, first = t, false
				o.add(LandmarkSegment, t)
			case s.SP != lastSP:
				o.add(LandmarkStep, t)
				o.add(LandmarkSegment, t)
			}
			lastSP = s.SP
			o.End = t
		default:
			replayRecord(c, sc)
		}
		for _, ev := range c.evs {
			switch ev.Kind {
			case EventMark:
				o.add(LandmarkMark, ev.T)
			case EventDeadband:
				o.add(LandmarkSegment, ev.T)
				o.add(LandmarkEvent, ev.T)
			case EventState:
				if ev.Text == wire.EventReconnected {
					o.add(LandmarkSegment, ev.T)
				}
				o.add(LandmarkEvent, ev.T)
			case EventSent, EventNote:
				o.add(LandmarkEvent, ev.T)
			}
		}
		c.evs = c.evs[:0]
	}
	for l := range o.times {
		sort.Float64s(o.times[l]) // a landmark before the first sample is stamped 0
	}
	return o, sc.Err()
}

// replayRecord applies a meta line or a host record of a capture to the engine.
func replayRecord(c *engine, sc *telemetry.Scanner) {
	switch sc.Kind() {
	case telemetry.RecMeta:
		c.setMeta(sc.MetaChange())
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
}
