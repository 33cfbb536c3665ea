package tui

import (
	"strings"
	"testing"
)

// TestPlotEnvelope: at an 8 s window of a 1 kS/s board (about 74 samples per column),
// a ±3-count ripple at 40 Hz must stay visible as a band: the measurement's highest and
// lowest values of each column are both drawn, so the plot's top and bottom body rows
// (503 and 497 counts) carry the measurement's glyphs across nearly every column.
func TestPlotEnvelope(t *testing.T) {
	pts := stepPoints(0, 8, 1e-3)
	p := NewPlot(len(pts), 8, false)
	p.SetSize(120, 20)
	p, _ = p.Update(pointsMsg{points: pts})
	lines := strings.Split(p.View(), "\n")
	cols := plotColumns(120)
	for _, row := range []int{0, 16} {
		r := []rune(lines[row])
		n := 0
		for _, c := range r[min(9, len(r)):] {
			if strings.ContainsRune("─╭╮╰╯│", c) {
				n++
			}
		}
		if n < cols*8/10 {
			t.Errorf("row %d %q: %d of %d columns carry the measurement, want the envelope in nearly all", row, lines[row], n, cols)
		}
	}
}
