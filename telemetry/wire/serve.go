//go:build unix

package wire

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"sync"
	"sync/atomic"
	"syscall"
	"time"

	"github.com/creack/pty"
	"golang.org/x/sys/unix"
	"golang.org/x/term"
)

// Serve runs the board in real time on a pseudo-terminal, as if it were on USB: any
// serial program can open the device path, read the board's lines and write `set` lines
// to it. Serve returns when ctx ends (with nil) or when the scenario's Samples or
// Duration limit is reached; it removes the link on the way out. A scenario unplug
// closes the pseudo-terminal (readers see the port vanish) and removes the link; the
// re-plug opens a new pseudo-terminal behind the same link and the board boots again.
//
// While no program has the device open, the board's output is dropped, as a USB serial
// device's would be; a program that opens it reads fresh lines, not stale ones. While a
// program has it open, the board waits for it to read, as a board on a serial link with
// flow control waits for its transmit buffer to drain (the default of a pseudo-terminal
// and of most USB serial devices); ServeOptions.DropWhenFull drops instead, as a bridge
// without flow control does. Either way Serve returns promptly when ctx ends, even when
// the reader is slower than the board, and removes the link and its temporary folder.
func Serve(ctx context.Context, b Device, opt ServeOptions) error {
	link := opt.Link
	tmpDir := ""
	if link == "" {
		d, err := os.MkdirTemp("", "caploop-sim-")
		if err != nil {
			return fmt.Errorf("wire: %w", err)
		}
		tmpDir = d
		link = filepath.Join(d, "tty")
	} else if abs, err := filepath.Abs(link); err == nil {
		link = abs
	}
	if fi, err := os.Lstat(link); err == nil && fi.Mode()&os.ModeSymlink == 0 {
		return fmt.Errorf("wire: %s exists and is not a symbolic link; choose another --link", link)
	}
	s := &ptyServer{board: b, link: link, ctx: ctx, drop: opt.DropWhenFull}
	defer func() {
		if s.conn != nil {
			os.Remove(s.link)
			if ctx.Err() != nil {
				s.conn.close() // a signal: go now, without waiting for a slow reader
			} else {
				s.conn.finish()
			}
			s.conn = nil
		}
		if tmpDir != "" {
			os.RemoveAll(tmpDir)
		}
	}()
	if err := s.Replug(); err != nil {
		return err
	}
	if opt.Ready != nil {
		opt.Ready(link)
	}
	if opt.WaitOpen {
		t := time.NewTicker(2 * time.Millisecond)
		for s.conn.hungUp() {
			select {
			case <-ctx.Done():
				t.Stop()
				return nil
			case <-t.C:
			}
		}
		t.Stop()
		// Let the program finish setting the port up before the first byte.
		time.Sleep(20 * time.Millisecond)
	}
	err := b.Run(ctx, s, true)
	if errors.Is(err, context.Canceled) || errors.Is(err, context.DeadlineExceeded) {
		return nil
	}
	return err
}

// ptyServer is the io.Writer (and plugger) that Run writes to while serving.
type ptyServer struct {
	board   Device
	link    string
	conn    *ptyConn // nil while unplugged
	ctx     context.Context
	drop    bool // drop output the reader does not take in time, instead of waiting
	dropped atomic.Int64
}

// Dropped returns the bytes dropped because no program had the device open or it did
// not read fast enough.
func (s *ptyServer) Dropped() int64 { return s.dropped.Load() }

func (s *ptyServer) Write(p []byte) (int, error) {
	return queue(s.ctx, s.conn, p, s.drop, &s.dropped)
}

