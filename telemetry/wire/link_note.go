package wire

import "strings"

// Annotate records a host event line (for example "mark fan switched on") in the capture
// and delivers it on Batches like the Link's own events. Line breaks in text become
// spaces, so the record stays one line.
func (l *Link) Annotate(text string) {
	l.event(strings.NewReplacer("\r", " ", "\n", " ").Replace(text))
}
