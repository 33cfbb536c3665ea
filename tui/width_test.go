package tui

import (
	"testing"

	"github.com/charmbracelet/x/ansi"
)

// TestCellWidth checks the fast path of cellWidth against ansi.StringWidth (the
// reference) on every rune it claims to be one cell, and on lines the screen draws.
func TestCellWidth(t *testing.T) {
	for r := rune(0); r < 0x3000; r++ {
		if !narrowRune(r) {
			continue
		}
		if w := ansi.StringWidth(string(r)); w != 1 {
			t.Errorf("rune %U: ansi.StringWidth = %d, cellWidth counts 1", r, w)
		}
	}
	for _, s := range []string{"", "plain", "  1.200 ┤ ━━━┄┄┄──╭╮╰╯ ▲db 9", "47 kΩ ± 5 % · 1 µF", "\x1b[38;5;166m─\x1b[0m x",
		"wide 漢字", "emoji ⌚ ◽", "e\u0301",
		// Colour and other CSI sequences take no cell; other escapes go the slow way.
		"\x1b[0m", "\x1b[38;2;10;20;30m┤\x1b[m ━", "\x1b[?25lx", "\x1b[1 qx", "tail \x1b[", "tail \x1b[38;5",
		"\x1b]8;;http://x\x1b\\link\x1b]8;;\x1b\\", "\x1bMx", "a\tb", "\u009b31mx"} {
		if got, want := cellWidth(s), ansi.StringWidth(s); got != want {
			t.Errorf("cellWidth(%q) = %d, want %d (ansi.StringWidth)", s, got, want)
		}
	}
}
