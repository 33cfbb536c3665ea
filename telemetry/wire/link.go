package wire

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"sync"
	"time"

	"github.com/caploop/caploop/telemetry"
)

// Line is one line of a live link: a line the board sent (Dir FromBoard), a command the
// host sent (ToBoard), or a host event (HostEvent) such as "unplugged". Raw is the line
// without its terminator (LF or CRLF), byte for byte as received: it is untrusted, so
// sanitise it before showing it. Host is the time the line was received or sent.
type Line struct {
	Host time.Time
	Dir  telemetry.Direction
	Raw  []byte
}

// EventKind returns the first word of a HostEvent line ("unplugged", "reconnected", ...)
// and "" for other lines.
func (ln Line) EventKind() string {
	if ln.Dir != telemetry.HostEvent {
		return ""
	}
	if i := bytes.IndexByte(ln.Raw, ' '); i >= 0 {
		return string(ln.Raw[:i])
	}
	return string(ln.Raw)
}

// Host events of a Link. An event line's Raw starts with one of these words, followed
// for some of them by a space and details.
const (
	EventConnected   = "connected"   // first open of the port: "connected /dev/ttyACM0 115200 8N1"
	EventReconnected = "reconnected" // the port came back after an unplug
	EventUnplugged   = "unplugged"   // the port went away (unplug, board reset with USB re-enumeration)
	EventPartial     = "partial"     // the partial first line after an open was dropped: "partial 17 bytes"
	EventWaiting     = "waiting"     // the port cannot be opened yet: "waiting <reason>"
)

// LinkOptions tune a Link. The zero value works: no recording, reopen polled every 250 ms.
type LinkOptions struct {
	// Record, when set, receives a capture (see CaptureWriter) of every line: board lines,
	// sent commands and events. It is flushed at least every second, and synced to disk
	// when it has a Sync method (an *os.File does). The Link does not close it.
	Record io.Writer
	// RecordPath, when set (and Record is not), is a file the Link creates (replacing an
	// existing regular file; a symbolic link, a device or a FIFO is refused) for the
	// capture, syncs and closes. When the port never opened, Close removes it: it would
	// hold only a header.
	RecordPath string
	// RecordAttrs are extra key=value pairs for the capture header.
	RecordAttrs []string
	// Poll is how often a port that is not there is tried again; 0 = 250 ms.
	Poll time.Duration
	// FlushEvery is how often the recording is flushed and synced; 0 = 500 ms, at most 1 s.
	FlushEvery time.Duration
	// MaxLine cuts longer lines (the rest up to the newline is discarded and the line is
	// counted in LinkStats.Cut); 0 = 4096 bytes.
	MaxLine int
	// Queue bounds the lines waiting for the consumer of Batches; when the consumer lags
	// further, the oldest waiting lines are dropped from delivery (never from the
	// recording) and counted in LinkStats.Dropped. 0 = 65536.
	Queue int
	// Gather is how long the reader lets bytes build up in the port after two small
	// reads in a row (under a quarter of its buffer each) before it reads again: a
	// board that sends a line per millisecond then costs a read per Gather, not a
	// thousand reads a second (each one a system call and a few wake-ups). The lines of
	// one read share its host time, so host times are as coarse as Gather; a board fast
	// enough to fill the buffer is read without a pause. 0 = 10 ms; negative = none.
	Gather time.Duration
	// FailFirst stops the Link when the very first open fails (Err says why) instead of
	// polling until the port appears.
	FailFirst bool
}

// LinkStats are the counters of a Link.
type LinkStats struct {
	Lines     int64 // board lines received
	Sent      int64 // commands sent
	Partial   int64 // partial first lines dropped after an open
	Cut       int64 // lines longer than MaxLine, cut
	Dropped   int64 // lines not delivered on Batches because the consumer lagged (still recorded)
	Opens     int64 // successful opens of the port
	Unplugs   int64 // times the port went away
	Connected bool  // the port is open now
	LastErr   error // the latest open or read error, nil after a good open
}

