package wire

import (
	"errors"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// TestLinkCloseStuckWrite: a board that never reads makes the host's writes block once
// the terminal's buffer is full (flow control), and a blocked write does not return when
// the port is closed. Close still returns within closeWait (and a little), says the port
// was stuck, and leaves a complete capture with the lines received before.
func TestLinkCloseStuckWrite(t *testing.T) {
	p, err := OpenPTY()
	if err != nil {
		t.Skipf("no pseudo-terminal: %v", err)
	}
	path := filepath.Join(t.TempDir(), "stuck.cap")
	l := Dial(SerialConfig{Path: p.Path()}, LinkOptions{RecordPath: path})
	w := watch(l)
	w.waitFor(t, "connected", func(ls []Line) bool { return countEvents(ls, EventConnected) == 1 })
	go io.WriteString(p.Master(), "\n"+dataLine(1)+"\n"+dataLine(2)+"\n")
	w.waitFor(t, "two lines", func(ls []Line) bool { return len(boardLines(ls)) == 2 })

	// Send until a write blocks: nobody reads the master side.
	blocked := make(chan struct{})
	go func() {
		cmd := "set note=" + strings.Repeat("x", 1000)
		for {
			done := make(chan struct{})
			go func() { l.Send(cmd); close(done) }()
			select {
			case <-done:
				continue
			case <-time.After(300 * time.Millisecond):
				close(blocked)
				return
			}
		}
	}()
	select {
	case <-blocked:
	case <-time.After(10 * time.Second):
		t.Fatal("the writes never blocked")
	}
	start := time.Now()
	err = l.Close()
	took := time.Since(start)
	p.Close() // lets the blocked write return, after the check
	if !errors.Is(err, ErrStuck) {
		t.Errorf("Close = %v, want ErrStuck", err)
	}
	if took > closeWait+200*time.Millisecond {
		t.Errorf("Close took %s, want at most closeWait (%s) and a little", took, closeWait)
	}
	data, rerr := os.ReadFile(path)
	if rerr != nil {
		t.Fatal(rerr)
	}
	if n := strings.Count(string(data), " t="); n != 2 || !strings.HasSuffix(string(data), "\n") {
		t.Errorf("capture after a stuck close: %d data lines (want 2), ends with a newline %v", n, strings.HasSuffix(string(data), "\n"))
	}
}
