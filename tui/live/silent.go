package live

import (
	"fmt"
	"time"

	"github.com/caploop/caploop/telemetry/wire"
)

// SilentAfter is how long a connected port may give no reading before the status line
// says why that may be, instead of "connected" at 0 S/s forever.
const SilentAfter = 4 * time.Second

// silence watches a live port for readings after each (re)connection.
type silence struct {
	cfg     wire.SerialConfig
	since   time.Time // the connection, or the last reading
	samples int64     // engine samples at since
	lines   int64     // link board lines at since
	warned  bool
}

// connected restarts the watch.
func (s *silence) connected(now time.Time, samples, lines int64) {
	*s = silence{cfg: s.cfg, since: now, samples: samples, lines: lines}
}

// check returns the state to show, whether it changed, and the hint for the message
// line: a hint once the port has been connected for SilentAfter without a reading,
// "connected" again once readings come.
func (s *silence) check(now time.Time, state string, samples, lines int64) (string, bool, string) {
	if s.since.IsZero() {
		return state, false, ""
	}
	if samples > s.samples {
		s.since, s.samples, s.lines = now, samples, lines
		if s.warned {
			s.warned = false
			return "connected", true, ""
		}
		return state, false, ""
	}
	if s.warned || now.Sub(s.since) < SilentAfter || state != "connected" {
		return state, false, ""
	}
	s.warned = true
	st, hint := silentHint(s.cfg, now.Sub(s.since), lines-s.lines)
	return st, true, hint
}

// silentHint says, short for the status line and longer for the message line, what to
// check when a connected port gives no reading: with lines that do not read, the baud
// rate or the format; with nothing at all, the firmware, the port and the baud rate (a
// wrong rate can also give no line breaks at all).
func silentHint(cfg wire.SerialConfig, quiet time.Duration, lines int64) (state, hint string) {
	secs := int(quiet.Round(time.Second) / time.Second)
	if lines > 0 {
		return fmt.Sprintf("connected, no reading in %d s", secs),
			fmt.Sprintf("%d lines in %d s but no reading: baud %d wrong (--baud)? not caploop's line format?", lines, secs, cfg.Baud)
	}
	return fmt.Sprintf("connected, silent for %d s", secs),
		fmt.Sprintf("no data in %d s: firmware printing? right port (caploop ports)? baud %d (--baud)?", secs, cfg.Baud)
}

// lineCount returns the board lines the link has received.
func (c *engine) lineCount() int64 {
	if c.linkLines == nil {
		return 0
	}
	return c.linkLines()
}
