package wire

import "strings"

// Annotate records a host event line (for example "mark fan switched on") in the capture
// and delivers it on Batches like the Link's own events. Line breaks in text become
// spaces, so the record stays one line.
func (l *Link) Annotate(text string) {
	l.event(strings.NewReplacer("\r", " ", "\n", " ").Replace(text))
}

// Config returns the port settings the Link uses, defaults filled in.
func (l *Link) Config() SerialConfig { return l.cfg }
