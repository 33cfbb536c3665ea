package tui

import (
	"math"
	"regexp"
	"slices"
	"strconv"
	"strings"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/figure"
)

// settingChange is one change of the board's settings seen by the screen: a deadband
// the board confirmed, another setting a meta line changed mid-stream, or a `set` line
// sent to the board.
type settingChange struct {
	At   float64 // screen clock, s (shown to the user)
	Cut  float64 // analysis clock: the start of the segment running at the change; later segments ran under it
	What string  // what changed, as shown: "deadband 9", "set period_us=500"
	// The counters of the run at the change (from the newest summary): a rejected line
	// or a gap after it is a recurrence of those diagnostics.
	Rejected, Dropped, Gaps int64
}

// Fixed rule of CONVENTIONS.md: a problem is fixed when it has not recurred for 5 s or 5
// limit cycles after the change of settings that addressed it. We take the longer of
// the two, so a slow loop (a 3 s cycle) is watched over 5 of its cycles and a fast one
// over 5 s of its data.
const (
	fixedAfterS      = 5.0
	fixedAfterCycles = 5.0
)

// diagState says where a diagnostic stands against the changes of settings.
type diagState int

const (
	diagNow      diagState = iota // seen since the last change (or there was none)
	diagEarlier                   // only before the last change, and not yet long enough to call fixed
	diagFixed                     // not recurred for the fixed window after the change that addressed it
	diagWatching                  // only before a change too recent to judge
)

// diagLine is one folded line of diagnostics: the diagnostics of one code and severity
// within one state, with the segments they name.
type diagLine struct {
	Code, Severity string
	State          diagState
	Text           string // the sentence (several folded: the subjects, then the newest's finding)
	Segs           []int
	FixedAt        float64 // screen clock of the change that fixed it
	By             string  // that change
}

// parsedDiag is one diagnostic of the analysis with the segments it names.
type parsedDiag struct {
	d        analysis.Diagnostic
	subject  string // before ": ", without the segment list ("Setpoint 1.2 V")
	rest     string // after ": "
	segs     []int
	tracking bool // about the setpoints passed while the setpoint moved
	moreOf   int  // "The same (code) at N more setpoints": N
}

var (
	segListRE = regexp.MustCompile(`\s*\(segments? ([0-9, ]+)(?:, \.\.\. \(\d+ in all\))?\)`)
	moreRE    = regexp.MustCompile(`^The same \(([a-z ]+)\) at (\d+) more setpoints?\.$`)
)

func parseDiag(d analysis.Diagnostic) parsedDiag {
	p := parsedDiag{d: d, tracking: strings.HasPrefix(d.Message, "While the setpoint moved")}
	if m := moreRE.FindStringSubmatch(d.Message); m != nil {
		p.moreOf, _ = strconv.Atoi(m[2])
		return p
	}
	subject, rest, found := strings.Cut(d.Message, ": ")
	m := segListRE.FindStringSubmatch(subject)
	if !found || len([]rune(segListRE.ReplaceAllString(subject, ""))) > 80 {
		p.rest = d.Message
		return p
	}
	if m != nil {
		for _, f := range strings.Split(m[1], ",") {
			if n, err := strconv.Atoi(strings.TrimSpace(f)); err == nil {
				p.segs = append(p.segs, n)
			}
		}
		subject = strings.TrimSpace(segListRE.ReplaceAllString(subject, ""))
	}
	p.subject, p.rest = subject, rest
	return p
}

// shows reports whether segment seg (of the summary) shows the problem of code: a band
// jump, noise exits, an unreached setpoint, no settling. Codes with no figure of their
// own per segment count every segment the diagnostic names.
func shows(code string, seg *analysis.Segment) bool {
	switch code {
	case analysis.DiagBandTooNarrow:
		return seg.BandJumps > 0
	case analysis.DiagNoiseChatter:
		return seg.NoiseExits > 2 && 10*seg.NoiseExits > seg.DeadbandExits
	case analysis.DiagUnreachable:
		return seg.Unreachable
	case analysis.DiagNotSettled:
		return !seg.Settled
	}
	return true
}

// occurrences returns the start times (analysis clock) of the segments where the
// diagnostic shows; ok is false when it names no segment (a whole-run finding).
func occurrences(p parsedDiag, sum *analysis.Summary) (starts []float64, ok bool) {
	if p.tracking {
		for i := range sum.Segments {
			if s := &sum.Segments[i]; s.Tracking && shows(p.d.Code, s) {
				starts = append(starts, s.StartS)
			}
		}
		return starts, true
	}
	if len(p.segs) == 0 {
		return nil, false
	}
	for _, n := range p.segs {
		if n < 1 || n > len(sum.Segments) {
			// Not kept in the bounded list: a late segment, so count it as now.
			starts = append(starts, math.Inf(1))
			continue
		}
		if p.d.Code == analysis.DiagNotSettled && n == len(sum.Segments) {
			continue // the running segment may still be on its way (the analysis skips it too)
		}
		if s := &sum.Segments[n-1]; shows(p.d.Code, s) {
			starts = append(starts, s.StartS)
		}
	}
	return starts, true
}

