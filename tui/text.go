package tui

import (
	"strings"

	"github.com/charmbracelet/x/ansi"
)

// maxLineWidth returns the widest line's cell width, ignoring ANSI escapes.
func maxLineWidth(s string) int {
	w := 0
	for _, l := range strings.Split(s, "\n") {
		if n := cellWidth(l); n > w {
			w = n
		}
	}
	return w
}

// padRight pads or cuts s to exactly width cells.
func padRight(s string, width int) string {
	n := cellWidth(s)
	if n > width {
		return ansi.Truncate(s, width, "…")
	}
	return s + strings.Repeat(" ", width-n)
}

// fitBlock returns s as exactly height lines of exactly width cells.
func fitBlock(s string, width, height int) string {
	if height <= 0 {
		return ""
	}
	lines := strings.Split(strings.TrimRight(s, "\n"), "\n")
	if len(lines) > height {
		lines = lines[:height]
	}
	for len(lines) < height {
		lines = append(lines, "")
	}
	for i, l := range lines {
		lines[i] = padRight(l, width)
	}
	return strings.Join(lines, "\n")
}

// besideOrBelow puts block b beside a when both fit in width cells with the gap, else
// below it after a blank line, so a narrow terminal shows both whole.
func besideOrBelow(a, b string, gap, width int) string {
	switch {
	case b == "":
		return a
	case maxLineWidth(a)+gap+maxLineWidth(b) <= width:
		return sideBySide(a, b, gap)
	}
	return a + "\n\n" + b
}

// sideBySide joins two blocks of equal height, a gap between them.
func sideBySide(a, b string, gap int) string {
	al := strings.Split(a, "\n")
	bl := strings.Split(b, "\n")
	aw := maxLineWidth(a)
	n := len(al)
	if len(bl) > n {
		n = len(bl)
	}
	out := make([]string, n)
	for i := range out {
		var x, y string
		if i < len(al) {
			x = al[i]
		}
		if i < len(bl) {
			y = bl[i]
		}
		out[i] = padRight(x, aw) + strings.Repeat(" ", gap) + y
	}
	return strings.Join(out, "\n")
}
