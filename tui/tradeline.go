package tui

import (
	"fmt"

	"github.com/caploop/caploop/analysis/figure"
)

// tradeLine says in one line what a deadband change was meant to move and what it
// trades for it, so the before/after table does not read as "it got worse" when the
// figures it gives up move the expected way. A wider band (common practice) holds the
// level without switching while it stays inside: fewer band jumps and less switching,
// paid for by a level that wanders further within the band. A narrower band does the
// reverse.
func tradeLine(c *DeadbandChange) string {
	from := "?"
	if c.From >= 0 {
		from = fmt.Sprintf("%.0f", c.From)
	}
	s := fmt.Sprintf("deadband %s → %.0f: ", from, c.To)
	switch {
	case c.From < 0:
		s += "meant to set the band the advice asked for; trade: a wider band switches less but lets the level wander further, a narrower one the reverse"
	case c.To > c.From:
		s += "meant to cut band jumps and switching; trade: ripple, rms and mean error grow within the band"
	case c.To < c.From:
		s += "meant to cut ripple and mean error (a tighter band); trade: more switching, and band jumps once the band holds less than one charge step plus noise"
	default:
		s += "no change of band"
	}
	return s
}

// soFarLine gives the figures the change was meant to move and the ones it trades,
// before and after: "so far: band jumps 37 → 0, switching 120 Hz → 40 Hz; rms error
// 2 mV → 5 mV". Empty while there is no segment after the change.
func soFarLine(c *DeadbandChange) string {
	if c.Before == nil || c.After == nil {
		return ""
	}
	b, a := c.Before, c.After
	pair := func(x, y *float64, unit string) string {
		return figure.SI(x, unit) + " → " + figure.SI(y, unit)
	}
	meant := fmt.Sprintf("band jumps %d → %d, switching %s", b.BandJumps, a.BandJumps, pair(b.SwitchingHz, a.SwitchingHz, "Hz"))
	traded := "ripple rms " + pair(b.RippleRMSV, a.RippleRMSV, "V") + ", mean error " + pair(absP(b.MeanErrorV), absP(a.MeanErrorV), "V")
	if c.To < c.From {
		meant, traded = traded, meant
	}
	return "so far: " + meant + "; traded: " + traded
}

func absP(p *float64) *float64 {
	if p == nil || *p >= 0 {
		return p
	}
	v := -*p
	return &v
}

// changeHead is the trade line and the figures so far, word-wrapped to the width.
func changeHead(c *DeadbandChange, width int) string {
	lines := []string{tradeLine(c)}
	if s := soFarLine(c); s != "" {
		lines = append(lines, s)
	}
	return wrapLines(lines, width)
}