// counterGrew reports, for a diagnostic that counts events over the run (rejected lines,
// dropped values, gaps), whether the count grew since change c; known is false for the
// other codes.
func counterGrew(code string, sum *analysis.Summary, c settingChange) (grew, known bool) {
	switch code {
	case analysis.DiagRejectedLines:
		return sum.RejectedLines > c.Rejected, true
	case analysis.DiagDroppedValues:
		return sum.DroppedValues > c.Dropped, true
	case analysis.DiagDroppedSamples:
		return sum.Gaps > c.Gaps, true
	}
	return false, false
}

// unnamedShows reports whether a segment after cut, not named by any diagnostic of the
// code and not the running one, shows the problem; only for codes with a figure per
// segment.
func unnamedShows(code string, sum *analysis.Summary, named map[int]bool, cut float64) bool {
	switch code {
	case analysis.DiagBandTooNarrow, analysis.DiagNoiseChatter, analysis.DiagUnreachable, analysis.DiagNotSettled:
	default:
		return false
	}
	for i := 0; i < len(sum.Segments)-1; i++ {
		s := &sum.Segments[i]
		if !named[i+1] && !s.Tracking && s.StartS > cut && shows(code, s) {
			return true
		}
	}
	return false
}

// analysisNow is the newest time of the analysis clock: the end of the newest segment.
func analysisNow(sum *analysis.Summary) float64 {
	t := 0.0
	for i := range sum.Segments {
		t = math.Max(t, sum.Segments[i].EndS)
	}
	return t
}

// addresses reports whether a change of settings can fix a problem of code: a change of
// the setpoint only moves away from where the problem showed, so it addresses only an
// unreachable or unsettled setpoint.
func addresses(c settingChange, code string) bool {
	key := settingKey(strings.TrimPrefix(c.What, "set "))
	if key == "sp" {
		return code == analysis.DiagUnreachable || code == analysis.DiagNotSettled
	}
	return true
}

// judgeFixed decides, for a problem last seen in a segment starting at last, whether
// the first change after it fixed it: it returns the state and that change.
func judgeFixed(code string, last float64, sum *analysis.Summary, changes []settingChange) (diagState, *settingChange) {
	var c, first *settingChange
	for i := range changes {
		if changes[i].Cut < last {
			continue
		}
		if first == nil {
			first = &changes[i]
		}
		if addresses(changes[i], code) {
			c = &changes[i]
			break
		}
	}
	if c == nil {
		// Only changes that cannot fix it (a new setpoint does not cure a narrow band:
		// it only stops showing it there): earlier, with no fix claimed.
		return diagEarlier, first
	}
	// The change's moment in the analysis clock is the start of the first segment after
	// the cut; the window is the longer of 5 s and 5 limit cycles of the newest segment.
	start, cycle := math.NaN(), 0.0
	for i := range sum.Segments {
		s := &sum.Segments[i]
		if s.StartS <= c.Cut {
			continue
		}
		if math.IsNaN(start) {
			start = s.StartS
		}
		if s.LimitCyclePeriodS != nil {
			cycle = *s.LimitCyclePeriodS
		}
	}
	if math.IsNaN(start) || analysisNow(sum)-start < math.Max(fixedAfterS, fixedAfterCycles*cycle) {
		return diagWatching, c
	}
	return diagFixed, c
}