// Link keeps a serial port open for a live session: it reads lines in its own goroutine,
// stamps them with the host time, optionally records them, and hands them out in batches.
// When the port goes away (unplug, reset with USB re-enumeration) it emits an "unplugged"
// event, polls the path until it can open it again (a symlink is resolved anew each time)
// and emits "reconnected". After every open the first line is dropped and counted as
// partial (a "partial" event), unless it reads on its own as a whole data or meta line
// (see wholeRecord): a board already running is usually half-way through a line.
//
// The reader goroutine never waits for the consumer of Batches: lines queue (bounded by
// LinkOptions.Queue) and the oldest are dropped from delivery if the consumer falls far
// behind; the recording never drops a line.
type Link struct {
	cfg   SerialConfig
	opt   LinkOptions
	start time.Time

	out        chan []Line
	notify     chan struct{}
	done       chan struct{} // closed by Close
	readerDone chan struct{}
	dispDone   chan struct{}
	flushDone  chan struct{}
	closeOnce  sync.Once

	mu      sync.Mutex // pending, stats, err
	pending []Line
	stats   LinkStats
	err     error

	portMu sync.RWMutex // port; writers hold it shared, closers exclusively
	port   io.ReadWriteCloser

	recMu    sync.Mutex
	rec      *telemetry.CaptureWriter
	recSync  interface{ Sync() error }
	recFile  *os.File
	recDirty bool
	recErr   error
	stuck    bool // the port did not stop within closeWait (set by Close)
}

// Dial starts a Link on cfg.Path and returns at once; the port is opened (and reopened) by
// the Link's goroutine. Stop it with Close.
func Dial(cfg SerialConfig, opt LinkOptions) *Link {
	cfg = cfg.withDefaults()
	if opt.Poll <= 0 {
		opt.Poll = 250 * time.Millisecond
	}
	if opt.FlushEvery <= 0 || opt.FlushEvery > time.Second {
		opt.FlushEvery = 500 * time.Millisecond
	}
	if opt.MaxLine <= 0 {
		opt.MaxLine = 4096
	}
	if opt.Queue <= 0 {
		opt.Queue = 1 << 16
	}
	if opt.Gather == 0 {
		opt.Gather = defaultGather
	}
	l := &Link{
		cfg:        cfg,
		opt:        opt,
		start:      time.Now(),
		out:        make(chan []Line, 8),
		notify:     make(chan struct{}, 1),
		done:       make(chan struct{}),
		readerDone: make(chan struct{}),
		dispDone:   make(chan struct{}),
		flushDone:  make(chan struct{}),
	}
	if err := l.openRecord(); err != nil {
		l.err = err
		close(l.readerDone)
		close(l.flushDone)
		go l.dispatch()
		return l
	}
	go l.run()
	go l.dispatch()
	go l.flusher()
	return l
}

// Path returns the port path the Link opens.
func (l *Link) Path() string { return l.cfg.Path }

// StartedAt returns the time the Link was made; capture times count from it.
func (l *Link) StartedAt() time.Time { return l.start }

// Batches returns the channel of line batches, in order. It is closed after Close, or when
// the Link stops by itself (FailFirst, recording file not creatable; see Err).
func (l *Link) Batches() <-chan []Line { return l.out }

// Stats returns a snapshot of the counters.
func (l *Link) Stats() LinkStats {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.stats
}

// Err returns why the Link stopped by itself, or the first recording error; nil otherwise.
func (l *Link) Err() error {
	l.mu.Lock()
	err := l.err
	l.mu.Unlock()
	if err != nil {
		return err
	}
	l.recMu.Lock()
	defer l.recMu.Unlock()
	return l.recErr
}

