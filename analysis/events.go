package analysis

import (
	"fmt"
	"math"
	"strings"

	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/si"
)

// Event kinds in Summary.Events.
const (
	EventReset     = "reset"     // the board restarted (t or n went back, or it sent its meta lines again after a comment and a gap)
	EventGap       = "gap"       // no samples for 10 periods or more
	EventUnplug    = "unplug"    // the host saw the port go away
	EventReconnect = "reconnect" // the host saw the port come back
	EventMeta      = "meta"      // a meta line changed a setting mid-capture
	EventCommand   = "command"   // the host sent the board a line
	EventNote      = "note"      // a host note or mark (does not split segments)
)

// maxEvents bounds the listed events; later ones are counted in EventsOmitted.
const maxEvents = 256

// maxLines bounds the line numbers kept in a LineList.
const maxLines = 64

// gapEventPeriods is the shortest pause, in sample periods, that is an event (shorter
// ones are dropped lines, counted in Gaps).
const gapEventPeriods = 10

// Event is one thing that happened to the stream besides samples. Text is sanitised.
type Event struct {
	Kind      string   `json:"kind"`
	AtS       *float64 `json:"at_s"`
	AtSReason string   `json:"at_s_reason,omitempty"`
	Line      int64    `json:"line"`
	Text      string   `json:"text"`
}

// LineList counts lines of one kind and lists the first of them (bounded).
type LineList struct {
	Count int64   `json:"count"`
	Lines []int64 `json:"lines"`
}

func (l *LineList) add(line int64) {
	l.Count++
	if len(l.Lines) < maxLines {
		l.Lines = append(l.Lines, line)
	}
}

// eventRec is one event as the accumulator keeps it: the tick is NaN until the next
// sample stamps it.
type eventRec struct {
	kind, text string
	line       int64
	tick       float64
}

// suspectMask are the optional fields whose absence on one line, when the stream's
// other lines carry them, makes the line suspect.
const suspectMask = telemetry.HasT | telemetry.HasN | telemetry.HasU

// streamState is what the accumulator keeps for events, glitches and suspect lines.
type streamState struct {
	events   []eventRec
	omitted  int64
	pending  bool // an event waits for the next sample (a split, a tick)
	split    bool // the next sample opens a new segment (no step)
	comment  bool // a comment came since the last sample
	banner   bool // meta lines came after a comment since the last sample
	metaLine int64
	meta     telemetry.Meta
	metaSet  bool
	resets   int64 // clock resets already turned into events

	// glitches
	glitches LineList
	good     float64 // the last reading that was not a glitch
	goodK    int     // periods since it
	hasGood  bool
	run      int // glitches in a row

	// suspect lines: per optional field, the lines without it
	lacking     [8]int64
	lackLines   [8][]int64
	suspectSeen int64
}

func (st *streamState) add(kind, text string, line int64, tick float64) {
	if len(st.events) >= maxEvents {
		st.omitted++
		return
	}
	st.events = append(st.events, eventRec{kind: kind, text: text, line: line, tick: tick})
}

// AddEvent records a host record of a capture (a line sent to the board, an unplug, a
// note): an event of the summary, and (except notes) the end of the open segment.
func (a *Accumulator) AddEvent(e telemetry.Event) {
	kind := EventNote
	low := strings.ToLower(e.Text)
	switch {
	case e.Dir == telemetry.ToBoard:
		kind = EventCommand
	case strings.Contains(low, "unplug"):
		kind = EventUnplug
	case strings.Contains(low, "reconnect") || strings.Contains(low, "replug"):
		kind = EventReconnect
	}
	a.st.add(kind, e.Text, e.Line, math.NaN())
	a.st.pending = true
	if kind != EventNote {
		a.st.split = true
	}
}

// Comment tells the accumulator a comment line came (line numbers are 1-based): meta
// lines after a comment, and then a gap in the samples, are a board restart.
func (a *Accumulator) Comment(line int64) {
	if a.n > 0 {
		a.st.comment, a.st.pending = true, true
	}
}

// SetMetaLine is SetMeta for a meta line at a known line number: a change of a setting
// after the first sample is an event and splits the segment.
func (a *Accumulator) SetMetaLine(m telemetry.Meta, line int64) {
	a.st.metaLine = line
	a.SetMeta(m)
	a.st.metaLine = 0
}

