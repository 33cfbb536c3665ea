package live

import (
	"strings"
	"testing"
	"time"

	"github.com/caploop/caploop/telemetry/wire"
)

func TestSilenceHint(t *testing.T) {
	t0 := time.Unix(1000, 0)
	s := &silence{cfg: wire.SerialConfig{Baud: 57600}}
	s.connected(t0, 0, 0)
	if st, ch, _ := s.check(t0.Add(SilentAfter-time.Second), "connected", 0, 0); ch || st != "connected" {
		t.Errorf("before SilentAfter: %q %v, want no change", st, ch)
	}
	st, ch, hint := s.check(t0.Add(SilentAfter+100*time.Millisecond), "connected", 0, 0)
	if !ch || st != "connected, silent for 4 s" || !strings.Contains(hint, "baud 57600") || !strings.Contains(hint, "firmware printing") || !strings.Contains(hint, "right port") {
		t.Errorf("silent port: %q %v %q", st, ch, hint)
	}
	if _, ch, _ := s.check(t0.Add(2*SilentAfter), st, 0, 0); ch {
		t.Errorf("the hint is set once, not every tick")
	}
	// Readings arrive: back to "connected".
	if st, ch, _ := s.check(t0.Add(2*SilentAfter+time.Second), st, 5, 5); !ch || st != "connected" {
		t.Errorf("after readings: %q %v, want connected", st, ch)
	}
	// Lines that do not read point at the baud rate or the format.
	s.connected(t0, 5, 5)
	st, ch, hint = s.check(t0.Add(SilentAfter+time.Second), "connected", 5, 905)
	if !ch || st != "connected, no reading in 5 s" || !strings.Contains(hint, "900 lines in 5 s but no reading") || !strings.Contains(hint, "baud 57600 wrong") {
		t.Errorf("garbled port: %q %v %q", st, ch, hint)
	}
	// An unplugged port is not "silent".
	s.connected(t0, 0, 0)
	if st, ch, _ := s.check(t0.Add(time.Minute), "UNPLUGGED, waiting for the board", 0, 0); ch {
		t.Errorf("unplugged: hint %q given", st)
	}
}