// Send writes cmd and a newline to the board (for example "set deadband=14") and records
// it as a ToBoard line. cmd must be one line. Without an open port it returns an error
// wrapping ErrNotConnected.
func (l *Link) Send(cmd string) error {
	if i := bytes.IndexAny([]byte(cmd), "\r\n"); i >= 0 {
		return fmt.Errorf("%w: command %q holds a line break", ErrSerialConfig, cmd)
	}
	l.portMu.RLock()
	defer l.portMu.RUnlock()
	if l.port == nil {
		return &SerialError{Path: l.cfg.Path, Op: "write", Kind: ErrNotConnected}
	}
	// The command is delivered (and recorded) before it is written, so that it always
	// comes before the board's answer, which the reader may see as soon as it is written.
	l.deliver([]Line{{Host: time.Now(), Dir: telemetry.ToBoard, Raw: []byte(cmd)}})
	if _, err := l.port.Write([]byte(cmd + "\n")); err != nil {
		err = readError(l.cfg.Path, "write", err)
		l.deliver([]Line{{Host: time.Now(), Dir: telemetry.HostEvent, Raw: []byte("send failed: " + telemetry.SanitizeN([]byte(err.Error()), 200))}})
		return err
	}
	l.mu.Lock()
	l.stats.Sent++
	l.mu.Unlock()
	return nil
}

// closeWait bounds how long Close waits for the reader to stop before it flushes the
// capture anyway: a stuck device may never return from a read or a write.
const closeWait = 300 * time.Millisecond

// Close stops the Link: it closes the port, flushes, syncs and (for RecordPath) closes the
// recording, and closes Batches. Lines not yet taken from Batches are discarded. It returns
// the first recording error. A port whose read or write does not return within closeWait
// of the close is left behind: the capture is flushed and closed all the same, lines the
// reader might still see are not recorded, and Close returns ErrStuck (wrapped) unless a
// recording error came first. Closing twice is harmless.
func (l *Link) Close() error {
	l.closeOnce.Do(func() {
		close(l.done)
		stopped := make(chan struct{})
		go func() {
			l.portMu.Lock()
			if l.port != nil {
				l.port.Close()
			}
			l.portMu.Unlock()
			<-l.readerDone
			<-l.dispDone
			<-l.flushDone
			close(stopped)
		}()
		t := time.NewTimer(closeWait)
		defer t.Stop()
		select {
		case <-stopped:
		case <-t.C:
			l.stuck = true
		}
		l.flushRecord()
		l.closeRecordFile()
	})
	l.recMu.Lock()
	defer l.recMu.Unlock()
	if l.recErr == nil && l.stuck {
		return &SerialError{Path: l.cfg.Path, Op: "close", Kind: ErrStuck}
	}
	return l.recErr
}

func (l *Link) isDone() bool {
	select {
	case <-l.done:
		return true
	default:
		return false
	}
}

// sleep waits d or until Close; it reports whether the Link is still running.
func (l *Link) sleep(d time.Duration) bool {
	t := time.NewTimer(d)
	defer t.Stop()
	select {
	case <-l.done:
		return false
	case <-t.C:
		return true
	}
}

