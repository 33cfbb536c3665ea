package telemetry

import (
	"io/fs"
	"os"
	"unicode"
	"unicode/utf8"
)

// Sanitize returns b as text that is safe to print on a terminal or in a report.
// Printable ASCII and printable UTF-8 pass unchanged; every other byte (control bytes,
// ESC, NUL, DEL, bytes of invalid UTF-8) is shown as \xNN, and a valid but unprintable
// rune (C1 controls, bidi overrides, other format characters) as \u{NNNN}. A backslash
// is kept as is. Device text is untrusted: anything a board or a capture sent goes
// through Sanitize before it reaches a screen or a file written for people.
func Sanitize(b []byte) string { return SanitizeN(b, -1) }

// SanitizeN is Sanitize with the result cut to at most n bytes (not counting a trailing
// "..." that marks the cut). The cut never splits an escape or a rune. n < 0 means no limit.
func SanitizeN(b []byte, n int) string {
	// Fast path: short enough and all printable ASCII.
	if n < 0 || len(b) <= n {
		clean := true
		for _, c := range b {
			if c < 0x20 || c >= 0x7f {
				clean = false
				break
			}
		}
		if clean {
			return string(b)
		}
	}
	size := len(b)
	if n >= 0 && n < size {
		size = n
	}
	out := make([]byte, 0, size+8)
	cut := false
	for i := 0; i < len(b); {
		c := b[i]
		var piece []byte
		var tmp [12]byte
		w := 1
		switch {
		case c >= 0x20 && c < 0x7f:
			tmp[0] = c
			piece = tmp[:1]
		case c < 0x80:
			piece = appendHexByte(tmp[:0], c)
		default:
			r, rw := utf8.DecodeRune(b[i:])
			if r == utf8.RuneError && rw <= 1 {
				piece = appendHexByte(tmp[:0], c)
			} else {
				w = rw
				if unicode.IsPrint(r) {
					piece = b[i : i+rw]
				} else {
					piece = appendRuneEscape(tmp[:0], r)
				}
			}
		}
		if n >= 0 && len(out)+len(piece) > n {
			cut = true
			break
		}
		out = append(out, piece...)
		i += w
	}
	if cut {
		out = append(out, "..."...)
	}
	return string(out)
}

const hexDigits = "0123456789abcdef"

func appendHexByte(dst []byte, c byte) []byte {
	return append(dst, '\\', 'x', hexDigits[c>>4], hexDigits[c&15])
}

func appendRuneEscape(dst []byte, r rune) []byte {
	dst = append(dst, '\\', 'u', '{')
	started := false
	for shift := 20; shift >= 0; shift -= 4 {
		d := (r >> uint(shift)) & 15
		if d != 0 || started || shift <= 12 {
			started = true
			dst = append(dst, hexDigits[d])
		}
	}
	return append(dst, '}')
}

// printableText reports whether b is valid UTF-8 made only of printable runes and tabs,
// that is whether Sanitize would leave it unchanged (apart from tabs).
func printableText(b []byte) bool {
	for i := 0; i < len(b); {
		c := b[i]
		if c < 0x80 {
			if (c < 0x20 && c != '\t') || c == 0x7f {
				return false
			}
			i++
			continue
		}
		r, w := utf8.DecodeRune(b[i:])
		if (r == utf8.RuneError && w <= 1) || !unicode.IsPrint(r) {
			return false
		}
		i += w
	}
	return true
}

// CleanPathError returns err, when it is an *fs.PathError or an *os.LinkError, with its
// paths sanitised, so "open NAME: no such file" never carries a file name's control
// bytes to a terminal. Other errors are returned as they are; errors.Is still works.
func CleanPathError(err error) error {
	switch e := err.(type) {
	case *fs.PathError:
		c := *e
		c.Path = SanitizeN([]byte(e.Path), 200)
		return &c
	case *os.LinkError:
		c := *e
		c.Old, c.New = SanitizeN([]byte(e.Old), 200), SanitizeN([]byte(e.New), 200)
		return &c
	}
	return err
}
