package tui

import (
	"fmt"
	"slices"
	"strings"

	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/x/ansi"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/advice"
	"github.com/caploop/caploop/analysis/figure"
	"github.com/caploop/caploop/telemetry/si"
)

// AdviceModel shows the suggested deadband, the top R/C pairs with their predicted
// figures and the diagnostics as sentences.
type AdviceModel struct {
	adv     *advice.Advice // the advice shown (see adviceTrack)
	track   adviceTrack
	err     string
	sum     *analysis.Summary
	changes []settingChange
	now     []diagLine // diagnostics since the last change of settings (all, without one)
	earlier []diagLine // diagnostics only before it
	current float64    // deadband in force, counts; < 0 unknown
	canSend bool
	width   int
	height  int
	compact bool
}

// NewAdvice returns an empty advice model; canSend says whether the source takes commands.
func NewAdvice(canSend bool) AdviceModel { return AdviceModel{current: -1, canSend: canSend} }

// SetSize sets the block size; compact picks the short form.
func (m *AdviceModel) SetSize(width, height int, compact bool) {
	m.width, m.height, m.compact = width, height, compact
}

// Suggested returns the suggested deadband and whether there is one.
func (m AdviceModel) Suggested() (int, bool) {
	if m.adv == nil || m.adv.DeadbandCounts == nil {
		return 0, false
	}
	return *m.adv.DeadbandCounts, true
}

// Update takes advice and summary snapshots.
func (m AdviceModel) Update(msg tea.Msg) (AdviceModel, tea.Cmd) {
	if msg, ok := msg.(frameMsg); ok {
		if msg.reset {
			m.track.reset()
			m.adv = nil
		}
		if msg.advice != nil {
			m.track.offer(msg.advice)
			m.adv, m.err = m.track.shown, ""
		}
		if msg.adviceErr != "" {
			m.err = msg.adviceErr
		}
		if msg.summary != nil {
			m.sum = msg.summary
			m.current = -1
			if d := msg.summary.Board.DeadbandCounts; d != nil {
				m.current = *d
			}
		}
		if msg.summary != nil || len(msg.changes) != len(m.changes) {
			m.changes = msg.changes
			m.now, m.earlier = splitDiagnostics(m.sum, m.changes)
		}
	}
	return m, nil
}

func (m AdviceModel) deadbandLine() string {
	n, ok := m.Suggested()
	if !ok {
		if m.err != "" {
			return "advice: " + strings.TrimPrefix(m.err, "advice: ")
		}
		return "advice: waiting for enough steady data…"
	}
	now := ""
	switch {
	case m.current == float64(n):
		now = " (in force)"
	case m.current >= 0:
		now = fmt.Sprintf(" (now %.0f)", m.current)
	}
	s := "advice: deadband " + figure.Count(n, "count") + now
	if m.canSend && float64(n) != m.current {
		s += " · d sends it"
	}
	_, conf := m.track.confidence(m.sum)
	return s + " · " + conf
}

func candidateLine(c advice.Candidate) string {
	return fmt.Sprintf("%s + %s (%s, band %d): %s p-p, settles %s, %s",
		si.Format(c.ROhm, "Ω"), si.Format(c.CF, "F"), c.Series, c.DeadbandCounts,
		si.Format(c.PredictedRipplePPV, "V"), si.Format(c.PredictedSettleS, "s"), c.Verdict)
}

// View renders the block.
func (m AdviceModel) View() string {
	var lines []string
	lines = append(lines, m.deadbandLine())
	if m.compact {
		return fitBlock(strings.Join(append(lines, m.compactLines(m.height-1)...), "\n"), m.width, m.height)
	}
	out := m.fullLines()
	if len(out) > m.height && m.height > 1 {
		// Say what does not fit rather than cut it silently.
		more := len(out) - m.height + 1
		out = append(out[:m.height-1], "  … "+figure.Count(more, "more line")+": a taller terminal shows them")
	}
	return fitBlock(strings.Join(out, "\n"), m.width, m.height)
}

