//go:build unix

package wire

import (
	"bufio"
	"errors"
	"io/fs"
	"os"
	"path/filepath"
	"testing"
	"time"

	"github.com/caploop/caploop/telemetry"
)

// TestPTYRawNoEcho checks the slave is raw: bytes the board writes are not echoed back to
// the master, and CR LF passes through untranslated.
func TestPTYRawNoEcho(t *testing.T) {
	p, src := openPTYSerial(t)
	const line = "t=1 sp=2 pv=3\r\n"
	if _, err := p.Master().WriteString("\n" + line); err != nil {
		t.Fatal(err)
	}
	got := make([]byte, 0, len(line))
	buf := make([]byte, 64)
	for len(got) < len(line) {
		n, err := src.Read(buf)
		if err != nil {
			t.Fatalf("read: %v", err)
		}
		got = append(got, buf[:n]...)
	}
	if string(got) != line {
		t.Errorf("slave read %q, want %q", got, line)
	}
	// The first bytes back on the master side must be what the host sends, not an echo.
	if _, err := src.(*SerialSource).Write([]byte("ok\n")); err != nil {
		t.Fatal(err)
	}
	p.Master().SetReadDeadline(time.Now().Add(5 * time.Second))
	back := readLines(t, bufio.NewScanner(p.Master()), 1)
	if back[0] != "ok" {
		t.Errorf("master read %q, want %q (no echo)", back[0], "ok")
	}
}

// TestPTYCloseEndsMasterRead checks that closing the PTY ends a Read blocked on the
// master (the board side's reader goroutine must not hang after an unplug).
func TestPTYCloseEndsMasterRead(t *testing.T) {
	p, err := OpenPTY()
	if err != nil {
		t.Fatalf("OpenPTY: %v", err)
	}
	done := make(chan error, 1)
	go func() {
		_, err := p.Master().Read(make([]byte, 16))
		done <- err
	}()
	time.Sleep(50 * time.Millisecond)
	p.Close()
	select {
	case err := <-done:
		if err == nil {
			t.Error("read after Close: got no error")
		}
	case <-time.After(5 * time.Second):
		t.Fatal("Close did not end the master read")
	}
}

// TestPTYSymlink re-points one link at two pseudo-terminals in turn.
func TestPTYSymlink(t *testing.T) {
	link := filepath.Join(t.TempDir(), "board")
	for i := 0; i < 2; i++ {
		p, err := OpenPTY()
		if err != nil {
			t.Fatalf("OpenPTY: %v", err)
		}
		if err := p.Symlink(link); err != nil {
			t.Fatalf("Symlink: %v", err)
		}
		if got, err := os.Readlink(link); err != nil || got != p.Path() {
			t.Errorf("round %d: link points at %q (%v), want %q", i, got, err, p.Path())
		}
		if err := p.Close(); err != nil {
			t.Errorf("Close: %v", err)
		}
		if err := p.Close(); err != nil {
			t.Errorf("second Close: %v", err)
		}
		// The slave is gone after an unplug; the link dangles.
		if _, err := os.Stat(link); !errors.Is(err, fs.ErrNotExist) {
			t.Errorf("round %d: stat link after Close: %v, want not-exist", i, err)
		}
	}
}

// openPTYSerial opens a pseudo-terminal and the serial source on its slave path; both are
// closed when the test ends (closing the source twice is harmless).
func openPTYSerial(t *testing.T) (*PTY, telemetry.Source) {
	t.Helper()
	p, err := OpenPTY()
	if err != nil {
		t.Fatalf("OpenPTY: %v", err)
	}
	t.Cleanup(func() { p.Close() })
	src, err := OpenSerial(SerialConfig{Path: p.Path()})
	if err != nil {
		t.Fatalf("OpenSerial: %v", err)
	}
	t.Cleanup(func() { src.Close() })
	return p, src
}
