package telemetry

import (
	"testing"
	"unicode"
	"unicode/utf8"
)

func TestSanitize(t *testing.T) {
	tests := []struct {
		name string
		in   string
		n    int
		want string
	}{
		{"plain", "t=1 sp=512 pv=498 u=1", -1, "t=1 sp=512 pv=498 u=1"},
		{"empty", "", -1, ""},
		{"nul", "a\x00b", -1, `a\x00b`},
		{"escape sequence", "\x1b[2Jclear", -1, `\x1b[2Jclear`},
		{"del", "a\x7f", -1, `a\x7f`},
		{"tab and cr", "a\tb\r", -1, `a\x09b\x0d`},
		{"invalid utf8", "ok\xff\xfe", -1, `ok\xff\xfe`},
		{"truncated rune", "µ\xc2", -1, `µ\xc2`},
		{"valid utf8 kept", "4.7 µF Ω", -1, "4.7 µF Ω"},
		{"c1 control", "a\u009bb", -1, `a\u{009b}b`},
		{"bidi override", "a\u202eb", -1, `a\u{202e}b`},
		{"cut ascii", "abcdefgh", 4, "abcd..."},
		{"no cut at limit", "abcd", 4, "abcd"},
		{"cut never splits escape", "ab\x00cd", 4, "ab..."},
		{"cut never splits rune", "aµb", 2, "a..."},
		{"zero limit", "abc", 0, "..."},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got := SanitizeN([]byte(tc.in), tc.n)
			if got != tc.want {
				t.Errorf("SanitizeN(%q, %d) = %q, want %q", tc.in, tc.n, got, tc.want)
			}
			if !safeText(got) {
				t.Errorf("SanitizeN(%q, %d) = %q holds unprintable runes", tc.in, tc.n, got)
			}
		})
	}
}

// safeText reports whether s is valid UTF-8 of printable runes only.
func safeText(s string) bool {
	if !utf8.ValidString(s) {
		return false
	}
	for _, r := range s {
		if !unicode.IsPrint(r) {
			return false
		}
	}
	return true
}

func TestSanitizeAllBytes(t *testing.T) {
	b := make([]byte, 256)
	for i := range b {
		b[i] = byte(i)
	}
	if got := Sanitize(b); !safeText(got) {
		t.Errorf("Sanitize(all bytes) = %q holds unprintable runes", got)
	}
}