// run is the reader goroutine: open, read until the port fails, report, poll, reopen.
func (l *Link) run() {
	defer close(l.readerDone)
	buf := make([]byte, 4096)
	first := true
	lastWait := ""
	backoff := l.opt.Poll
	for !l.isDone() {
		p, err := openPort(l.cfg)
		if err != nil {
			l.mu.Lock()
			l.stats.LastErr = err
			if first && l.opt.FailFirst {
				l.err = err
				l.mu.Unlock()
				return
			}
			l.mu.Unlock()
			// After an unplug a missing port is expected (the unplugged event said so);
			// other reasons, and any reason before the first open, are reported once.
			quiet := !first && errors.Is(err, ErrPortNotFound)
			if msg := err.Error(); msg != lastWait && !quiet {
				lastWait = msg
				l.event(EventWaiting + " " + msg)
			}
			if !l.sleep(l.opt.Poll) {
				return
			}
			continue
		}
		lastWait = ""
		l.portMu.Lock()
		if l.isDone() {
			l.portMu.Unlock()
			p.Close()
			return
		}
		l.port = p
		l.portMu.Unlock()
		l.mu.Lock()
		l.stats.Opens++
		l.stats.Connected = true
		l.stats.LastErr = nil
		l.mu.Unlock()
		if first {
			l.event(fmt.Sprintf("%s %s %s", EventConnected, l.cfg.Path, l.cfg))
		} else {
			l.event(EventReconnected)
		}
		first = false

		var got int64
		got, err = l.readLoop(p, buf)

		l.portMu.Lock()
		l.port = nil
		p.Close()
		l.portMu.Unlock()
		l.mu.Lock()
		l.stats.Connected = false
		if l.isDone() {
			l.mu.Unlock()
			return
		}
		l.stats.Unplugs++
		l.stats.LastErr = readError(l.cfg.Path, "read", err)
		l.mu.Unlock()
		l.event(EventUnplugged)
		l.flushRecord() // the capture is complete up to the unplug
		// A port that opens but fails before giving a single byte would otherwise make
		// an unplugged/reconnected pair every poll: back off up to 5 s while that lasts.
		if got == 0 {
			backoff = min(2*backoff, max(5*time.Second, l.opt.Poll))
		} else {
			backoff = l.opt.Poll
		}
		if !l.sleep(backoff) {
			return
		}
	}
}

// defaultGather is LinkOptions.Gather when not set. At the fastest a full-speed USB
// serial device delivers (about 1 MB/s) 10 ms is about 10 KB, well inside what the
// terminal layer buffers (up to 64 KiB; a USB device beyond that is held back, not
// dropped); a 921600-baud UART sends under 1 KB in that time.
const defaultGather = 10 * time.Millisecond

// readLoop reads the open port until it fails, splitting lines and dropping the partial
// first one (see wholeRecord for when the first line is kept). It returns the number of bytes read and the error that ended it.
func (l *Link) readLoop(p io.Reader, buf []byte) (int64, error) {
	var total int64
	dropping := true // before the first newline after open
	skipped := 0     // bytes of the partial first line
	var lastSkipped byte
	var first []byte // the first line's bytes, to tell a whole line from a cut one
	cur := make([]byte, 0, 256)
	cut := false
	var lines []Line
	var gather *time.Timer
	small := false // the previous read was small
	defer func() {
		if gather != nil {
			gather.Stop()
		}
	}()
	for {
		n, err := p.Read(buf)
		now := time.Now()
		total += int64(n)
		data := buf[:n]
		lines = lines[:0]
		for len(data) > 0 {
			i := bytes.IndexByte(data, '\n')
			seg := data
			if i >= 0 {
				seg, data = data[:i], data[i+1:]
			} else {
				data = nil
			}
			if dropping {
				if len(seg) > 0 {
					skipped += len(seg)
					lastSkipped = seg[len(seg)-1]
					if room := l.opt.MaxLine - len(first); room > 0 {
						first = append(first, seg[:min(room, len(seg))]...)
					}
				}
				if i >= 0 {
					dropping = false
					if lastSkipped == '\r' {
						skipped--
					}
					head := bytes.TrimSuffix(first, []byte{'\r'})
					switch {
					case skipped == 0:
					case skipped <= l.opt.MaxLine && wholeRecord(head):
						// The port opened at a line start: the first line is whole.
						lines = append(lines, Line{Host: now, Dir: telemetry.FromBoard, Raw: bytes.Clone(head)})
						l.mu.Lock()
						l.stats.Lines++
						l.mu.Unlock()
					default:
						l.mu.Lock()
						l.stats.Partial++
						l.mu.Unlock()
						lines = append(lines, Line{Host: now, Dir: telemetry.HostEvent,
							Raw: fmt.Appendf(nil, "%s %d bytes", EventPartial, skipped)})
					}
				}
				continue
			}
			if room := l.opt.MaxLine - len(cur); len(seg) > room {
				cur = append(cur, seg[:room]...)
				cut = true
			} else {
				cur = append(cur, seg...)
			}
			if i >= 0 {
				raw := bytes.TrimSuffix(cur, []byte{'\r'})
				lines = append(lines, Line{Host: now, Dir: telemetry.FromBoard, Raw: bytes.Clone(raw)})
				l.mu.Lock()
				l.stats.Lines++
				if cut {
					l.stats.Cut++
				}
				l.mu.Unlock()
				cur, cut = cur[:0], false
			}
		}
		if len(lines) > 0 {
			l.deliver(lines)
		}
		if err != nil {
			return total, err
		}
		if n == 0 && l.isDone() {
			return total, io.EOF
		}
		wasSmall := small
		small = n < len(buf)/4
		if l.opt.Gather > 0 && small && wasSmall {
			// A slow board (two small reads in a row; a fast one gives a short read now
			// and then between full ones): let its next lines gather in the port. The
			// reader waits on a timer, never on the consumer.
			if gather == nil {
				gather = time.NewTimer(l.opt.Gather)
			} else {
				gather.Reset(l.opt.Gather)
			}
			select {
			case <-gather.C:
			case <-l.done:
				return total, io.EOF
			}
		}
	}
}