// noteMeta records the settings a meta line changed (called by SetMeta).
func (a *Accumulator) noteMeta(m telemetry.Meta) {
	prev, had := a.st.meta, a.st.metaSet
	a.st.meta, a.st.metaSet = m, true
	if a.st.comment {
		a.st.banner = true
	}
	if !had || a.n == 0 {
		return
	}
	if ch := metaChanges(prev, m); ch != "" {
		a.st.add(EventMeta, ch, a.st.metaLine, math.NaN())
		a.st.pending, a.st.split = true, true
	}
}

// metaChanges describes the fields that differ between two metas ("" when none).
func metaChanges(old, m telemetry.Meta) string {
	var parts []string
	f := func(field telemetry.MetaField, name string, o, n float64, unit string) {
		if !m.Has(field) || (old.Has(field) && o == n) {
			return
		}
		val := func(v float64) string {
			if unit == "" {
				return fmt.Sprintf("%g", v)
			}
			return si.Format(v, unit)
		}
		if old.Has(field) {
			parts = append(parts, fmt.Sprintf("%s=%s (was %s)", name, val(n), val(o)))
		} else {
			parts = append(parts, fmt.Sprintf("%s=%s", name, val(n)))
		}
	}
	f(telemetry.FieldVref, "vref", old.Vref, m.Vref, "V")
	f(telemetry.FieldADCBits, "adc_bits", float64(old.ADCBits), float64(m.ADCBits), "")
	f(telemetry.FieldPeriod, "period", old.Period, m.Period, "s")
	if m.Has(telemetry.FieldMode) && (!old.Has(telemetry.FieldMode) || old.Mode != m.Mode) {
		parts = append(parts, "mode="+m.Mode.String())
	}
	f(telemetry.FieldDeadband, "deadband", old.Deadband, m.Deadband, "")
	f(telemetry.FieldSupply, "supply", old.Supply, m.Supply, "V")
	f(telemetry.FieldR, "r", old.R, m.R, "Ω")
	f(telemetry.FieldC, "c", old.C, m.C, "F")
	f(telemetry.FieldLoad, "load", old.Load, m.Load, "Ω")
	return strings.Join(parts, " ")
}

// breaks handles a sample that follows a break in the stream (not contiguous) or an
// event: it turns clock resets, long gaps and a restart banner into events, stamps the
// waiting events with the sample's tick, and reports whether the sample opens a new
// segment, and whether that is because the board restarted (no step then).
func (a *Accumulator) breaks(s *telemetry.Sample, tick float64, contiguous bool) (split, reset bool) {
	st := &a.st
	split = st.split && a.n > 0
	if !contiguous && a.n > 0 {
		p := a.clk.periodTicks()
		switch {
		case a.clk.resets != st.resets:
			st.resets = a.clk.resets
			st.add(EventReset, "the board time or sequence number went back: the board restarted", s.Line, tick)
			split, reset = true, true
		case st.banner:
			st.add(EventReset, "the board sent its meta lines again after a comment and a gap: it restarted", s.Line, tick)
			split, reset = true, true
		case tick-a.last >= gapEventPeriods*p:
			st.add(EventGap, fmt.Sprintf("no samples for %.0f periods", (tick-a.last)/p-1), s.Line, tick)
			split = true
		}
		st.hasGood = false
	}
	for i := len(st.events) - 1; i >= 0 && math.IsNaN(st.events[i].tick); i-- {
		st.events[i].tick = tick
	}
	st.pending, st.split, st.banner, st.comment = false, false, false, false
	return split, reset
}