// queue hands p to the writer of c: it waits while the queue is full (flow control),
// or drops p when drop is set; it drops p while unplugged (c nil), and returns ctx's
// error once ctx has ended, so that a board that is behind stops at once.
func queue(ctx context.Context, c *ptyConn, p []byte, drop bool, dropped *atomic.Int64) (int, error) {
	if err := ctx.Err(); err != nil {
		return 0, err
	}
	if c == nil {
		dropped.Add(int64(len(p)))
		return len(p), nil
	}
	chunk := append([]byte(nil), p...)
	if drop {
		select {
		case c.out <- chunk:
		default:
			dropped.Add(int64(len(p)))
		}
		return len(p), nil
	}
	select {
	case c.out <- chunk:
		return len(p), nil
	case <-ctx.Done():
		return 0, ctx.Err()
	}
}

// Unplug closes the pseudo-terminal and removes the link.
func (s *ptyServer) Unplug() {
	if s.conn == nil {
		return
	}
	os.Remove(s.link)
	s.conn.close()
	s.conn = nil
}

// Replug opens a new pseudo-terminal and points the link at it.
func (s *ptyServer) Replug() error {
	s.Unplug()
	c, err := openConn(s.board, &s.dropped, s.drop)
	if err != nil {
		return err
	}
	tmp := s.link + ".new"
	os.Remove(tmp)
	if err := os.Symlink(c.path, tmp); err != nil {
		c.close()
		return fmt.Errorf("wire: %w", err)
	}
	if err := os.Rename(tmp, s.link); err != nil {
		os.Remove(tmp)
		c.close()
		return fmt.Errorf("wire: %w", err)
	}
	s.conn = c
	return nil
}

// ptyConn is one pseudo-terminal: the master side, a writer goroutine that copies the
// board's output to it and a reader goroutine that hands host lines to the board.
type ptyConn struct {
	master *os.File
	path   string // slave device
	out    chan []byte
	wdone  chan struct{} // closed when the writer has finished
	wg     sync.WaitGroup
	once   sync.Once
}

// openConn opens a pseudo-terminal in raw mode (no echo, no line editing, no signals)
// and starts serving it.
func openConn(b Device, dropped *atomic.Int64, drop bool) (*ptyConn, error) {
	m, sl, err := pty.Open()
	if err != nil {
		return nil, fmt.Errorf("wire: open pseudo-terminal: %w", err)
	}
	defer sl.Close()
	defer m.Close()
	if _, err := term.MakeRaw(int(sl.Fd())); err != nil {
		return nil, fmt.Errorf("wire: raw mode: %w", err)
	}
	return newConn(m, sl.Name(), b, dropped, drop)
}

// newConn serves the master side m of a pseudo-terminal whose slave is path. It works on
// a non-blocking duplicate of m: creack/pty leaves the master in blocking mode, where
// Close does not interrupt a Read or a Write; the duplicate goes through the runtime
// poller instead. The caller keeps (and closes) m.
func newConn(m *os.File, path string, b Device, dropped *atomic.Int64, drop bool) (*ptyConn, error) {
	fd, err := unix.Dup(int(m.Fd()))
	if err != nil {
		return nil, fmt.Errorf("wire: %w", err)
	}
	unix.CloseOnExec(fd)
	if err := unix.SetNonblock(fd, true); err != nil {
		unix.Close(fd)
		return nil, fmt.Errorf("wire: %w", err)
	}
	// Dropping needs room to absorb bursts; waiting needs little beyond the terminal's
	// own buffer, so that the board feels the reader as a real link makes it.
	depth := 4
	if drop {
		depth = 256
	}
	c := &ptyConn{master: os.NewFile(uintptr(fd), "/dev/ptmx"), path: path, out: make(chan []byte, depth), wdone: make(chan struct{})}
	c.wg.Add(2)
	go c.writer(dropped)
	go c.reader(b)
	return c, nil
}

// close closes the pseudo-terminal at once, dropping output not yet written: an unplug.
func (c *ptyConn) close() {
	c.once.Do(func() {
		c.master.Close()
		close(c.out)
		c.wg.Wait()
	})
}