// splitDiagnostics sorts the summary's diagnostics into now and earlier against the
// changes of settings (oldest first), and folds each code within each part into one
// line with the segments listed. Without a change, every diagnostic is now.
func splitDiagnostics(sum *analysis.Summary, changes []settingChange) (now, earlier []diagLine) {
	if sum == nil {
		return nil, nil
	}
	type item struct {
		p     parsedDiag
		state diagState
		by    *settingChange
	}
	var items []item
	for _, d := range sum.Diagnostics {
		p := parseDiag(d)
		it := item{p: p, state: diagNow}
		if len(changes) > 0 && p.moreOf == 0 {
			last := changes[len(changes)-1]
			if starts, ok := occurrences(p, sum); ok {
				seen := math.Inf(-1)
				for _, s := range starts {
					seen = math.Max(seen, s)
				}
				switch {
				case len(starts) == 0:
					// Named segments none of which shows it any more (its group grew
					// clean segments): it stands as earlier.
					it.state = diagEarlier
				case seen > last.Cut:
					it.state = diagNow
				default:
					it.state, it.by = judgeFixed(d.Code, seen, sum, changes)
				}
			} else if grew, known := counterGrew(d.Code, sum, last); known && !grew {
				it.state, it.by = diagEarlier, &last
			}
		}
		items = append(items, it)
	}
	// A problem that shows again now (the same code at the same subject, e.g. a new band
	// at the same setpoint) was not fixed by the change, whatever its old lines say.
	for i := range items {
		if items[i].state != diagFixed && items[i].state != diagWatching {
			continue
		}
		for _, o := range items {
			if o.state == diagNow && o.p.d.Code == items[i].p.d.Code && o.p.subject == items[i].p.subject {
				items[i].state, items[i].by = diagEarlier, nil
			}
		}
	}
	// "The same (code) at N more setpoints" stands for setpoints the analysis did not
	// name: now when an unnamed segment after the change shows the problem, else in the
	// state of the newest named diagnostic of its code, so that it folds into that line.
	for i := range items {
		if items[i].p.moreOf == 0 || len(changes) == 0 {
			continue
		}
		code := items[i].p.d.Code
		items[i].state, items[i].by = diagEarlier, nil
		named := map[int]bool{}
		for _, o := range items {
			if o.p.moreOf == 0 && o.p.d.Code == code {
				items[i].state, items[i].by = o.state, o.by
				for _, n := range o.p.segs {
					named[n] = true
				}
			}
		}
		if unnamedShows(code, sum, named, changes[len(changes)-1].Cut) {
			items[i].state, items[i].by = diagNow, nil
		}
	}
	// Fold per code, severity and part (fixed by different changes stay apart).
	type key struct {
		code, sev string
		now       bool
		state     diagState
		by        *settingChange
	}
	var order []key
	groups := map[key][]item{}
	for _, it := range items {
		k := key{code: it.p.d.Code, sev: it.p.d.Severity, now: it.state == diagNow, state: it.state, by: it.by}
		if _, ok := groups[k]; !ok {
			order = append(order, k)
		}
		groups[k] = append(groups[k], it)
	}
	for _, k := range order {
		g := groups[k]
		ps := make([]parsedDiag, len(g))
		for i := range g {
			ps[i] = g[i].p
		}
		l := foldDiags(ps)
		l.State = k.state
		if k.by != nil {
			l.FixedAt, l.By = k.by.At, k.by.What
		}
		if k.now {
			now = append(now, l)
		} else {
			earlier = append(earlier, l)
		}
	}
	return now, earlier
}

// foldDiags makes one line of diagnostics of one code: a single one keeps its sentence;
// several say their subjects and segments, then what the newest found (the numbers
// differ per setpoint), then how many more setpoints the analysis left out.
func foldDiags(ps []parsedDiag) diagLine {
	l := diagLine{Code: ps[0].d.Code, Severity: ps[0].d.Severity}
	var named []parsedDiag
	more := 0
	for _, p := range ps {
		l.Segs = append(l.Segs, p.segs...)
		if p.moreOf > 0 {
			more += p.moreOf
			continue
		}
		named = append(named, p)
	}
	slices.Sort(l.Segs)
	l.Segs = slices.Compact(l.Segs)
	switch {
	case len(named) == 0:
		l.Text = ps[0].d.Message
		return l
	case len(named) == 1:
		l.Text = named[0].d.Message
	default:
		var subjects []string
		for _, p := range named {
			s := p.subject
			if s == "" {
				s = headline(p.d)
			}
			s = strings.TrimPrefix(s, "Setpoint ")
			if !slices.Contains(subjects, s) {
				subjects = append(subjects, s)
			}
		}
		newest := named[len(named)-1]
		if strings.HasPrefix(named[0].subject, "Setpoint ") {
			subjects[0] = figure.Pick(len(subjects), "Setpoint ", "Setpoints ") + subjects[0]
		}
		l.Text = strings.Join(subjects, ", ")
		if len(l.Segs) > 0 {
			l.Text += " (" + segListText(l.Segs) + ")"
		}
		l.Text += ": " + strings.ReplaceAll(l.Code, "_", " ") + "; the newest"
		if newest.subject != "" {
			l.Text += " (" + strings.TrimPrefix(newest.subject, "Setpoint ")
			if len(newest.segs) > 0 {
				l.Text += ", " + segListText(newest.segs)
			}
			l.Text += ")"
		}
		l.Text += ": " + newest.rest
	}
	if more > 0 {
		l.Text = strings.TrimSuffix(l.Text, ".") + "; the same at " + figure.Count(more, "more setpoint") + "."
	}
	return l
}

func segListText(v []int) string {
	if len(v) == 1 {
		return "segment " + strconv.Itoa(v[0])
	}
	return "segments " + figure.List(v)
}

// fixedText is the state of an earlier diagnostic in words: "fixed at 12.3 s by
// deadband 9", "watching since deadband 9 at 12.3 s" (too soon to tell), or "before the
// last change".
func (l diagLine) fixedText() string {
	switch l.State {
	case diagFixed:
		return "fixed at " + formatSeconds(l.FixedAt) + " by " + l.By
	case diagWatching:
		return "watching since " + l.By + " at " + formatSeconds(l.FixedAt)
	}
	if l.By != "" {
		return "none since " + l.By + " at " + formatSeconds(l.FixedAt)
	}
	return "before the last change"
}
