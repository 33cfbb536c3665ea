package tui

import "github.com/guptarohit/asciigraph"

// The screen's palette. Each series has a glyph of its own, so the plots read the same
// without colour (NO_COLOR, a monochrome terminal, a colour-blind eye); colour only
// helps. The colours are xterm-256 indices of middle lightness, readable on light and
// dark backgrounds alike, and no two series differ only by red against green
// (TestPalette checks both).
//
//	series        glyph            colour
//	setpoint      ━ heavy line     134, violet   #af5fd7
//	band edges    ┄ dashed line    245, grey     #8a8a8a
//	measurement   ─ light line     166, orange   #d75f00 (min and max per column)
//	model (step)  ─ light line      26, blue     #005fd7, with the samples as • in orange
//	error spread  █ bars           166, orange (the measurement's)
//	axes, labels                   245, grey
const (
	colourSP   = asciigraph.AnsiColor(134)
	colourBand = asciigraph.AnsiColor(245)
	colourPV   = asciigraph.AnsiColor(166)
	colourFit  = asciigraph.AnsiColor(26)
	colourAxis = asciigraph.AnsiColor(245)
)

// Series glyphs.
var (
	// glyphsSP draws the setpoint in heavy box-drawing lines; the axis corner and ticks
	// stay asciigraph's.
	glyphsSP = asciigraph.CharSet{
		Horizontal: "━", VerticalLine: "┃", ArcDownRight: "┏", ArcDownLeft: "┓", ArcUpRight: "┗", ArcUpLeft: "┛",
		EndCap: "╸", StartCap: "╺", UpRight: "└", DownHorizontal: "┬",
	}
	glyphsBand = asciigraph.CreateCharSet("┄")
	glyphsPV   = asciigraph.DefaultCharSet
)

// seriesColours lists the colours of the series that share a plot, for TestPalette.
var seriesColours = map[string]asciigraph.AnsiColor{
	"setpoint": colourSP, "band": colourBand, "measurement": colourPV, "model": colourFit,
}