// event records and delivers a host event line.
func (l *Link) event(text string) {
	l.deliver([]Line{{Host: time.Now(), Dir: telemetry.HostEvent, Raw: []byte(text)}})
}

// deliver records lines and queues them for the consumer without waiting for it. The
// slice is copied, so callers may reuse it.
func (l *Link) deliver(lines []Line) {
	l.record(lines)
	l.mu.Lock()
	l.pending = append(l.pending, lines...)
	if over := len(l.pending) - l.opt.Queue; over > 0 {
		drop := over + l.opt.Queue/4 // drop a chunk, not one line at a time
		if drop > len(l.pending) {
			drop = len(l.pending)
		}
		l.stats.Dropped += int64(drop)
		l.pending = append(l.pending[:0], l.pending[drop:]...)
	}
	l.mu.Unlock()
	select {
	case l.notify <- struct{}{}:
	default:
	}
}

// dispatch moves queued lines to the Batches channel; it is the only goroutine that may
// wait for the consumer.
func (l *Link) dispatch() {
	defer close(l.dispDone)
	defer close(l.out)
	readerDone := l.readerDone
	for {
		select {
		case <-l.notify:
		case <-readerDone:
			// The reader stopped by itself: hand out what is left, then end.
			readerDone = nil
		case <-l.done:
			return
		}
		l.mu.Lock()
		b := l.pending
		l.pending = nil
		l.mu.Unlock()
		if len(b) > 0 {
			select {
			case l.out <- b:
			case <-l.done:
				return
			}
		}
		if readerDone == nil {
			l.mu.Lock()
			left := len(l.pending)
			l.mu.Unlock()
			if left == 0 {
				return
			}
		}
	}
}

// wholeRecord reports whether the first line after an open can be kept: it reads, on its
// own, as a complete data line (sp and pv present) or meta line. A line cut by the open
// loses its start, and a start cut anywhere but at a field separator leaves a fragment
// that does not read ("12 pv=498", "p=512 pv=498", "=1000 sp=..."); a cut exactly at a
// separator leaves whole fields, which are real readings. Numeric rows are never kept
// (their header may not have been seen), nor comments.
func wholeRecord(line []byte) bool {
	if len(line) == 0 {
		return false
	}
	var p telemetry.Parser
	switch p.Parse(line).Kind {
	case telemetry.RecSample, telemetry.RecMeta:
		return true
	}
	return false
}
