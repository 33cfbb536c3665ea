package telemetry

import (
	"bytes"
	"io"
	"time"
)

// scanBufSize is the Scanner's read buffer. It is fixed: memory stays bounded whatever
// the input, since a line longer than MaxLineLen is cut and its rest skipped.
const scanBufSize = 256 << 10

// Scanner reads records from a stream of the caploop line protocol, in the spirit of
// bufio.Scanner: call Scan until it returns false, read the record with Kind and
// Sample, Meta or Event, then check Err.
//
// It reads plain telemetry (data and meta lines), numeric CSV/TSV tables after a column
// header line, and captures (first line starting with CaptureMagic; host times then come
// from the capture). Lines may end in "\n" or "\r\n"; a last line without a newline is
// still read. Blank lines, comments and headers are counted but not returned. A line
// that cannot be read is counted in Stats and skipped, or, when Strict is set, stops the
// scan with a *ParseError. A read error stops the scan; Err returns it (io.EOF is a
// clean end, and Err returns nil). A partial last line before a read error is dropped
// and counted as Partial.
//
// Scan does not allocate for data lines. The values returned by Sample, Extras and Event
// are valid until the next call to Scan (Sample and Event are copies; the Extras slice
// is reused).
type Scanner struct {
	// Name is the source name used in errors, normally the file name.
	Name string
	// Strict makes a rejected line fatal: Scan returns false and Err the *ParseError.
	Strict bool

	r        io.Reader
	buf      []byte
	start    int
	end      int
	eof      bool
	err      error
	skipping bool
	finished bool
	kind     RecordKind
	p        Parser
	bufSize  int // 0: scanBufSize; tests use small buffers to exercise refills
}

// NewScanner returns a Scanner that reads from r.
func NewScanner(r io.Reader) *Scanner { return &Scanner{r: r} }

// Scan advances to the next sample, meta or event record. It returns false at the end
// of the input, after a read error, or (with Strict) at the first rejected line.
func (s *Scanner) Scan() bool {
	if s.finished {
		return false
	}
	if s.buf == nil {
		size := scanBufSize
		if s.bufSize > 0 {
			size = max(s.bufSize, 2*(MaxLineLen+captureSlack+1))
		}
		s.buf = make([]byte, size)
		s.p.Name = s.Name
	}
	for {
		// The hot path: a line in the canonical data layout, whole in the buffer, past
		// the first line (which may be a capture header), outside a capture. It is
		// parsed straight from the buffer, its end found on the way.
		if !s.skipping && s.start < s.end {
			b := s.buf[s.start:s.end]
			p := &s.p
			if (b[0] == 't' || b[0] == 's') && p.line > 0 && !p.capture && !p.noFast {
				if next, ok := p.fastLine(b, true); ok {
					s.start += next
					p.line++
					p.stats.Lines++
					if s.emit(p.accept(0, false, b[:next])) {
						return s.kind != RecRejected
					}
					continue
				}
			} else if p.capture && !p.noFast {
				// The same inside a capture: a board line behind its host time.
				if host, dir, k, ok := capturePrefix(b); ok && dir == FromBoard && k+1 < len(b) && b[k] == ' ' {
					if next, ok := p.fastLine(b[k+1:], true); ok {
						s.start += k + 1 + next
						p.line++
						p.stats.Lines++
						if s.emit(p.accept(host, true, b[k+1:k+1+next])) {
							return s.kind != RecRejected
						}
						continue
					}
				}
			}
			if i := bytes.IndexByte(b, '\n'); i >= 0 && i <= MaxLineLen {
				s.start += i + 1
				if s.handle(b[:i], false) {
					return s.kind != RecRejected
				}
				continue
			}
		}
		if s.start < s.end {
			b := s.buf[s.start:s.end]
			i := bytes.IndexByte(b, '\n')
			if s.skipping {
				if i < 0 {
					s.start = s.end
				} else {
					s.start += i + 1
					s.skipping = false
				}
				continue
			}
			limit := s.limit()
			if i >= 0 {
				s.start += i + 1
				if s.handle(b[:min(i, limit)], i > limit) {
					return s.kind != RecRejected
				}
				continue
			}
			if len(b) > limit {
				s.skipping = true
				s.start = s.end
				if s.handle(b[:limit], true) {
					return s.kind != RecRejected
				}
				continue
			}
		}
		if s.eof {
			if s.start < s.end {
				line := s.buf[s.start:s.end]
				s.start = s.end
				if s.err != nil {
					// A read error cut this line short: it is a piece, not a record.
					s.p.line++
					s.p.stats.Lines++
					s.p.stats.Partial++
					s.p.reject(ErrCutShort, "", line[:min(len(line), MaxLineLen)])
				} else if s.handle(line, len(line) > s.limit()) {
					return s.kind != RecRejected
				}
				continue
			}
			s.finished = true
			return false
		}
		s.fill()
	}
}

