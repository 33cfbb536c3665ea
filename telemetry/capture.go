package telemetry

import (
	"bytes"
	"errors"
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

// CaptureWriter writes a capture file, whole records only. It buffers; call Flush at
// least every second and before exit (caploop record does so, and on SIGINT, SIGTERM and
// unplug). When a write fails part-way (a full disk), the file is cut back to the end of
// the last whole record, when the writer can be truncated (an *os.File can), and every
// later call returns the same *CaptureCutError.
type CaptureWriter struct {
	w       io.Writer
	pending []byte // whole records not yet written
	scratch []byte
	queued  int64 // records in pending
	written int64 // bytes of whole records that reached w
	records int64 // records that reached w (the header counts as one)
	err     error
}

// captureBuffer is how much the writer holds before it writes on its own.
const captureBuffer = 64 << 10

// CaptureCutError says that a capture stopped at a failed write, and where it ends.
type CaptureCutError struct {
	Bytes   int64 // the capture's length: whole records only when Cut is true
	Records int64 // whole records in it, the header included
	Cut     bool  // a partial record was cut off (false: it could not be, see TruncErr)
	Err     error // the write error (ENOSPC on a full disk)
	// TruncErr is why a partial record could not be cut off, when it could not.
	TruncErr error
}

func (e *CaptureCutError) Error() string {
	switch {
	case e.Cut:
		return fmt.Sprintf("capture write failed (%v); the capture was cut back to its last whole record (%d records, %d bytes) and recording stopped", e.Err, e.Records, e.Bytes)
	case e.TruncErr != nil:
		return fmt.Sprintf("capture write failed (%v); its last record is partial and could not be cut off (%v); recording stopped", e.Err, e.TruncErr)
	default:
		return fmt.Sprintf("capture write failed (%v); the capture holds %d whole records (%d bytes) and recording stopped", e.Err, e.Records, e.Bytes)
	}
}

func (e *CaptureCutError) Unwrap() error { return e.Err }

// NewCaptureWriter writes the header line to w and returns a writer for records. attrs are
// extra key=value pairs for the header (source=..., baud=...); values must not hold spaces.
func NewCaptureWriter(w io.Writer, start time.Time, attrs ...string) (*CaptureWriter, error) {
	c := &CaptureWriter{w: w}
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
	c.pending = append(c.pending, b.String()...)
	c.queued++
	return c, nil
}

// Write appends one record: at is the host time since start, raw the line without its
// terminator. A newline inside raw would break the format, so raw is cut at the first one.
func (c *CaptureWriter) Write(at time.Duration, dir Direction, raw []byte) error {
	if c.err != nil {
		return c.err
	}
	if i := bytes.IndexByte(raw, '\n'); i >= 0 {
		raw = raw[:i]
	}
	raw = bytes.TrimSuffix(raw, []byte{'\r'})
	b := c.scratch[:0]
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
	c.scratch = b
	c.pending = append(c.pending, b...)
	c.queued++
	if len(c.pending) >= captureBuffer {
		return c.Flush()
	}
	return nil
}

// Flush writes the buffered records to the underlying writer. On a failed write it cuts
// the capture back to its last whole record (see CaptureWriter) and returns a
// *CaptureCutError.
func (c *CaptureWriter) Flush() error {
	if c.err != nil {
		return c.err
	}
	if len(c.pending) == 0 {
		return nil
	}
	n, err := c.w.Write(c.pending)
	if err == nil && n < len(c.pending) {
		err = io.ErrShortWrite
	}
	if err == nil {
		c.written += int64(n)
		c.records += c.queued
		c.pending, c.queued = c.pending[:0], 0
		return nil
	}
	// Whole records of the part that was written count; the rest of it is cut off.
	whole := 0
	if n > 0 {
		whole = bytes.LastIndexByte(c.pending[:n], '\n') + 1
		c.records += int64(bytes.Count(c.pending[:whole], []byte{'\n'}))
	}
	c.written += int64(whole)
	cut := &CaptureCutError{Bytes: c.written, Records: c.records, Err: err}
	if n > whole {
		if t, ok := c.w.(interface{ Truncate(int64) error }); ok {
			if terr := t.Truncate(c.written); terr != nil {
				cut.TruncErr = terr
			} else {
				cut.Cut = true
			}
		} else {
			cut.TruncErr = errors.New("the writer cannot be truncated")
		}
	}
	c.pending, c.queued = nil, 0
	c.err = cut
	return cut
}

// Written returns the bytes and the records (the header included) of the capture that
// reached the underlying writer.
func (c *CaptureWriter) Written() (bytes, records int64) { return c.written, c.records }
