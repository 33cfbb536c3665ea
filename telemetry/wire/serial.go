package wire

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"

	"github.com/caploop/caploop/telemetry"
	"go.bug.st/serial"
)

// This is the only file (with ports.go for the port list, and poll_*.go for the reads)
// that imports go.bug.st/serial. Reads use serial.NoTimeout: a Read blocks until bytes
// arrive, and Close (or an unplug, which Linux reports as a hang-up or EIO) ends it. On
// Linux the reads and writes go through the runtime's poller (poll_linux.go).

// Errors of serial ports. A *SerialError wraps one of these (errors.Is works) together with
// the operating system's cause.
var (
	ErrPortNotFound  = errors.New("telemetry: serial port not found")
	ErrPortBusy      = errors.New("telemetry: serial port busy")
	ErrPermission    = errors.New("telemetry: no permission to open serial port")
	ErrNotSerial     = errors.New("telemetry: not a serial port")
	ErrPortSetting   = errors.New("telemetry: serial setting not supported")
	ErrUnplugged     = errors.New("telemetry: serial port unplugged")
	ErrNotConnected  = errors.New("telemetry: serial port not connected")
	ErrStuck         = errors.New("telemetry: serial port stuck")
	ErrSerialConfig  = errors.New("telemetry: bad serial configuration")
	errPortClosedUse = errors.New("telemetry: serial port closed")
)

// SerialConfig says which port to open and how. The zero value of every field but Path
// means the common default, 115200 baud 8N1.
type SerialConfig struct {
	Path     string // device path, e.g. /dev/ttyACM0, or a symlink to one
	Baud     int    // bits per second; 0 = 115200
	DataBits int    // 5, 6, 7 or 8; 0 = 8
	Parity   string // "none", "odd", "even", "mark", "space" (or n, o, e, m, s); "" = none
	StopBits int    // 1 or 2; 0 = 1
}

// DefaultBaud is the baud rate used when SerialConfig.Baud is 0.
const DefaultBaud = 115200

// String returns the settings the way they are usually written: "115200 8N1".
func (c SerialConfig) String() string {
	c = c.withDefaults()
	p := "N"
	if c.Parity != "" {
		p = strings.ToUpper(c.Parity[:1])
	}
	return fmt.Sprintf("%d %d%s%d", c.Baud, c.DataBits, p, c.StopBits)
}

func (c SerialConfig) withDefaults() SerialConfig {
	if c.Baud == 0 {
		c.Baud = DefaultBaud
	}
	if c.DataBits == 0 {
		c.DataBits = 8
	}
	if c.StopBits == 0 {
		c.StopBits = 1
	}
	return c
}

// mode checks the settings and turns them into the serial library's Mode.
func (c SerialConfig) mode() (*serial.Mode, error) {
	c = c.withDefaults()
	if c.Path == "" {
		return nil, fmt.Errorf("%w: no port path given", ErrSerialConfig)
	}
	if c.Baud < 0 {
		return nil, fmt.Errorf("%w: baud %d is negative", ErrSerialConfig, c.Baud)
	}
	if c.DataBits < 5 || c.DataBits > 8 {
		return nil, fmt.Errorf("%w: data bits %d (want 5, 6, 7 or 8)", ErrSerialConfig, c.DataBits)
	}
	m := &serial.Mode{BaudRate: c.Baud, DataBits: c.DataBits}
	switch strings.ToLower(c.Parity) {
	case "", "n", "none":
		m.Parity = serial.NoParity
	case "o", "odd":
		m.Parity = serial.OddParity
	case "e", "even":
		m.Parity = serial.EvenParity
	case "m", "mark":
		m.Parity = serial.MarkParity
	case "s", "space":
		m.Parity = serial.SpaceParity
	default:
		return nil, fmt.Errorf("%w: parity %q (want none, odd, even, mark or space)", ErrSerialConfig, c.Parity)
	}
	switch c.StopBits {
	case 1:
		m.StopBits = serial.OneStopBit
	case 2:
		m.StopBits = serial.TwoStopBits
	default:
		return nil, fmt.Errorf("%w: stop bits %d (want 1 or 2)", ErrSerialConfig, c.StopBits)
	}
	return m, nil
}

