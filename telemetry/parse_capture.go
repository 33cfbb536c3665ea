package telemetry

import (
	"bytes"
	"strconv"
	"strings"
	"time"
)

// parseCaptureHeader reads "#caploop-capture v1 start=... source=...". A header of
// another version is refused, and with it the rest of the input.
func (p *Parser) parseCaptureHeader(line []byte) RecordKind {
	rest := string(line[len(CaptureMagic):])
	fields := strings.Fields(rest)
	want := "v" + strconv.Itoa(CaptureVersion)
	if len(fields) == 0 || fields[0] != want || (rest[0] != ' ' && rest[0] != '\t') {
		msg := "telemetry: capture header names no format version; this caploop reads " + want
		if len(fields) > 0 {
			v := fields[0]
			if rest[0] != ' ' && rest[0] != '\t' {
				v = CaptureMagic + v
			}
			msg = "telemetry: capture format \"" + SanitizeN([]byte(v), 24) + "\" is not one this caploop reads (" + want + ")"
		}
		p.refused = &detailError{sentinel: ErrCaptureVersion, msg: msg}
		return p.reject(p.refused, "", line)
	}
	p.capture = true
	p.stats.Headers++
	for _, f := range fields[1:] {
		if v, ok := strings.CutPrefix(f, "start="); ok {
			if t, err := time.Parse(time.RFC3339Nano, v); err == nil {
				p.captureStart = t
			}
		}
	}
	return RecNone
}

// capturePrefix reads the "<seconds>.<fraction> <dir>" that starts a capture record and
// returns the host time in ns, the direction and the index after them (at the space
// before the raw line, or at the end).
func capturePrefix(line []byte) (host int64, dir Direction, end int, ok bool) {
	n := len(line)
	sec, i := digits(line, 0)
	if i == 0 || i > 9 || i >= n || line[i] != '.' { // 9 digits: 31 years, and no int64 overflow
		return 0, 0, 0, false
	}
	frac, j := digits8(line, i+1)
	nf := j - i - 1
	if nf == 0 || nf > 9 || j+1 >= n || line[j] != ' ' {
		return 0, 0, 0, false
	}
	return int64(sec)*1e9 + int64(frac)*int64(pow10u[9-nf]), Direction(line[j+1]), j + 2, true
}

var pow10u = [...]uint64{1, 10, 100, 1000, 10000, 100000, 1000000, 10000000, 100000000, 1000000000}

// parseCapture reads "<seconds>.<fraction> <dir> <raw>".
func (p *Parser) parseCapture(line []byte) RecordKind {
	if len(line) == 0 {
		p.stats.Blank++
		return RecNone
	}
	host, dir, i, ok := capturePrefix(line)
	n := len(line)
	if !ok || (i < n && line[i] != ' ') {
		return p.reject(ErrBadCapture, "", line)
	}
	raw := line[min(i+1, n):]
	if len(raw) > MaxLineLen {
		return p.reject(ErrTooLong, "", raw[:MaxLineLen])
	}
	switch dir {
	case FromBoard:
		return p.parseBoard(raw, host, true)
	case ToBoard, HostEvent:
		p.event = Event{Host: host, Dir: dir, Text: Sanitize(raw), Line: p.line}
		if dir == HostEvent && clockBreak(raw) {
			p.ResetClock()
		}
		p.stats.Events++
		return RecEvent
	}
	return p.reject(ErrBadCapture, "", line)
}

// clockBreak reports whether a host event says the board may have restarted.
func clockBreak(text []byte) bool {
	for _, w := range [...]string{"unplug", "replug", "connected", "reset", "reopen"} {
		if bytes.Contains(text, []byte(w)) {
			return true
		}
	}
	return false
}
