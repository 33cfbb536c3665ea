package tui

import (
	"slices"
	"strings"

	"github.com/caploop/caploop/analysis"
)

// fixedGlyph marks a diagnostic of an earlier part of the run that no longer shows.
const fixedGlyph = "✓"

// lastChangeText names the newest change of settings: "deadband 9 at 12.3s".
func (m AdviceModel) lastChangeText() string {
	c := m.changes[len(m.changes)-1]
	return c.What + " at " + formatSeconds(c.At)
}

// diagLines is the diagnostics part of the full view: without a change of settings, one
// list; after one, what shows now (since the change) and what showed only earlier, each
// earlier one with its state ("fixed at 12.3s by deadband 9").
func (m AdviceModel) diagLines() []string {
	if len(m.now) == 0 && len(m.earlier) == 0 {
		return nil
	}
	var lines []string
	if len(m.changes) == 0 {
		lines = append(lines, "diagnostics:")
	} else {
		head := "diagnostics now (since " + m.lastChangeText() + "):"
		if len(m.now) == 0 {
			head = "diagnostics now (since " + m.lastChangeText() + "): none"
		}
		lines = append(lines, head)
	}
	for _, d := range m.now {
		lines = append(lines, "  "+severityGlyph(d.Severity)+" "+d.Text)
	}
	if len(m.earlier) > 0 {
		lines = append(lines, "diagnostics earlier (before "+m.lastChangeText()+"):")
		for _, d := range m.earlier {
			g := severityGlyph(d.Severity)
			if d.State == diagFixed {
				g = fixedGlyph
			}
			lines = append(lines, "  "+g+" "+d.fixedText()+": "+d.Text)
		}
	}
	return lines
}

// compactDiag is one diagnostic under the trace: a one-line headline and a short sentence.
type compactDiag struct{ head, sentence string }

// compactDiags lists the diagnostics under the trace: the ones showing now (errors
// first), then the earlier ones with their state, fixed first.
func (m AdviceModel) compactDiags() []compactDiag {
	now := slices.Clone(m.now)
	slices.SortStableFunc(now, func(a, b diagLine) int { return severityRank(a.Severity) - severityRank(b.Severity) })
	var out []compactDiag
	for _, d := range now {
		ad := analysis.Diagnostic{Code: d.Code, Severity: d.Severity, Message: d.Text}
		g := severityGlyph(d.Severity)
		out = append(out, compactDiag{head: g + " " + headline(ad), sentence: g + " " + shortSentence(d.Text)})
	}
	earlier := slices.Clone(m.earlier)
	slices.SortStableFunc(earlier, func(a, b diagLine) int { return stateRank(a.State) - stateRank(b.State) })
	for _, d := range earlier {
		what := strings.ReplaceAll(d.Code, "_", " ")
		if len(d.Segs) > 0 {
			what += " (" + segListText(d.Segs) + ")"
		}
		h := "earlier: " + what + ", " + d.fixedText()
		if d.State == diagFixed {
			h = fixedGlyph + " " + what + ", " + d.fixedText()
		}
		out = append(out, compactDiag{head: h, sentence: h})
	}
	return out
}

func stateRank(s diagState) int {
	switch s {
	case diagFixed:
		return 0
	case diagWatching:
		return 1
	}
	return 2
}

// noteChange records a change of settings for the diagnostics: a `set` line sent, or a
// setting the board reported changed. The board's report of a setting just sent takes
// the place of the sent line (the change happened when the board took it).
func (m *Model) noteChange(at, cut float64, what string) {
	c := settingChange{At: at, Cut: cut, What: what}
	if m.sum != nil {
		c.Rejected, c.Dropped, c.Gaps = m.sum.RejectedLines, m.sum.DroppedValues, m.sum.Gaps
	}
	if n := len(m.changes); n > 0 && !strings.HasPrefix(what, "set ") {
		prev := m.changes[n-1].What
		if sent, ok := strings.CutPrefix(prev, "set "); ok && settingKey(sent) == settingKey(what) {
			m.changes[n-1] = c
			return
		}
	}
	m.changes = append(slices.Clip(m.changes), c)
}

// settingKey is the name of the setting a change names: "deadband" of "deadband=9" and
// of "deadband 9", "period_us" of "period_us 1000→500".
func settingKey(s string) string {
	k, _, _ := strings.Cut(s, " ")
	k, _, _ = strings.Cut(k, "=")
	return k
}
