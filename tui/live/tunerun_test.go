package live

import (
	"errors"
	"fmt"
	"strings"
	"testing"
	"time"

	"github.com/caploop/caploop/telemetry/wire"
	"github.com/caploop/caploop/tui/live/tune"
)

func TestStartTuneNeedsLink(t *testing.T) {
	p := NewIdle("bench", IdleOptions{Send: func(string) error { return nil }})
	defer p.Close()
	if p.CanTune() {
		t.Error("an idle source says it can tune")
	}
	if _, err := p.StartTune(tune.Options{}); !errors.Is(err, ErrNoTune) {
		t.Errorf("StartTune on an idle source: %v, want ErrNoTune", err)
	}
}

// TestLineWriter: progress writes in pieces come out as whole lines, sanitised.
func TestLineWriter(t *testing.T) {
	var got []string
	w := &lineWriter{emit: func(s string) { got = append(got, s) }}
	fmt.Fprint(w, "step 1 of 11: bef")
	fmt.Fprint(w, "ore\nstep 2 of 11\x1b[2J: x\n")
	fmt.Fprint(w, "tail without newline")
	if len(got) != 2 || got[0] != "step 1 of 11: before" || strings.ContainsRune(got[1], 0x1b) || !strings.HasPrefix(got[1], "step 2 of 11") {
		t.Errorf("lines %q", got)
	}
}

// TestRelayKeepsOrder: batches queued while the run does not read (it waits on the plan)
// come out in order, and the sender is never held up.
func TestRelayKeepsOrder(t *testing.T) {
	in, out, done := make(chan []wire.Line), make(chan []wire.Line), make(chan struct{})
	defer close(done)
	go relay(in, out, done)
	const n = 500
	sent := make(chan struct{})
	go func() {
		for i := 0; i < n; i++ {
			in <- []wire.Line{{Raw: []byte(fmt.Sprint(i))}}
		}
		close(sent)
	}()
	select {
	case <-sent:
	case <-time.After(5 * time.Second):
		t.Fatal("the relay held up the sender")
	}
	for i := 0; i < n; i++ {
		b := <-out
		if string(b[0].Raw) != fmt.Sprint(i) {
			t.Fatalf("batch %d came out as %q", i, b[0].Raw)
		}
	}
}
