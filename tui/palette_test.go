package tui

import (
	"fmt"
	"math"
	"testing"

	"github.com/charmbracelet/x/ansi"
	"github.com/charmbracelet/x/exp/golden"
	"github.com/guptarohit/asciigraph"
)

// xtermRGB returns the sRGB of an xterm-256 colour index of the 6x6x6 cube (16-231) or
// the grey ramp (232-255), by the xterm 256-colour layout (xterm's 256colres.pl).
func xtermRGB(t *testing.T, c asciigraph.AnsiColor) (r, g, b float64) {
	t.Helper()
	i := int(c)
	switch {
	case i >= 16 && i <= 231:
		level := []float64{0, 95, 135, 175, 215, 255}
		i -= 16
		return level[i/36] / 255, level[i/6%6] / 255, level[i%6] / 255
	case i >= 232 && i <= 255:
		v := float64(8+10*(i-232)) / 255
		return v, v, v
	}
	t.Fatalf("colour %d is one of the 16 the terminal's theme redefines", i)
	return
}

// luminance is the relative luminance of WCAG 2.x (sRGB linearised, weights 0.2126,
// 0.7152, 0.0722).
func luminance(r, g, b float64) float64 {
	lin := func(v float64) float64 {
		if v <= 0.03928 {
			return v / 12.92
		}
		return math.Pow((v+0.055)/1.055, 2.4)
	}
	return 0.2126*lin(r) + 0.7152*lin(g) + 0.0722*lin(b)
}

// contrast is the WCAG 2.x contrast ratio of two luminances.
func contrast(a, b float64) float64 { return (max(a, b) + 0.05) / (min(a, b) + 0.05) }

// TestPalette checks the series colours: each stands out from a white and from a black
// background by at least 3:1 (WCAG 2.1, success criterion 1.4.11, non-text contrast),
// and each pair differs by more than red against green: by luminance or along the
// blue-yellow axis (our rule: |Δ luminance| >= 0.08 or |Δ(b - (r+g)/2)| >= 0.2, on
// sRGB values 0..1), so a red-green colour-blind eye still tells them apart.
func TestPalette(t *testing.T) {
	type col struct {
		name    string
		l, by   float64
		r, g, b float64
	}
	var cols []col
	for name, c := range seriesColours {
		r, g, b := xtermRGB(t, c)
		l := luminance(r, g, b)
		if w := contrast(l, 1); w < 3 {
			t.Errorf("%s (colour %d) on white: contrast %.2f, want >= 3", name, c, w)
		}
		if k := contrast(l, 0); k < 3 {
			t.Errorf("%s (colour %d) on black: contrast %.2f, want >= 3", name, c, k)
		}
		cols = append(cols, col{name, l, b - (r+g)/2, r, g, b})
	}
	for i := range cols {
		for j := i + 1; j < len(cols); j++ {
			a, b := cols[i], cols[j]
			if math.Abs(a.l-b.l) < 0.08 && math.Abs(a.by-b.by) < 0.2 {
				t.Errorf("%s and %s differ only by red against green (Δ luminance %.3f, Δ blue-yellow %.3f)",
					a.name, b.name, a.l-b.l, a.by-b.by)
			}
		}
	}
	// The glyphs differ too.
	glyphs := map[string]string{"setpoint": glyphsSP.Horizontal, "band": glyphsBand.Horizontal, "measurement": glyphsPV.Horizontal}
	seen := map[string]string{}
	for name, g := range glyphs {
		if other, ok := seen[g]; ok {
			t.Errorf("%s and %s share the glyph %s", name, other, g)
		}
		seen[g] = name
	}
}

// TestColourViews renders every view of the fixture at 80x24 and 120x40 in colour and
// compares it with testdata/TestColourViews/... ; without its escapes it must read
// exactly as the same view without colour (TestViews), so nothing depends on colour.
func TestColourViews(t *testing.T) {
	views := []struct {
		name string
		keys []string
	}{
		{"trace", nil}, {"figures", []string{"2"}}, {"spread", []string{"3"}},
		{"ripple", []string{"4"}}, {"step", []string{"5"}}, {"help", []string{"?"}},
	}
	for _, sz := range [][2]int{{80, 24}, {120, 40}} {
		for _, v := range views {
			t.Run(fmt.Sprintf("%dx%d/%s", sz[0], sz[1], v.name), func(t *testing.T) {
				plain := press(t, fixtureModel(t, sz[0], sz[1]), v.keys...).View()
				m := fixtureModel(t, sz[0], sz[1])
				m.opts.Color, m.plot.color = true, true
				for i := range m.charts {
					m.charts[i].color = true
				}
				out := press(t, m, v.keys...).View()
				if v.name != "help" && v.name != "figures" && ansi.Strip(out) == out {
					t.Errorf("the %s view has no colour", v.name)
				}
				if got := ansi.Strip(out); got != plain {
					t.Errorf("the %s view without its colours differs from the plain view:\n%s\nplain:\n%s", v.name, got, plain)
				}
				golden.RequireEqual(t, []byte(out))
			})
		}
	}
}