// SerialError is an error of a serial port: which port, what was being done, what kind
// of failure (one of the Err* sentinels above) and the operating system's cause. Its
// message says what to do about it. errors.Is finds both the kind and the cause.
type SerialError struct {
	Path string // port path as given
	Op   string // "open" or "read" or "write"
	Kind error  // ErrPortNotFound, ErrPortBusy, ErrPermission, ErrNotSerial, ErrPortSetting, ErrUnplugged
	Err  error  // underlying cause, may be nil
}

// Error explains the failure in words a bench user can act on.
func (e *SerialError) Error() string {
	var msg string
	switch e.Kind {
	case ErrPortNotFound:
		msg = fmt.Sprintf("serial port %s not found: check the cable and the path (caploop ports lists the ports)", e.Path)
	case ErrPortBusy:
		msg = fmt.Sprintf("serial port %s is busy: another program has it open; close that program and retry", e.Path)
	case ErrPermission:
		msg = fmt.Sprintf("no permission to open serial port %s: add your user to the group that owns it, usually dialout (sudo usermod -aG dialout $USER), then log out and in again", e.Path)
	case ErrNotSerial:
		msg = fmt.Sprintf("%s is not a serial port", e.Path)
	case ErrPortSetting:
		msg = fmt.Sprintf("serial port %s does not support the requested setting", e.Path)
	case ErrUnplugged:
		msg = fmt.Sprintf("serial port %s unplugged", e.Path)
	case ErrStuck:
		msg = fmt.Sprintf("serial port %s did not stop within %s of the close (a stuck device or driver); the capture is flushed and closed, later lines are not in it", e.Path, closeWait)
	default:
		msg = fmt.Sprintf("serial port %s: %s failed", e.Path, e.Op)
	}
	if e.Err != nil {
		msg += " (" + e.Err.Error() + ")"
	}
	// A port name (and an OS error quoting it) is outside text: one sanitiser for all.
	return "telemetry: " + telemetry.Sanitize([]byte(msg))
}

// Unwrap returns the kind and the cause, so errors.Is(err, ErrPortBusy) and
// errors.Is(err, fs.ErrNotExist) both work.
func (e *SerialError) Unwrap() []error {
	var errs []error
	if e.Kind != nil {
		errs = append(errs, e.Kind)
	}
	if e.Err != nil {
		errs = append(errs, e.Err)
	}
	return errs
}

// openError maps an error of serial.Open to a *SerialError of the right kind.
func openError(path string, err error) error {
	se := &SerialError{Path: path, Op: "open", Err: err}
	var pe *serial.PortError
	switch {
	case errors.As(err, &pe):
		switch pe.Code() {
		case serial.PortNotFound:
			se.Kind = ErrPortNotFound
		case serial.PortBusy:
			se.Kind = ErrPortBusy
		case serial.PermissionDenied:
			se.Kind = ErrPermission
		case serial.InvalidSerialPort:
			se.Kind = ErrNotSerial
		case serial.InvalidSpeed, serial.InvalidDataBits, serial.InvalidParity, serial.InvalidStopBits:
			se.Kind = ErrPortSetting
		}
	case errors.Is(err, fs.ErrNotExist), errors.Is(err, syscall.ENXIO), errors.Is(err, syscall.ENODEV):
		se.Kind = ErrPortNotFound
	case errors.Is(err, fs.ErrPermission):
		se.Kind = ErrPermission
	case errors.Is(err, syscall.EBUSY):
		se.Kind = ErrPortBusy
	case errors.Is(err, syscall.ENOTTY):
		se.Kind = ErrNotSerial
	}
	return se
}

// readError maps an error of a read or write on an open port. Any failure of a port we
// did not close ourselves means the device went away (Linux reports an unplug as a closed
// port, EIO, ENXIO or ENODEV).
func readError(path, op string, err error) error {
	return &SerialError{Path: path, Op: op, Kind: ErrUnplugged, Err: err}
}

// openPort opens and configures the port, with reads that wait until data arrives.
func openPort(cfg SerialConfig) (serial.Port, error) {
	m, err := cfg.mode()
	if err != nil {
		return nil, err
	}
	p, err := serial.Open(cfg.Path, m)
	if err != nil {
		return nil, openError(cfg.Path, err)
	}
	if err := p.SetReadTimeout(serial.NoTimeout); err != nil {
		p.Close()
		return nil, openError(cfg.Path, err)
	}
	return polled(p), nil
}

