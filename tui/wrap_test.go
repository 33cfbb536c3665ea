package tui

import (
	"strings"
	"testing"

	tea "github.com/charmbracelet/bubbletea"
)

// TestProseFitsWidth: the views that print prose (figures and advice with every
// diagnostic on view 2) wrap their lines to the terminal's width instead of running
// past it or being cut.
func TestProseFitsWidth(t *testing.T) {
	for _, w := range []int{60, 80, 120} {
		m := fixtureModel(t, w, 40)
		mm, _ := m.Update(tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune{'2'}})
		m = mm.(Model)
		lines := m.scrollLines()
		if len(lines) < 10 {
			t.Fatalf("width %d: view 2 has %d lines", w, len(lines))
		}
		for i, l := range lines {
			if n := cellWidth(l); n > w {
				t.Errorf("width %d: line %d is %d cells: %q", w, i, n, l)
			}
		}
		if strings.Contains(m.View(), "…\n") {
			t.Errorf("width %d: a line of view 2 was cut:\n%s", w, m.View())
		}
	}
}

// TestWrapLines checks the word wrap on a long sentence: every piece fits, the words
// survive in order, the continuations are indented.
func TestWrapLines(t *testing.T) {
	long := "  band too narrow: the measurement crosses the band in one sample period at setpoint 1.2 V (segments 1, 4 and 7), so the loop chatters; a deadband of 9 counts settles it"
	for _, w := range []int{20, 40, 79} {
		out := strings.Split(wrapLines([]string{long}, w), "\n")
		for i, l := range out {
			if n := cellWidth(l); n > w {
				t.Errorf("width %d: piece %d is %d cells: %q", w, i, n, l)
			}
			if i > 0 && !strings.HasPrefix(l, "    ") {
				t.Errorf("width %d: continuation %q not indented", w, l)
			}
		}
		if got := strings.Join(strings.Fields(strings.Join(out, " ")), " "); got != strings.Join(strings.Fields(long), " ") {
			t.Errorf("width %d: words changed:\n%s", w, got)
		}
	}
}
