package tui

import (
	"unicode/utf8"

	"github.com/charmbracelet/x/ansi"
)

// cellWidth is ansi.StringWidth with a fast path: a line made only of runes known to take
// one cell each (printable ASCII, Latin-1, Greek, and the punctuation, arrows, maths,
// box-drawing, block and shape characters the screen draws with) and of CSI escape
// sequences (colours), which take none, has as many cells as runes outside the
// sequences. Any other rune or escape sends the line to ansi.StringWidth, which measures
// grapheme clusters; the plots' lines, coloured and redrawn up to 20 times a second, never do.
func cellWidth(s string) int {
	n := 0
	for i := 0; i < len(s); {
		c := s[i]
		switch {
		case c == 0x1b:
			j, ok := skipCSI(s, i)
			if !ok {
				return ansi.StringWidth(s)
			}
			i = j
			continue
		case c < 0x80:
			if c < 0x20 || c == 0x7f {
				return ansi.StringWidth(s)
			}
			i++
		default:
			r, size := utf8.DecodeRuneInString(s[i:])
			if !narrowRune(r) {
				return ansi.StringWidth(s)
			}
			i += size
		}
		n++
	}
	return n
}

// skipCSI returns the index after the CSI sequence (ESC [ parameters intermediates
// final) that starts at s[i], or false when none whole starts there.
func skipCSI(s string, i int) (int, bool) {
	if i+1 >= len(s) || s[i+1] != '[' {
		return 0, false
	}
	j := i + 2
	for j < len(s) && s[j] >= 0x30 && s[j] <= 0x3f {
		j++
	}
	for j < len(s) && s[j] >= 0x20 && s[j] <= 0x2f {
		j++
	}
	if j < len(s) && s[j] >= 0x40 && s[j] <= 0x7e {
		return j + 1, true
	}
	return 0, false
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
