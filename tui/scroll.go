package tui

import (
	"fmt"
	"strings"
)

// scrolled shows lines in a block height rows tall starting at line *offset (clamped to
// the text). A text that does not fit gives its last row to where the block stands:
// "lines 20–38 of 54" and the keys that move it.
func scrolled(lines []string, width, height int, offset *int) string {
	if height <= 0 {
		return ""
	}
	if len(lines) <= height {
		*offset = 0
		return fitBlock(strings.Join(lines, "\n"), width, height)
	}
	rows := height - 1
	*offset = min(max(*offset, 0), len(lines)-rows)
	shown := lines[*offset : *offset+rows]
	first, last := *offset+1, *offset+rows
	var hint string
	switch {
	case first == 1:
		hint = "↓ or PgDn for more"
	case last == len(lines):
		hint = "the end · ↑ or PgUp back"
	default:
		hint = "↑↓ PgUp PgDn scroll"
	}
	pos := fmt.Sprintf("── lines %d–%d of %d · %s ──", first, last, len(lines), hint)
	return fitBlock(strings.Join(append(append([]string(nil), shown...), pos), "\n"), width, height)
}

// scrollLines returns the whole text of a view that scrolls (nil for the others): for
// view 2, every figure and then the whole advice with every diagnostic.
func (m Model) scrollLines() []string {
	if m.full || m.view != ViewFigures {
		return nil
	}
	fig, adv := m.figures, m.advice
	fig.SetSize(m.width, 0, false)
	adv.SetSize(m.width, 0, false)
	lines := strings.Split(strings.TrimRight(fig.fullView(), "\n"), "\n")
	return append(append(lines, ""), adv.fullLines()...)
}

// scroll moves the current view's text by n lines (a page is the body height less one).
func (m *Model) scroll(n int) {
	lines := m.scrollLines()
	if lines == nil {
		return
	}
	rows := m.height - 4 - 1
	off := m.offsets[m.view] + n
	m.offsets[m.view] = min(max(off, 0), max(len(lines)-rows, 0))
}
