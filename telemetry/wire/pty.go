//go:build unix

package wire

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"sync"

	"github.com/creack/pty"
	"golang.org/x/sys/unix"
	"golang.org/x/term"
)

// PTY is a pseudo-terminal pair that stands in for a board's serial port: the board side
// (a test, or the virtual board) reads and writes Master, and caploop opens Path, the
// slave device (/dev/pts/N), exactly like a real port, through OpenSerial or Dial.
//
// The slave is put in raw mode (no echo, no line editing, no CR/LF translation) and kept
// open by the PTY itself, so the master side neither sees its own lines echoed back nor
// gets EIO while no program has the port open; lines written then wait in the terminal's
// input queue (a few KiB; a full queue blocks the writer).
//
// Closing the PTY is an unplug: readers of the slave get an error, and the slave path
// disappears. A new PTY gets a new path; use Symlink to keep one stable path that is
// re-pointed on re-plug (a reader that reopens the symlink follows it).
type PTY struct {
	master *os.File
	slave  *os.File
	path   string

	mu     sync.Mutex
	closed bool
}

// OpenPTY opens a new pseudo-terminal pair with the slave in raw mode.
func OpenPTY() (*PTY, error) {
	m, s, err := pty.Open()
	if err != nil {
		return nil, fmt.Errorf("telemetry: open pseudo-terminal: %w", err)
	}
	if _, err := term.MakeRaw(int(s.Fd())); err != nil {
		m.Close()
		s.Close()
		return nil, fmt.Errorf("telemetry: raw mode on %s: %w", s.Name(), err)
	}
	// pty.Open used the master's Fd, which leaves it in blocking mode: no deadlines, and a
	// Read in progress would not end on Close. A non-blocking duplicate goes through the
	// runtime's poller instead.
	m2, err := pollable(m)
	if err != nil {
		m.Close()
		s.Close()
		return nil, fmt.Errorf("telemetry: pseudo-terminal master: %w", err)
	}
	return &PTY{master: m2, slave: s, path: s.Name()}, nil
}

// pollable returns a non-blocking duplicate of f that supports deadlines, and closes f.
func pollable(f *os.File) (*os.File, error) {
	fd, err := unix.Dup(int(f.Fd()))
	if err != nil {
		return nil, err
	}
	f.Close()
	if err := unix.SetNonblock(fd, true); err != nil {
		unix.Close(fd)
		return nil, err
	}
	unix.CloseOnExec(fd)
	return os.NewFile(uintptr(fd), "/dev/ptmx"), nil
}

// Path returns the slave device path, the "port" caploop opens.
func (p *PTY) Path() string { return p.path }

// Master returns the board side of the pair: write telemetry lines to it, read the
// commands the host sends from it. It supports deadlines, and Close ends a Read or Write
// blocked on it.
func (p *PTY) Master() *os.File { return p.master }

// Symlink makes link a symbolic link to the slave path, replacing any existing link
// atomically (a new link is made beside it and renamed over it). Re-pointing one link at
// each new PTY gives a port path that survives unplug and re-plug.
func (p *PTY) Symlink(link string) error {
	tmp := filepath.Join(filepath.Dir(link), "."+filepath.Base(link)+".new")
	_ = os.Remove(tmp)
	if err := os.Symlink(p.path, tmp); err != nil {
		return fmt.Errorf("telemetry: symlink %s: %w", link, err)
	}
	if err := os.Rename(tmp, link); err != nil {
		_ = os.Remove(tmp)
		return fmt.Errorf("telemetry: symlink %s: %w", link, err)
	}
	return nil
}

// Close closes both sides. For programs that have the slave open this is an unplug.
// Closing twice is harmless.
func (p *PTY) Close() error {
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.closed {
		return nil
	}
	p.closed = true
	return errors.Join(p.master.Close(), p.slave.Close())
}