// finish writes the output still queued (for at most a second, if a program is reading)
// and then closes the pseudo-terminal: the end of a run.
func (c *ptyConn) finish() {
	c.once.Do(func() {
		close(c.out)
		select {
		case <-c.wdone:
		case <-time.After(time.Second):
		}
		// Give the reader a moment to take the last bytes before the hang-up.
		time.Sleep(50 * time.Millisecond)
		c.master.Close()
		c.wg.Wait()
	})
}

// hungUp reports whether no program has the slave side open.
func (c *ptyConn) hungUp() bool {
	rc, err := c.master.SyscallConn()
	if err != nil {
		return true
	}
	var hup bool
	rc.Control(func(fd uintptr) {
		p := []unix.PollFd{{Fd: int32(fd), Events: unix.POLLOUT}}
		if _, err := unix.Poll(p, 0); err == nil {
			hup = p[0].Revents&unix.POLLHUP != 0
		}
	})
	return hup
}

func (c *ptyConn) writer(dropped *atomic.Int64) {
	defer c.wg.Done()
	defer close(c.wdone)
	broken := false
	for chunk := range c.out {
		if broken || c.hungUp() {
			dropped.Add(int64(len(chunk)))
			continue
		}
		if _, err := c.master.Write(chunk); err != nil {
			if errors.Is(err, os.ErrClosed) {
				broken = true
			}
			dropped.Add(int64(len(chunk)))
		}
	}
}

// reader hands every line the host writes to the board. Lines longer than 512 bytes are
// cut. While no program has the device open the master reads EIO; it waits and retries.
func (c *ptyConn) reader(b Device) {
	defer c.wg.Done()
	buf := make([]byte, 1024)
	var line []byte
	for {
		n, err := c.master.Read(buf)
		for _, ch := range buf[:n] {
			if ch == '\n' {
				b.Send(string(line))
				line = line[:0]
			} else if len(line) < 512 {
				line = append(line, ch)
			}
		}
		if err == nil {
			continue
		}
		if errors.Is(err, syscall.EIO) || errors.Is(err, io.EOF) {
			time.Sleep(20 * time.Millisecond)
			continue
		}
		return // closed
	}
}

// ServePTY runs the board in real time on a pseudo-terminal the caller opened with
// OpenPTY (the caller tells its users p.Path()). Host lines written to the
// slave side are read from the master and answered. Output is dropped while no program
// has the terminal open; while one has, the board waits for it to read (flow control). A scenario unplug closes p
// and ServePTY returns nil, since a re-plug needs a new pseudo-terminal (Serve does
// that). ServePTY also returns nil when ctx ends, and closes p either way.
func ServePTY(ctx context.Context, b Device, p *PTY) error {
	defer p.Close()
	w := &fixedPTY{p: p}
	c, err := newConn(p.Master(), p.Path(), b, &w.dropped, false)
	if err != nil {
		return err
	}
	w.conn = c
	defer w.Unplug()
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	w.cancel = cancel
	w.ctx = ctx
	err = b.Run(ctx, w, true)
	if errors.Is(err, context.Canceled) || errors.Is(err, context.DeadlineExceeded) {
		return nil
	}
	return err
}

// fixedPTY is the writer of ServePTY: the caller's pseudo-terminal, which can be
// unplugged but not plugged in again.
type fixedPTY struct {
	p       *PTY
	conn    *ptyConn // nil once unplugged
	ctx     context.Context
	cancel  context.CancelFunc
	dropped atomic.Int64
}

func (w *fixedPTY) Write(b []byte) (int, error) {
	if w.conn == nil {
		return len(b), nil
	}
	return queue(w.ctx, w.conn, b, false, &w.dropped)
}

func (w *fixedPTY) Unplug() {
	if w.conn != nil {
		w.conn.close()
		w.conn = nil
		w.p.Close()
		w.cancel()
	}
}

func (w *fixedPTY) Replug() error { return nil }
