package live

import (
	"strings"

	"github.com/caploop/caploop/telemetry"
)

// metaChanges returns, for a meta line mid-stream, the settings it changed besides the
// deadband (which has its own event): "period_us 1000→500", "mode two-state→three-state".
// The first report of a field and a repeat of its value are no change.
func metaChanges(old, m telemetry.Meta) []string {
	var out []string
	num := func(f telemetry.MetaField, name string, a, b, scale float64) {
		if m.Has(f) && old.Has(f) && a != b {
			out = append(out, name+" "+ftoa(a*scale)+"→"+ftoa(b*scale))
		}
	}
	num(telemetry.FieldPeriod, "period_us", old.Period, m.Period, 1e6)
	num(telemetry.FieldSupply, "supply", old.Supply, m.Supply, 1)
	num(telemetry.FieldR, "r", old.R, m.R, 1)
	num(telemetry.FieldC, "c", old.C, m.C, 1)
	num(telemetry.FieldLoad, "load", old.Load, m.Load, 1)
	if m.Has(telemetry.FieldMode) && old.Has(telemetry.FieldMode) && old.Mode != m.Mode {
		out = append(out, "mode "+old.Mode.String()+"→"+m.Mode.String())
	}
	return out
}

// metaEvent records the settings a meta line changed mid-stream as one EventMeta,
// with the start of the running segment (segments that start later ran under them).
func (c *engine) metaEvent(old, m telemetry.Meta) {
	ch := metaChanges(old, m)
	if len(ch) == 0 || c.samples == 0 {
		return
	}
	ev := Event{T: c.lastT, Kind: EventMeta, Text: strings.Join(ch, ", ")}
	if sum := c.acc.Summary(); len(sum.Segments) > 0 {
		ev.SegStartS = sum.Segments[len(sum.Segments)-1].StartS
	}
	c.evs = append(c.evs, ev)
}