// SerialSource is an open serial port read as a telemetry Source; OpenSerial returns one.
//
// Right after the port is opened the board may be half-way through a line (it was
// running, or it just reset). SerialSource follows the first-line rule of Link: the
// bytes up to the first newline are kept only when they read on their own as a whole
// data or meta line (wholeRecord); otherwise they are dropped and counted in Partial. A
// Read after an unplug returns an error wrapping ErrUnplugged; a Read after Close returns
// io.EOF.
type SerialSource struct {
	cfg     SerialConfig
	port    serial.Port
	synced  bool   // the first newline after open has been seen
	skipped int    // bytes of the first line seen so far
	first   []byte // the first line's bytes (up to telemetry.MaxLineLen)
	pending []byte // a whole first line, kept, still to be returned
	partial atomic.Int64
	dropped atomic.Int64
	closed  atomic.Bool
	wmu     sync.Mutex
}

// OpenSerial opens the serial port cfg.Path with cfg's settings. The returned Source is a
// *SerialSource. Errors are *SerialError values that say what to do: port not found, busy
// (another program holds it), no permission (the dialout group hint), not a serial port.
func OpenSerial(cfg SerialConfig) (telemetry.Source, error) {
	p, err := openPort(cfg)
	if err != nil {
		return nil, err
	}
	return &SerialSource{cfg: cfg.withDefaults(), port: p}, nil
}

// Name returns the port path.
func (s *SerialSource) Name() string { return s.cfg.Path }

// Config returns the settings the port was opened with (defaults filled in).
func (s *SerialSource) Config() SerialConfig { return s.cfg }

// Partial returns the number of partial first lines dropped (0 or 1 per open).
func (s *SerialSource) Partial() int64 { return s.partial.Load() }

// DroppedBytes returns the number of bytes dropped with the partial first line, its
// newline included.
func (s *SerialSource) DroppedBytes() int64 { return s.dropped.Load() }

// Read reads bytes from the board, after the first line has been kept or dropped by the
// first-line rule (see SerialSource).
func (s *SerialSource) Read(p []byte) (int, error) {
	if len(s.pending) > 0 {
		n := copy(p, s.pending)
		s.pending = s.pending[n:]
		return n, nil
	}
	for {
		n, err := s.port.Read(p)
		if n > 0 && !s.synced {
			i := bytes.IndexByte(p[:n], '\n')
			seg := p[:n]
			if i >= 0 {
				seg = p[:i]
			}
			s.skipped += len(seg)
			if room := telemetry.MaxLineLen - len(s.first); room > 0 {
				s.first = append(s.first, seg[:min(room, len(seg))]...)
			}
			if i < 0 {
				s.dropped.Add(int64(n))
				n = 0
			} else {
				s.synced = true
				head := bytes.TrimSuffix(s.first, []byte{'\r'})
				rest := p[i+1 : n]
				switch {
				case len(head) == 0:
					// "\n" or "\r\n" alone: nothing lost.
					s.dropped.Add(int64(i + 1))
				case s.skipped <= telemetry.MaxLineLen && wholeRecord(head):
					// The port opened at a line start: the first line is whole.
					s.pending = append(append(append([]byte(nil), head...), '\n'), rest...)
				default:
					s.dropped.Add(int64(i + 1))
					s.partial.Add(1)
				}
				s.first = nil
				n = copy(p, rest)
				if len(s.pending) > 0 {
					n = copy(p, s.pending)
					s.pending = s.pending[n:]
				}
			}
		}
		if err != nil {
			if s.closed.Load() {
				return n, io.EOF
			}
			return n, readError(s.cfg.Path, "read", err)
		}
		if n > 0 {
			return n, nil
		}
		if s.closed.Load() {
			return 0, io.EOF
		}
	}
}

// Write sends bytes to the board (commands such as "set deadband=14\n").
func (s *SerialSource) Write(p []byte) (int, error) {
	if s.closed.Load() {
		return 0, &SerialError{Path: s.cfg.Path, Op: "write", Err: errPortClosedUse}
	}
	s.wmu.Lock()
	defer s.wmu.Unlock()
	n, err := s.port.Write(p)
	if err != nil {
		return n, readError(s.cfg.Path, "write", err)
	}
	return n, nil
}

// Close closes the port; a Read blocked in another goroutine returns io.EOF.
func (s *SerialSource) Close() error {
	if s.closed.Swap(true) {
		return nil
	}
	return s.port.Close()
}