// limit is the longest line the scanner passes whole to the parser (one more byte for
// a '\r').
func (s *Scanner) limit() int {
	if s.p.capture {
		return MaxLineLen + captureSlack + 1
	}
	return MaxLineLen + 1
}

// handle parses one line and reports whether Scan should return: for a record, or for a
// rejected line in Strict mode (then it also ends the scan).
func (s *Scanner) handle(line []byte, cut bool) bool {
	return s.emit(s.p.parse(line, 0, false, cut))
}

// emit takes the kind of the line just parsed and reports whether Scan should return:
// for a record, or for a rejected line in Strict mode or of a refused capture version
// (then it also ends the scan).
func (s *Scanner) emit(k RecordKind) bool {
	switch k {
	case RecNone:
		return false
	case RecRejected:
		if !s.Strict && s.p.refused == nil {
			return false
		}
		s.err = s.p.LastError()
		s.finished = true
	}
	s.kind = k
	return true
}

// fill moves the unread bytes to the front of the buffer and reads more.
func (s *Scanner) fill() {
	if s.start > 0 {
		copy(s.buf, s.buf[s.start:s.end])
		s.end -= s.start
		s.start = 0
	}
	for range 100 {
		n, err := s.r.Read(s.buf[s.end:])
		if n < 0 || n > len(s.buf)-s.end {
			n = 0
			err = io.ErrShortBuffer
		}
		s.end += n
		if err != nil {
			s.eof = true
			if err != io.EOF {
				s.err = err
			}
			return
		}
		if n > 0 {
			return
		}
	}
	s.eof = true
	s.err = io.ErrNoProgress
}

// Kind returns the kind of the current record: RecSample, RecMeta or RecEvent (or
// RecRejected after a Strict stop).
func (s *Scanner) Kind() RecordKind { return s.kind }

// Sample returns the current sample (valid when Kind is RecSample).
func (s *Scanner) Sample() Sample { return *s.p.out() }

// CurrentSample returns the current sample in place (valid when Kind is RecSample, until the
// next Scan; do not keep it). Copying its fields one by one is cheaper right after Scan
// than copying the whole struct: the parser has just stored them one by one, and a wider
// load of stores still in flight stalls.
func (s *Scanner) CurrentSample() *Sample { return s.p.out() }

// SetSampleDst makes the following Scans parse samples straight into *dst (nil: into the
// Scanner's own), saving a copy: a reader filling a batch points it at the batch's next
// slot. *dst is written only by Scan and is the current sample while Kind is RecSample;
// a line that is not a sample may leave it half written.
func (s *Scanner) SetSampleDst(dst *Sample) { s.p.dst = dst }

// Extras returns the extra channels of the current sample; the slice is reused by the
// next Scan.
func (s *Scanner) Extras() []Extra { return s.p.extras }

// Meta returns the meta merged from every meta line read so far.
func (s *Scanner) Meta() Meta { return s.p.meta }

// MetaChange returns the fields the current meta line set (valid when Kind is RecMeta).
func (s *Scanner) MetaChange() Meta { return s.p.delta }

// Event returns the current event (valid when Kind is RecEvent).
func (s *Scanner) Event() Event { return s.p.event }

// Stats returns the line counts so far.
func (s *Scanner) Stats() Stats { return s.p.stats }

// Capture reports whether the input is a capture, and its start time when known.
func (s *Scanner) Capture() (bool, time.Time) { return s.p.Capture() }

// Err returns the first error that stopped the scan: a read error, the *ParseError of a
// capture header of an unknown version (ErrCaptureVersion) or, with Strict, of the first
// rejected line. It returns nil at a clean end of input. A dropped value (see
// Stats.FirstDrops) never stops the scan.
func (s *Scanner) Err() error { return s.err }
