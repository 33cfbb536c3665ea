package live

import (
	"errors"
	"strings"
	"testing"
	"time"
)

// TestCloseBoundedWhenSourceBlocked: a source whose close never returns (a stuck device)
// does not hold Close beyond CloseWait, and Close says so.
func TestCloseBoundedWhenSourceBlocked(t *testing.T) {
	p := newPipeline("stuck", 0, nil)
	block := make(chan struct{})
	defer close(block)
	p.closeFn = func() error { <-block; return nil }
	start := time.Now()
	err := p.Close()
	took := time.Since(start)
	if !errors.Is(err, ErrStillBlocked) {
		t.Errorf("Close = %v, want ErrStillBlocked", err)
	}
	if took < CloseWait || took > CloseWait+300*time.Millisecond {
		t.Errorf("Close took %s, want about CloseWait (%s)", took, CloseWait)
	}
	if err2 := p.Close(); !errors.Is(err2, ErrStillBlocked) {
		t.Errorf("second Close = %v, want the same error", err2)
	}
}

// TestCloseReturnsSourceError: a source that stops in time returns its own error.
func TestCloseReturnsSourceError(t *testing.T) {
	p := newPipeline("ok", 0, nil)
	want := errors.New("capture write failed")
	p.closeFn = func() error { close(p.closed); return want }
	if err := p.Close(); !errors.Is(err, want) {
		t.Errorf("Close = %v, want %v", err, want)
	}
}

func TestRecordNotes(t *testing.T) {
	marks := []markNote{{at: 1500 * time.Millisecond, note: "fan on\x1b[31m"}, {at: 3 * time.Second, note: "lid open"}}
	got := recordNotes("", 0, marks, nil)
	if len(got) != 3 || got[0] != "2 marks not saved (not recording; live --record FILE keeps them in the capture):" {
		t.Fatalf("notes without recording = %q", got)
	}
	if !strings.Contains(got[1], "1.500 s  fan on") || !strings.Contains(got[2], "3.000 s  lid open") {
		t.Errorf("mark lines = %q", got[1:])
	}
	for _, l := range got {
		for _, r := range l {
			if r < 0x20 {
				t.Errorf("control character in %q", l)
			}
		}
	}
	if got := recordNotes("", 0, nil, nil); got != nil {
		t.Errorf("no marks, no recording: %q, want nothing", got)
	}
	got = recordNotes("bench.cap", 1, marks[:1], nil)
	if len(got) != 1 || !strings.Contains(got[0], "bench.cap: 1 board line, 1 mark") {
		t.Errorf("recording notes = %q", got)
	}
	got = recordNotes("bench.cap", 12, nil, nil)
	if len(got) != 1 || !strings.Contains(got[0], "bench.cap: 12 board lines, 0 marks") {
		t.Errorf("recording notes = %q", got)
	}
}
