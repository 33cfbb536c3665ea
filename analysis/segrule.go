package analysis

import "github.com/caploop/caploop/telemetry"

// SegmentRule numbers the segments of a stream exactly as Summarize does, for tools
// that write one row per sample (the export): a new segment at every setpoint change,
// every change of the deadband in force, every reset, gap, unplug, meta change and line
// sent to the board. It runs the summary's own accumulator (keeping the figures of no
// segment), so the rule cannot drift from the summary's.
type SegmentRule struct {
	acc  *Accumulator
	feed recordFeed
	s    [1]telemetry.Sample
}

// NewSegmentRule returns a rule at the start of a stream.
func NewSegmentRule() *SegmentRule {
	// One kept segment: the others are counted, not finished (no spectra, no figures).
	return &SegmentRule{acc: New(Options{MaxSegments: 1})}
}

// Record takes the scanner's current record (call it after every Scan, whatever its
// kind) and returns the 0-based index of the segment a sample belongs to (-1 for a
// record that is not a sample).
func (r *SegmentRule) Record(sc *telemetry.Scanner) int64 {
	switch sc.Kind() {
	case telemetry.RecSample:
		p := sc.CurrentSample()
		r.feed.lastLine = p.Line
		r.s[0] = *p
		r.acc.addRun(r.s[:])
		return r.acc.segSeen - 1
	case telemetry.RecMeta:
		st := sc.Stats()
		if line, ok := r.feed.banner(st); ok {
			r.acc.Comment(line)
		}
		r.acc.SetMetaLine(sc.Meta(), st.Lines)
	case telemetry.RecEvent:
		r.acc.AddEvent(sc.Event())
	}
	return -1
}

// recordFeed is what a pass over a Scanner keeps to tell the accumulator of comment
// lines, which the scanner skips and only its counts show.
type recordFeed struct {
	comments int64 // comment lines seen at the last meta line
	lastLine int64 // line of the last sample
}

// banner is called at a meta line: comment lines between the last sample and it may
// open a restart banner; it returns the line of the comment to report.
func (f *recordFeed) banner(st telemetry.Stats) (int64, bool) {
	ok := st.Comments > f.comments && f.lastLine > 0 && st.Lines-f.lastLine > 1
	f.comments = st.Comments
	return st.Lines - 1, ok
}
