package main

import (
	"bytes"
	"strings"
	"testing"
	"unicode/utf8"
)

// TestWrapLine: prose wraps at spaces within the width with a hanging indent, under
// a short label; table rows and short lines pass unchanged.
func TestWrapLine(t *testing.T) {
	t.Parallel()
	diag := "  warning Setpoint 1.2 V (segment 1): 53 band jumps (a charge followed directly by a discharge or the reverse) with a deadband of ±4 counts (9 counts wide)"
	note := "    - capacitor voltage rating: at least 10 V (the 5 V supply with 50 % margin, next common rating, common practice)"
	info := "  info    A load on the node is 974 kΩ (20.7 times R), from the hold droop (tau_hold / tau_charge): it lowers the top of the range"
	row := "    1     1.2 V     0 s  1.25 s    1219  -4.44 mV     92.8 mV   87.8 mV  87.9 mV  17.3 mV   4.3 %  87.0 %  8.6 %  23.4 ms   129 Hz"
	for _, tc := range []struct {
		in   string
		hang int
	}{{diag, 4}, {info, 10}, {note, 6}} {
		got := wrapLine(tc.in, 60)
		lines := strings.Split(got, "\n")
		if len(lines) < 2 {
			t.Fatalf("not wrapped: %q", got)
		}
		for i, l := range lines {
			if n := utf8.RuneCountInString(l); n > 60 {
				t.Errorf("line %d is %d columns: %q", i, n, l)
			}
			if i > 0 && (len(l)-len(strings.TrimLeft(l, " ")) != tc.hang) {
				t.Errorf("line %d hangs at %d, want %d: %q", i, len(l)-len(strings.TrimLeft(l, " ")), tc.hang, l)
			}
		}
		if strings.Join(strings.Fields(got), " ") != strings.Join(strings.Fields(tc.in), " ") {
			t.Errorf("words lost or changed:\n%q\n%q", got, tc.in)
		}
	}
	for _, l := range strings.Split(wrapLine(note, 40), "\n") {
		if strings.HasPrefix(strings.TrimLeft(l, " "), "V ") || strings.HasPrefix(strings.TrimLeft(l, " "), "% ") {
			t.Errorf("a unit parted from its number: %q", l)
		}
	}
	if got := wrapLine(row, 60); got != row {
		t.Errorf("a table row was wrapped: %q", got)
	}
	if got := wrapLine("  short line", 60); got != "  short line" {
		t.Errorf("a short line changed: %q", got)
	}
	var b bytes.Buffer
	ww := &wrapWriter{w: &b, width: 60}
	ww.Write([]byte(note[:30]))
	ww.Write([]byte(note[30:] + "\n" + row))
	ww.flush()
	if want := wrapLine(note, 60) + "\n" + row; b.String() != want {
		t.Errorf("writer split across writes:\n%q\nwant\n%q", b.String(), want)
	}
}