// glitch judges reading pv (after a contiguous sample): a reading farther from the last
// good one than the identified plant can move in the periods since, plus 6 sigma of
// noise and a count of quantisation, is a glitch. Without an identified plant, or with
// tau at most 2 periods (a = exp(-T/tau) at most exp(-1/2)), nothing is a glitch. Two
// glitches in a row at most: a third far reading means the level really moved.
func (a *Accumulator) glitch(pv float64, line int64, contiguous bool) bool {
	st := &a.st
	if !contiguous || !st.hasGood {
		st.good, st.goodK, st.hasGood, st.run = pv, 0, true, 0
		return false
	}
	k := st.goodK + 1
	v := st.good
	var up, down float64
	switch {
	case a.gOff:
		up = math.NaN() // no identified plant, or tau at most 2 periods
	case a.gBoth && k == 1:
		// plantReach's common case, written out: both drives identified, one period
		// since the last good reading (1 - a from glitchFactors, the same value).
		up, down = a.stepV[2]-v, v-a.stepV[0]
		if up < 0 { // math.Max(x, 0) but for the sign of a zero, which cannot matter here
			up = 0
		}
		if down < 0 {
			down = 0
		}
		up, down = a.gOmUp*up, a.gOmDn*down
	default:
		up, down = a.plantReach(v, k)
	}
	if math.IsNaN(up) || st.run >= 2 {
		st.good, st.goodK, st.run = pv, 0, 0
		return false
	}
	// The identified step is known within 10 % or 3 standard errors of its fit,
	// whichever is larger; the reading within 6 sigma of noise and a count of
	// quantisation.
	// (The factors come from refreshGuard, every 64 samples.)
	if pv > v+a.gUp*up+a.gSlack || pv < v-a.gDn*down-a.gSlack {
		st.run++
		st.goodK = k
		st.glitches.add(line)
		return true
	}
	st.good, st.goodK, st.run = pv, 0, 0
	return false
}

// reachLimit is exp(-1/2), a of a drive with tau of 2 periods: a faster plant is never
// a reason to call a reading a glitch.
const reachLimit = 0.6065306597126334

// plantReach returns how far the node can move up and down from v in k periods, in
// counts, from the identified drives (NaN when there is none, or tau <= 2 T).
func (a *Accumulator) plantReach(v float64, k int) (up, down float64) {
	aUp, vUp, okUp := a.stepA[2], a.stepV[2], a.stepOK[2]
	aDn, vDn, okDn := a.stepA[0], a.stepV[0], a.stepOK[0]
	if !okUp && !okDn {
		return math.NaN(), math.NaN()
	}
	if !okUp {
		aUp, vUp = aDn, max(float64(a.maxCode), v)
	}
	if !okDn {
		// No discharge fit: the charge's time constant, heading below ground by up to
		// a quarter of full scale (a follower's drop: the sense point then falls
		// towards -V_BE, not 0).
		aDn, vDn = aUp, min(0, v)-0.25*float64(a.maxCode)
	}
	if aUp <= reachLimit || aDn <= reachLimit {
		return math.NaN(), math.NaN()
	}
	if k > 1 {
		aUp, aDn = math.Pow(aUp, float64(k)), math.Pow(aDn, float64(k))
	}
	// (The max and min builtins: math.Max's and math.Min's rules for NaN and zeros,
	// without a call.)
	return (1 - aUp) * max(vUp-v, 0), (1 - aDn) * max(v-vDn, 0)
}

// suspect notes a data line that lacks an optional field.
func (a *Accumulator) suspect(fl telemetry.SampleFlags, line int64) {
	for b := 0; b < 4; b++ {
		bit := telemetry.SampleFlags(1) << b
		if suspectMask&bit != 0 && fl&bit == 0 {
			a.st.lacking[b]++
			if len(a.st.lackLines[b]) < maxLines {
				a.st.lackLines[b] = append(a.st.lackLines[b], line)
			}
		}
	}
}

// suspects returns the lines lacking a field that all but at most 1 % of the data lines
// carry.
func (a *Accumulator) suspects() LineList {
	l := LineList{Lines: []int64{}}
	seen := map[int64]bool{}
	for b := 0; b < 4; b++ {
		n := a.st.lacking[b]
		if n == 0 || n == a.n || float64(n) > math.Max(1, 0.01*float64(a.n)) {
			continue
		}
		l.Count += n
		for _, line := range a.st.lackLines[b] {
			if !seen[line] && len(l.Lines) < maxLines {
				seen[line] = true
				l.Lines = append(l.Lines, line)
			}
		}
	}
	return l
}

// eventList converts the kept events.
func (a *Accumulator) eventList(c conv) []Event {
	out := make([]Event, 0, len(a.st.events))
	for _, e := range a.st.events {
		ev := Event{Kind: e.kind, Line: e.line, Text: e.text}
		tick := e.tick
		if math.IsNaN(tick) {
			tick = a.last
		}
		if math.IsNaN(c.perTick) {
			ev.AtSReason = "the sample period is unknown"
		} else {
			ev.AtS = ptr(c.s(tick))
		}
		out = append(out, ev)
	}
	return out
}
