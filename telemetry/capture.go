package telemetry

import (
	"bufio"
	"bytes"
	"fmt"
	"io"
	"strconv"
	"strings"
	"time"
)

// CaptureMagic starts the first line of a capture file, followed by the format version.
//
// A capture is plain text. Its first line is
//
//	#caploop-capture v1 start=2026-12-01T23:40:00.123456Z source=/dev/ttyACM0
//
// and every later line is one record
//
//	<seconds since start, 6 decimals> <direction> <raw line>
//
// where direction is '<' for a line the board sent, '>' for a line the host sent to the
// board (set deadband=14), and '!' for a host event (mark, unplug, replug, reset, note).
// The raw line is kept byte for byte without its line terminator, so a later parser can
// read it again; nothing in it is escaped or interpreted when writing.
const CaptureMagic = "#caploop-capture"

// CaptureVersion is the capture format version this package writes.
const CaptureVersion = 1

// Direction says who produced a captured line.
type Direction byte

// Directions of captured lines.
const (
	FromBoard Direction = '<'
	ToBoard   Direction = '>'
	HostEvent Direction = '!'
)

// CaptureWriter writes a capture file. It buffers; call Flush at least every second and
// before exit (caploop record does so, and on SIGINT, SIGTERM and unplug).
type CaptureWriter struct {
	w   *bufio.Writer
	buf []byte
}

// NewCaptureWriter writes the header line to w and returns a writer for records. attrs are
// extra key=value pairs for the header (source=..., baud=...); values must not hold spaces.
func NewCaptureWriter(w io.Writer, start time.Time, attrs ...string) (*CaptureWriter, error) {
	c := &CaptureWriter{w: bufio.NewWriterSize(w, 64<<10)}
	var b strings.Builder
	fmt.Fprintf(&b, "%s v%d start=%s", CaptureMagic, CaptureVersion, start.UTC().Format("2006-01-02T15:04:05.000000Z"))
	for _, a := range attrs {
		b.WriteByte(' ')
		b.WriteString(strings.Map(func(r rune) rune {
			if r <= ' ' || r == 0x7f {
				return '_'
			}
			return r
		}, a))
	}
	b.WriteByte('\n')
	if _, err := c.w.WriteString(b.String()); err != nil {
		return nil, err
	}
	return c, nil
}

// Write appends one record: at is the host time since start, raw the line without its
// terminator. A newline inside raw would break the format, so raw is cut at the first one.
func (c *CaptureWriter) Write(at time.Duration, dir Direction, raw []byte) error {
	if i := bytes.IndexByte(raw, '\n'); i >= 0 {
		raw = raw[:i]
	}
	raw = bytes.TrimSuffix(raw, []byte{'\r'})
	b := c.buf[:0]
	if at < 0 {
		at = 0
	}
	b = strconv.AppendInt(b, int64(at/time.Second), 10)
	b = append(b, '.')
	us := int64(at%time.Second) / int64(time.Microsecond)
	frac := strconv.AppendInt(nil, us+1000000, 10) // 1xxxxxx: keeps the leading zeros
	b = append(b, frac[1:]...)
	b = append(b, ' ', byte(dir), ' ')
	b = append(b, raw...)
	b = append(b, '\n')
	c.buf = b
	_, err := c.w.Write(b)
	return err
}

// Flush writes buffered records to the underlying writer.
func (c *CaptureWriter) Flush() error { return c.w.Flush() }
