package tui

import (
	"fmt"
	"strings"

	tea "github.com/charmbracelet/bubbletea"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/advice"
	"github.com/caploop/caploop/telemetry/si"
)

// AdviceModel shows the suggested deadband, the top R/C pairs with their predicted
// figures and the diagnostics as sentences.
type AdviceModel struct {
	adv     *advice.Advice
	err     string
	diags   []analysis.Diagnostic
	current float64 // deadband in force, counts; < 0 unknown
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
	if msg, ok := msg.(snapshotMsg); ok {
		if msg.advice != nil {
			m.adv, m.err = msg.advice, ""
		}
		if msg.adviceErr != "" {
			m.err = msg.adviceErr
		}
		if msg.summary != nil {
			m.diags = msg.summary.Diagnostics
			m.current = -1
			if d := msg.summary.Board.DeadbandCounts; d != nil {
				m.current = *d
			}
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
	if m.current >= 0 {
		now = fmt.Sprintf(" (now %.0f)", m.current)
	}
	s := fmt.Sprintf("advice: deadband %d counts%s", n, now)
	if m.canSend && float64(n) != m.current {
		s += " · d sends it"
	}
	return s
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
		// Diagnostics first: they say what is wrong; the best pair when there is room.
		for _, d := range m.diags {
			lines = append(lines, "  "+severityGlyph(d.Severity)+" "+d.Message)
		}
		if m.adv != nil && len(m.adv.Candidates) > 0 {
			lines = append(lines, "  best pair "+candidateLine(m.adv.Candidates[0]))
		}
		return fitBlock(strings.Join(lines, "\n"), m.width, m.height)
	}
	if m.adv != nil {
		if w := m.adv.Deadband; w != nil {
			lines = append(lines, fmt.Sprintf("  step near setpoint %.1f counts, noise %.2f counts rms × %.1f = margin %.1f counts",
				w.StepCounts, w.NoiseRMSCounts, w.SigmaMultiple, w.MarginCounts))
			lines = append(lines, fmt.Sprintf("  static error it costs %s; band jumps in the check run: %d",
				si.Format(w.StaticErrorV, "V"), w.VerifiedJumps))
			if w.Rule != "" {
				lines = append(lines, "  rule: "+w.Rule)
			}
		}
		for i, c := range m.adv.Candidates {
			if i == 3 {
				break
			}
			lines = append(lines, fmt.Sprintf("  %d. %s", i+1, candidateLine(c)))
		}
		if p := m.adv.SamplePeriod; p != nil {
			lines = append(lines, fmt.Sprintf("  sample period %s → %s: %s", si.Format(p.CurrentS, "s"), si.Format(p.SuggestedS, "s"), p.Reason))
		}
		for _, t := range m.adv.Topology {
			lines = append(lines, "  change: "+t.Change+": "+t.Reason)
		}
	}
	if len(m.diags) > 0 {
		lines = append(lines, "diagnostics:")
		for _, d := range m.diags {
			lines = append(lines, "  "+severityGlyph(d.Severity)+" "+d.Message)
		}
	}
	if m.adv != nil {
		for _, c := range m.adv.Cautions {
			lines = append(lines, "  caution: "+c)
		}
	}
	return fitBlock(wrapLines(lines, m.width), m.width, m.height)
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
