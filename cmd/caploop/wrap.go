package main

import (
	"bytes"
	"io"
	"os"
	"strings"
	"unicode"
	"unicode/utf8"

	"golang.org/x/term"
)

// textOut returns where a command's text goes: w itself, or, when w is a terminal, a
// writer that wraps the long prose lines (diagnostics, notes, the advice's reasons) at
// word boundaries to the terminal's width, so the terminal does not cut words. Tables
// (lines with column gaps) pass unchanged, as does everything written to a file or a
// pipe. flush writes what is left of an unfinished last line.
func textOut(w io.Writer) (out io.Writer, flush func() error) {
	f, ok := w.(*os.File)
	if !ok || !term.IsTerminal(int(f.Fd())) {
		return w, func() error { return nil }
	}
	width, _, err := term.GetSize(int(f.Fd()))
	if err != nil || width < 40 {
		return w, func() error { return nil }
	}
	ww := &wrapWriter{w: w, width: width}
	return ww, ww.flush
}

// wrapWriter wraps prose lines to width columns (see wrapLine).
type wrapWriter struct {
	w     io.Writer
	width int
	part  []byte // an unfinished line
}

func (ww *wrapWriter) Write(p []byte) (int, error) {
	n := len(p)
	for len(p) > 0 {
		i := bytes.IndexByte(p, '\n')
		if i < 0 {
			ww.part = append(ww.part, p...)
			break
		}
		line := string(append(ww.part, p[:i]...))
		ww.part = ww.part[:0]
		p = p[i+1:]
		if _, err := io.WriteString(ww.w, wrapLine(line, ww.width)+"\n"); err != nil {
			return n - len(p), err
		}
	}
	return n, nil
}

func (ww *wrapWriter) flush() error {
	if len(ww.part) == 0 {
		return nil
	}
	_, err := io.WriteString(ww.w, wrapLine(string(ww.part), ww.width))
	ww.part = ww.part[:0]
	return err
}

// labelCols is how far into a line's text a column gap may sit and the line still be
// prose: a short label such as a severity ("info    A load on the node ...").
const labelCols = 12

// wrapLine breaks a prose line longer than width at spaces; the lines after the first
// are indented to the text after its label, or two columns past its own indent. A line
// with a column gap (two spaces) past its label is a table row and stays whole, as does
// a line with a word longer than the room.
func wrapLine(line string, width int) string {
	if utf8.RuneCountInString(line) <= width {
		return line
	}
	text := strings.TrimLeft(line, " ")
	start := len(line) - len(text) // where the words begin
	hang := start + 2
	if g := strings.LastIndex(text, "  "); g >= 0 {
		if g >= labelCols {
			return line // a table row
		}
		rest := strings.TrimLeft(text[g:], " ")
		start = len(line) - len(rest)
		hang = utf8.RuneCountInString(line[:start])
	}
	if width-hang < 20 {
		return line
	}
	var b strings.Builder
	b.Grow(len(line) + 16)
	b.WriteString(line[:start])
	col := utf8.RuneCountInString(line[:start])
	for i, word := range unitWords(strings.Split(line[start:], " ")) {
		wl := utf8.RuneCountInString(word)
		switch {
		case i == 0:
		case col+1+wl > width:
			b.WriteString("\n")
			b.WriteString(strings.Repeat(" ", hang))
			col = hang
		default:
			b.WriteByte(' ')
			col++
		}
		b.WriteString(word)
		col += wl
	}
	return b.String()
}

// unitWords glues a short unit to the number before it ("100 mV", "2 %", "1 µF"), so a
// break never parts them; the space between them stays.
func unitWords(words []string) []string {
	out := words[:0]
	for _, w := range words {
		if n := len(out); n > 0 && w != "" && utf8.RuneCountInString(w) <= 3 {
			p := out[n-1]
			if last, _ := utf8.DecodeLastRuneInString(p); last >= '0' && last <= '9' {
				if r, _ := utf8.DecodeRuneInString(w); r == '%' || unicode.IsLetter(r) {
					out[n-1] = p + " " + w
					continue
				}
			}
		}
		out = append(out, w)
	}
	return out
}
