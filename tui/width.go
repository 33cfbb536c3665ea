package tui

import "github.com/charmbracelet/x/ansi"

// cellWidth is ansi.StringWidth with a fast path: a line made only of runes known to take
// one cell each (printable ASCII, Latin-1, Greek, and the punctuation, arrows, maths,
// box-drawing, block and shape characters the screen draws with, no escape sequence)
// has as many cells as runes. Any other rune sends the line to ansi.StringWidth, which
// measures grapheme clusters; the plots' lines, redrawn 30 times a second, never do.
func cellWidth(s string) int {
	n := 0
	for _, r := range s {
		if !narrowRune(r) {
			return ansi.StringWidth(s)
		}
		n++
	}
	return n
}

// narrowRune reports whether r is one of the runes cellWidth counts as one cell. The
// ranges leave out zero-width and control characters, combining marks and the few
// symbols of these blocks that terminals draw two cells wide (U+2300..23FF holds some;
// U+25FD and U+25FE are emoji).
func narrowRune(r rune) bool {
	switch {
	case r >= 0x20 && r < 0x7f:
		return true
	case r >= 0xa0 && r < 0x300:
		return r != 0xad // the soft hyphen has no width
	case r >= 0x370 && r < 0x400:
		return true
	case r >= 0x2010 && r < 0x2028, r >= 0x2030 && r < 0x2060, r >= 0x2070 && r < 0x20d0, r >= 0x2100 && r < 0x2300:
		return true
	case r >= 0x2500 && r < 0x25fd:
		return true
	}
	return false
}