// fullLines is the full form, word-wrapped to the width.
func (m AdviceModel) fullLines() []string {
	lines := []string{m.deadbandLine()}
	if m.adv != nil {
		if w := m.adv.DeadbandWorking; w != nil {
			lines = append(lines, fmt.Sprintf("  step near setpoint %.1f counts, noise %.2f counts rms × %.1f = margin %.1f counts",
				w.StepCounts, w.NoiseRMSCounts, w.SigmaMultiple, w.MarginCounts))
			lines = append(lines, fmt.Sprintf("  static error it costs %s; band jumps in the check run: %d",
				si.Format(w.StaticErrorV, "V"), w.VerifiedJumps))
			if w.Rule != "" {
				lines = append(lines, "  rule: "+w.Rule)
			}
		}
		for i, c := range m.adv.Candidates {
			lines = append(lines, fmt.Sprintf("  %d. %s", i+1, candidateLine(c)))
		}
		if p := m.adv.SamplePeriod; p != nil {
			lines = append(lines, fmt.Sprintf("  sample period %s → %s: %s", si.Format(p.CurrentS, "s"), si.Format(p.SuggestedS, "s"), p.Reason))
		}
		for _, t := range m.adv.Topology {
			lines = append(lines, "  change: "+t.Change+": "+t.Reason)
		}
	}
	lines = append(lines, m.diagLines()...)
	if m.adv != nil {
		for _, c := range m.adv.Cautions {
			lines = append(lines, "  caution: "+c)
		}
	}
	return strings.Split(wrapLines(lines, m.width), "\n")
}

// compactLines fills rows rows under the trace: the diagnostics (errors first, else in
// the analysis' order), each as a short word-wrapped sentence when the rows allow it, else as a one-line
// headline with a pointer to view 2; then the best pair when a row is left.
func (m AdviceModel) compactLines(rows int) []string {
	if rows <= 0 {
		return nil
	}
	diags := m.compactDiags()
	var out []string
	switch n := len(diags); {
	case n == 0:
	case n > rows:
		// Headlines only; the last row counts the rest.
		for _, d := range diags[:rows-1] {
			out = append(out, "  "+d.head)
		}
		more := n - (rows - 1)
		last := "  … " + figure.Count(more, "more diagnostic") + " on view 2"
		if rows == 1 {
			last = fmt.Sprintf("  %s · %d more on view 2", diags[0].head, more-1)
		}
		out = append(out, last)
	default:
		// Every diagnostic as a headline, then as a whole sentence while rows are left.
		full := make([][]string, n)
		spare := rows - n
		for i, d := range diags {
			full[i] = []string{"  " + d.head}
			f := strings.Split(wrapLines([]string{"  " + d.sentence}, m.width), "\n")
			if len(f)-1 <= spare {
				full[i], spare = f, spare-(len(f)-1)
			} else if h := full[i][0] + " · more on view 2"; ansi.StringWidth(h) <= m.width {
				full[i][0] = h
			}
		}
		for _, f := range full {
			out = append(out, f...)
		}
	}
	if len(out) < rows && m.adv != nil && len(m.adv.Candidates) > 0 {
		out = append(out, "  best pair "+candidateLine(m.adv.Candidates[0]))
	}
	return out
}

func severityRank(s string) int {
	switch s {
	case "error":
		return 0
	case "warning":
		return 1
	}
	return 2
}

// shortSentence drops the long explanations in brackets (over 24 characters) from a
// diagnostic: the figures view has the whole text.
func shortSentence(msg string) string {
	var b strings.Builder
	r := []rune(msg)
	for i := 0; i < len(r); i++ {
		if r[i] == '(' {
			if j := slices.Index(r[i:], ')'); j > 24 {
				s := b.String()
				b.Reset()
				b.WriteString(strings.TrimRight(s, " "))
				i += j
				continue
			}
		}
		b.WriteRune(r[i])
	}
	return b.String()
}

// headline is a one-line form of a diagnostic: what it is about (the text before the
// first colon, when short) and its kind (from the code) when that text does not say it.
func headline(d analysis.Diagnostic) string {
	subject, _, found := strings.Cut(d.Message, ": ")
	kind := strings.ReplaceAll(d.Code, "_", " ")
	if !found {
		return shortSentence(d.Message)
	}
	if len([]rune(subject)) > 60 {
		if kind != "" {
			return kind
		}
		return cut(d.Message, 60)
	}
	says := true
	for _, w := range strings.Fields(kind) {
		if len(w) > 3 && !strings.Contains(strings.ToLower(subject), w) {
			says = false
		}
	}
	if says || kind == "" {
		return subject
	}
	return kind + ": " + subject
}

func severityGlyph(s string) string {
	switch s {
	case "error":
		return "✖"
	case "warning":
		return "▲"
	}
	return "·"
}

// wrapLines word-wraps each line to width, indenting continuations by two spaces.
func wrapLines(lines []string, width int) string {
	if width < 10 {
		return strings.Join(lines, "\n")
	}
	var out []string
	for _, l := range lines {
		for len([]rune(l)) > width {
			r := []rune(l)
			cut := width
			for i := width; i > width/2; i-- {
				if r[i] == ' ' {
					cut = i
					break
				}
			}
			out = append(out, string(r[:cut]))
			l = "    " + strings.TrimLeft(string(r[cut:]), " ")
		}
		out = append(out, l)
	}
	return strings.Join(out, "\n")
}
