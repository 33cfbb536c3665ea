package telemetry

import (
	"bytes"
	"encoding/binary"
	"math"
	"math/bits"
	"strconv"
	"strings"
	"time"
	"unsafe"

	"github.com/caploop/caploop/telemetry/si"
)

// MaxLineLen is the longest line, in bytes without its terminator, that the parser
// accepts. Longer lines are cut and rejected with ErrTooLong; the Scanner does not
// buffer their rest.
const MaxLineLen = 1024

// MaxRejectsKept is how many rejected lines Stats.FirstRejects keeps.
const MaxRejectsKept = 10

// maxExtraNames bounds the table of interned extra channel names, so hostile input
// cannot grow memory without bound.
const maxExtraNames = 256

// captureSlack is the room a capture record prefix ("123456.123456 < ", at most 22 bytes) may take on top
// of MaxLineLen.
const captureSlack = 40

// Extra is one value of an unknown key on a data line, kept as a named channel.
// Name is interned by the Parser: the same key gives the same string, without an
// allocation per line.
type Extra struct {
	Name  string
	Value float64
}

// RecordKind says what a line turned out to be.
type RecordKind uint8

// Record kinds.
const (
	RecNone     RecordKind = iota // blank line, comment, column header or capture header
	RecSample                     // a data line or a numeric row: a Sample
	RecMeta                       // a meta line: Meta changed
	RecEvent                      // a capture '>' or '!' record: an Event
	RecRejected                   // a line that could not be read: counted, with a ParseError
)

// String returns "none", "sample", "meta", "event" or "rejected".
func (k RecordKind) String() string {
	switch k {
	case RecSample:
		return "sample"
	case RecMeta:
		return "meta"
	case RecEvent:
		return "event"
	case RecRejected:
		return "rejected"
	}
	return "none"
}

// Event is a capture record that is not a board line: a line the host sent to the board
// ('>', such as "set deadband=14") or a host event ('!': mark, unplugged, reconnected,
// note). Text is sanitised and safe to print.
type Event struct {
	Host int64     // host time, ns since the capture started
	Dir  Direction // ToBoard or HostEvent
	Text string    // sanitised text of the record
	Line int64     // 1-based line number in the source
}

// Stats counts the lines a Parser or Scanner has seen. Every line falls in exactly one
// of Samples, Metas, Comments, Blank, Headers, Events and Rejected, so they add up to
// Lines. Partial counts the rejected lines that look like a piece of a line (two lines
// glued together by a board reset, or the tail of a line), and is part of Rejected.
type Stats struct {
	Lines, Samples, Metas, Comments, Rejected, Partial int64
	Events                                             int64 // capture '>' and '!' records
	Blank                                              int64 // empty lines
	Headers                                            int64 // column header lines and the capture header line

	// ByReason counts the rejected lines by reason; read it with Rejects or RejectReasons.
	ByReason [numReasons]int64

	// FirstRejects holds the first MaxRejectsKept rejected lines, in order.
	FirstRejects []*ParseError
}

// Record is what Parser.Parse makes of one line.
type Record struct {
	Kind   RecordKind
	Sample Sample      // valid for RecSample
	Extras []Extra     // extra channels of the sample; valid until the next Parse
	Meta   Meta        // merged meta after this line; valid for every kind
	Delta  Meta        // the fields this line set, for RecMeta
	Event  Event       // valid for RecEvent
	Err    *ParseError // valid for RecRejected
}

// column kinds for numeric rows and known data keys.
const (
	colExtra = iota
	colT
	colN
	colSP
	colPV
	colU
)

type column struct {
	kind int
	name string // interned name for colExtra
}

// Parser reads the caploop line protocol one line at a time. It keeps the state that
// spans lines: the merged meta, the column header of a numeric table, capture mode,
// the unwrapping of the board clock t across 2^32 and the line and sample counters.
// The zero value is ready to use. Parse does not allocate for data lines.
//
// The protocol, one record per line, "\n" or "\r\n" terminated, at most MaxLineLen bytes:
//
//	# vref=5 adc_bits=10 period_us=1000 mode=three-state deadband=21 supply=5 r=47k c=1u load=1M
//	t=123456 sp=512 pv=498 u=1
//
// A meta line is '#' and then key=value words (separated by spaces, tabs or commas).
// Known keys: vref (V), adc_bits, period_us (µs), mode (two-state or three-state),
// deadband (counts, half-width), supply (V), r (Ω), c (F), load (Ω); values take SI
// prefixes and units (47k, 4k7, 1u, 4.7µ, 3300mV). Unknown keys are ignored; a bad value
// rejects the whole line. A meta line may come again at any time: its fields apply from
// there on. A '#' line whose first word is not key=value is a comment.
//
// A data line is key=value pairs separated by spaces, tabs or commas, in any order:
// t (board time, µs, unsigned; a 32-bit clock that wraps is unwrapped), n (sequence
// number, unsigned), sp and pv (counts, any decimal number), u (drive: 1, 0, -1, or +,
// 0, -). sp and pv are required. Other keys (a letter or '_' then letters, digits, '_'
// or '.') are kept as extra channels; keys are case-sensitive.
//
// A header line of column names without '=' ("t,sp,pv,u", "sp pv u", with n and extra
// names too; sp and pv required) makes later lines that start with a number rows of a
// numeric table (CSV or TSV: "1000,512,498,1").
//
// The first line decides capture mode: a line starting with CaptureMagic makes every
// later line a capture record whose host time replaces the one given to Parse; board
// lines ('<') are read as above, '>' and '!' lines become Events.
//
// Anything else is rejected with a reason (a *ParseError wrapping one of the Err*
// sentinels), counted in Stats, and never fatal to the Parser.
type Parser struct {
	// Name is the source name used in errors (a file name, a port path).
	Name string

	line   int64
	index  int64
	stats  Stats
	meta   Meta
	delta  Meta
	sample Sample
	extras []Extra
	event  Event
	names  map[string]string
	cols   []column
	// spareCols is the other header buffer; see parseHeader.
	spareCols []column

	capture      bool
	captureStart time.Time

	tPrev  uint32
	tWraps int64
	tSeen  bool

	noFast bool // tests: always take the general data line path

	errKind   error
	errField  string
	errText   []byte
	errLineNo int64
}

// Parse reads one line (with or without its "\n" or "\r\n"). host is the host receive
// time in ns since the source started, used when hasHost is true (and replaced by the
// record's own time in a capture). The returned Record's Extras slice is reused by the
// next call.
func (p *Parser) Parse(line []byte, host int64, hasHost bool) Record {
	if n := len(line); n > 0 && line[n-1] == '\n' {
		line = line[:n-1]
	}
	k := p.parse(line, host, hasHost, false)
	r := Record{Kind: k, Meta: p.meta}
	switch k {
	case RecSample:
		r.Sample, r.Extras = p.sample, p.extras
	case RecMeta:
		r.Delta = p.delta
	case RecEvent:
		r.Event = p.event
	case RecRejected:
		r.Err = p.LastError()
	}
	return r
}

// Stats returns the counts so far.
func (p *Parser) Stats() Stats { return p.stats }

// Meta returns the merged meta so far.
func (p *Parser) Meta() Meta { return p.meta }

// Line returns the number of lines parsed so far.
func (p *Parser) Line() int64 { return p.line }

// Capture reports whether the input is a capture, and its start time when the header
// gave one.
func (p *Parser) Capture() (bool, time.Time) { return p.capture, p.captureStart }

// ResetClock forgets the board clock history, so the next t is not read as a wrap of the
// previous one. Call it when the board was reset or the port reopened.
func (p *Parser) ResetClock() { p.tSeen, p.tWraps = false, 0 }

// LastError returns the last rejected line as a *ParseError, or nil if none was rejected.
// Call it before the next Parse: its text is taken from the line, which the caller may reuse.
func (p *Parser) LastError() *ParseError {
	if p.errKind == nil {
		return nil
	}
	return &ParseError{Name: p.Name, Line: p.errLineNo, Field: p.errField, Text: SanitizeN(p.errText, 80), Err: p.errKind}
}

// parse handles one line without its "\n". cut says the line was longer than the limit
// and line holds only its start.
func (p *Parser) parse(line []byte, host int64, hasHost bool, cut bool) RecordKind {
	p.line++
	p.stats.Lines++
	if n := len(line); n > 0 && line[n-1] == '\r' {
		line = line[:n-1]
	}
	limit := MaxLineLen
	if p.capture {
		limit += captureSlack
	}
	if cut || len(line) > limit {
		if len(line) > limit {
			line = line[:limit]
		}
		return p.reject(ErrTooLong, "", line)
	}
	if p.capture {
		return p.parseCapture(line)
	}
	if p.line == 1 && bytes.HasPrefix(line, []byte(CaptureMagic)) {
		return p.parseCaptureHeader(line)
	}
	if len(line) > MaxLineLen {
		return p.reject(ErrTooLong, "", line[:MaxLineLen])
	}
	return p.parseBoard(line, host, hasHost)
}

func (p *Parser) parseCaptureHeader(line []byte) RecordKind {
	p.capture = true
	p.stats.Headers++
	for _, f := range strings.Fields(string(line[len(CaptureMagic):])) {
		if v, ok := strings.CutPrefix(f, "start="); ok {
			if t, err := time.Parse(time.RFC3339Nano, v); err == nil {
				p.captureStart = t
			}
		}
	}
	return RecNone
}

// capturePrefix reads the "<seconds>.<fraction> <dir>" that starts a capture record and
// returns the host time in ns, the direction and the index after them (at the space
// before the raw line, or at the end).
func capturePrefix(line []byte) (host int64, dir Direction, end int, ok bool) {
	n := len(line)
	sec, i := digits(line, 0)
	if i == 0 || i > 9 || i >= n || line[i] != '.' { // 9 digits: 31 years, and no int64 overflow
		return 0, 0, 0, false
	}
	frac, j := digits8(line, i+1)
	nf := j - i - 1
	if nf == 0 || nf > 9 || j+1 >= n || line[j] != ' ' {
		return 0, 0, 0, false
	}
	return int64(sec)*1e9 + int64(frac)*int64(pow10u[9-nf]), Direction(line[j+1]), j + 2, true
}

var pow10u = [...]uint64{1, 10, 100, 1000, 10000, 100000, 1000000, 10000000, 100000000, 1000000000}

// parseCapture reads "<seconds>.<fraction> <dir> <raw>".
func (p *Parser) parseCapture(line []byte) RecordKind {
	if len(line) == 0 {
		p.stats.Blank++
		return RecNone
	}
	host, dir, i, ok := capturePrefix(line)
	n := len(line)
	if !ok || (i < n && line[i] != ' ') {
		return p.reject(ErrBadCapture, "", line)
	}
	raw := line[min(i+1, n):]
	if len(raw) > MaxLineLen {
		return p.reject(ErrTooLong, "", raw[:MaxLineLen])
	}
	switch dir {
	case FromBoard:
		return p.parseBoard(raw, host, true)
	case ToBoard, HostEvent:
		p.event = Event{Host: host, Dir: dir, Text: Sanitize(raw), Line: p.line}
		if dir == HostEvent && clockBreak(raw) {
			p.ResetClock()
		}
		p.stats.Events++
		return RecEvent
	}
	return p.reject(ErrBadCapture, "", line)
}

// clockBreak reports whether a host event says the board may have restarted.
func clockBreak(text []byte) bool {
	for _, w := range [...]string{"unplug", "replug", "connected", "reset", "reopen"} {
		if bytes.Contains(text, []byte(w)) {
			return true
		}
	}
	return false
}

func isSep(c byte) bool { return c == ' ' || c == ',' || c == '\t' }

func isDigit(c byte) bool { return c-'0' <= 9 }

func isKeyStart(c byte) bool {
	return c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c == '_'
}

func isKeyByte(c byte) bool { return isKeyStart(c) || isDigit(c) || c == '.' }

// parseBoard reads a line the board sent.
func (p *Parser) parseBoard(line []byte, host int64, hasHost bool) RecordKind {
	if len(line) > 0 && (line[0] == 't' || line[0] == 's') && !p.noFast {
		if _, ok := p.fastLine(line, false); ok {
			return p.accept(host, hasHost)
		}
	}
	i := 0
	for i < len(line) && isSep(line[i]) {
		i++
	}
	if i == len(line) {
		p.stats.Blank++
		return RecNone
	}
	c := line[i]
	switch {
	case isKeyStart(c):
		return p.parseKV(line, i, host, hasHost)
	case isDigit(c) || c == '-' || c == '+' || c == '.':
		return p.parseRow(line, i, host, hasHost)
	case c == '#':
		return p.parseHash(line, i+1)
	}
	return p.reject(ErrSyntax, "", line)
}

var fieldNames = [...]string{colExtra: "", colT: "t", colN: "n", colSP: "sp", colPV: "pv", colU: "u"}

// parseKV reads a key=value data line from line[i:]. It is the hot path.
func (p *Parser) parseKV(line []byte, i int, host int64, hasHost bool) RecordKind {
	// Fill p.sample in place: Sample is valid only for RecSample, so a rejected line
	// may leave it half written.
	s := &p.sample
	*s = Sample{}
	var seen uint8
	p.extras = p.extras[:0]
	n := len(line)
	for {
		for i < n && isSep(line[i]) {
			i++
		}
		if i >= n {
			break
		}
		key := colExtra
		switch line[i] {
		case 't':
			if i+1 < n && line[i+1] == '=' {
				key, i = colT, i+2
			}
		case 's':
			if i+2 < n && line[i+1] == 'p' && line[i+2] == '=' {
				key, i = colSP, i+3
			}
		case 'p':
			if i+2 < n && line[i+1] == 'v' && line[i+2] == '=' {
				key, i = colPV, i+3
			}
		case 'u':
			if i+1 < n && line[i+1] == '=' {
				key, i = colU, i+2
			}
		case 'n':
			if i+1 < n && line[i+1] == '=' {
				key, i = colN, i+2
			}
		}
		if key != colExtra {
			bit := uint8(1) << key
			if seen&bit != 0 {
				p.stats.Partial++
				return p.reject(ErrDuplicateKey, fieldNames[key], line)
			}
			seen |= bit
		}
		var ok bool
		switch key {
		case colT:
			v, j := digits(line, i)
			if j == i || j-i > 18 || (j < n && line[j] != ' ' && !isSep(line[j])) {
				return p.rejectValue(ErrBadNumber, "t", line)
			}
			i = j
			s.T = p.unwrap(v)
		case colN:
			var v uint64
			v, i, ok = parseUint(line, i)
			if !ok {
				return p.rejectValue(ErrBadNumber, "n", line)
			}
			s.N = int64(v)
		case colSP:
			// Whole counts are the common case: read them here, the rest in parseNum.
			if v, j := digits(line, i); j > i && j-i <= 15 && (j == n || line[j] == ' ') {
				s.SP, i = float64(v), j
			} else if s.SP, i, ok = parseNum(line, i); !ok {
				return p.rejectValue(ErrBadNumber, "sp", line)
			}
		case colPV:
			if v, j := digits(line, i); j > i && j-i <= 15 && (j == n || line[j] == ' ') {
				s.PV, i = float64(v), j
			} else if s.PV, i, ok = parseNum(line, i); !ok {
				return p.rejectValue(ErrBadNumber, "pv", line)
			}
		case colU:
			s.U, i, ok = parseDrive(line, i)
			if !ok {
				return p.rejectValue(ErrBadDrive, "u", line)
			}
		default:
			k0 := i
			if !isKeyStart(line[i]) {
				return p.reject(ErrBadKey, "", line)
			}
			for i < n && isKeyByte(line[i]) {
				i++
			}
			if i >= n || line[i] != '=' {
				if bytes.IndexByte(line, '=') < 0 {
					return p.parseHeader(line, k0)
				}
				if i < n && !isSep(line[i]) {
					return p.reject(ErrBadKey, "", line)
				}
				return p.reject(ErrSyntax, "", line)
			}
			name, ok := p.intern(line[k0:i])
			if !ok {
				return p.reject(ErrTooManyKeys, "", line)
			}
			for _, e := range p.extras {
				if e.Name == name {
					p.stats.Partial++
					return p.reject(ErrDuplicateKey, name, line)
				}
			}
			var v float64
			v, i, ok = parseNum(line, i+1)
			if !ok {
				return p.rejectValue(ErrBadNumber, name, line)
			}
			p.extras = append(p.extras, Extra{Name: name, Value: v})
		}
	}
	const need = 1<<colSP | 1<<colPV
	if seen&need != need {
		field := "sp"
		if seen&(1<<colSP) != 0 {
			field = "pv"
		}
		if seen&(1<<colPV|1<<colU) != 0 && seen&(1<<colT|1<<colN) == 0 {
			p.stats.Partial++ // the tail of a data line
		}
		return p.reject(ErrMissingField, field, line)
	}
	s.Flags = SampleFlags(seen>>colT&1)*HasT | SampleFlags(seen>>colN&1)*HasN | SampleFlags(seen>>colU&1)*HasU
	return p.accept(host, hasHost)
}

// accept completes p.sample and counts it.
func (p *Parser) accept(host int64, hasHost bool) RecordKind {
	s := &p.sample
	if hasHost {
		s.Host = host
		s.Flags |= HasHost
	}
	s.Line = p.line
	s.Index = p.index
	p.index++
	p.stats.Samples++
	return RecSample
}

// fastLine reads the canonical data line layout, the one AppendData writes and most
// firmware prints: "t=<digits> n=<digits> sp=<digits> pv=<digits> u=<drive>" with t, n
// and u optional, single spaces and whole counts. With needNL false, b is exactly one
// line; with needNL true, b is the rest of the read buffer and the line must end in "\n"
// or "\r\n" within it. On success it fills p.sample and returns the index after the line
// (and its terminator) and true; otherwise it returns false without changing any state,
// and parseKV then reads the line (and finds the error, if any). For every line it
// accepts, parseKV gives the same sample.
func (p *Parser) fastLine(b []byte, needNL bool) (int, bool) {
	n := len(b)
	var flags SampleFlags
	var t, seq uint64
	i := 3 // after "sp="
	if n > 2 && b[0] == 't' && b[1] == '=' {
		v, j := digits8(b, 2)
		if j == 2 || j-2 > 18 {
			return 0, false
		}
		t, flags = v, HasT
		w := tag4(b, j)
		if w&0xFFFFFF == tagN {
			v, k := digits8(b, j+3)
			if k == j+3 || k-j-3 > 18 {
				return 0, false
			}
			seq, flags, j = v, flags|HasN, k
			w = tag4(b, j)
		}
		if w != tagSP {
			return 0, false
		}
		i = j + 4
	} else if n < 3 || b[0] != 's' || b[1] != 'p' || b[2] != '=' {
		return 0, false
	}
	sp, j := digits(b, i) // short numbers: the inlined loop beats digits8's call
	if j == i || j-i > 15 || tag4(b, j) != tagPV {
		return 0, false
	}
	i = j + 4
	pv, j := digits(b, i)
	if j == i || j-i > 15 {
		return 0, false
	}
	u := Hold
	if j < n && b[j] == ' ' {
		if j+3 >= n || b[j+1] != 'u' || b[j+2] != '=' {
			return 0, false
		}
		j += 4
		switch b[j-1] {
		case '1':
			u = Charge
		case '0':
		case '+', '-':
			u = Charge
			if b[j-1] == '-' {
				u = Discharge
			}
			if j < n && b[j] == '1' {
				j++
			}
		default:
			return 0, false
		}
		flags |= HasU
	}
	// The line must end here.
	switch {
	case !needNL:
		if j != n {
			return 0, false
		}
	case j < n && b[j] == '\n':
		j++
	case j+1 < n && b[j] == '\r' && b[j+1] == '\n':
		j += 2
	default:
		return 0, false
	}
	s := &p.sample
	s.T, s.N, s.Host = 0, int64(seq), 0
	s.SP, s.PV, s.U, s.Flags = float64(sp), float64(pv), u, flags
	if flags&HasT != 0 {
		s.T = p.unwrap(t)
	}
	p.extras = p.extras[:0]
	return j, true
}

// Little-endian words of the separators and keys fastLine expects.
const (
	tagN  = ' ' | 'n'<<8 | '='<<16
	tagSP = ' ' | 's'<<8 | 'p'<<16 | '='<<24
	tagPV = ' ' | 'p'<<8 | 'v'<<16 | '='<<24
)

// tag4 returns the four bytes at b[i:] as a little-endian word, or 0 when there are
// fewer than four.
func tag4(b []byte, i int) uint32 {
	if i < 0 || i+4 > len(b) {
		return 0
	}
	return binary.LittleEndian.Uint32(b[i:])
}

// rejectValue rejects a line whose value for field could not be read, and counts it as
// partial when a key seems glued into a value ("sp=51t=1234"), the mark of two lines run
// together by a reset.
func (p *Parser) rejectValue(err error, field string, line []byte) RecordKind {
	if glued(line) {
		p.stats.Partial++
	}
	return p.reject(err, field, line)
}

// glued reports whether line has a digit directly followed by a key and '='.
func glued(line []byte) bool {
	for j := 1; j < len(line); j++ {
		if !isDigit(line[j-1]) || !isKeyStart(line[j]) {
			continue
		}
		k := j
		for k < len(line) && isKeyStart(line[k]) {
			k++
		}
		if k < len(line) && line[k] == '=' {
			return true
		}
	}
	return false
}

func (p *Parser) intern(b []byte) (string, bool) {
	if s, ok := p.names[string(b)]; ok {
		return s, true
	}
	if p.names == nil {
		p.names = make(map[string]string)
	}
	if len(p.names) >= maxExtraNames {
		return "", false
	}
	s := string(b)
	p.names[s] = s
	return s, true
}

func (p *Parser) unwrap(raw uint64) int64 {
	if raw >= 1<<32 {
		return int64(raw)
	}
	r := uint32(raw)
	if p.tSeen && r < p.tPrev && r-p.tPrev < 1<<31 {
		p.tWraps++
	}
	p.tPrev, p.tSeen = r, true
	return p.tWraps<<32 + int64(r)
}

var pow10 = [...]float64{1, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22}

// parseNum reads a decimal number at b[i:] that ends at a separator or the end of b.
// Plain integers and decimals of up to 15 digits take an exact fast path (an integer
// below 2^53 divided by an exact power of ten rounds correctly); anything else goes to
// strconv.ParseFloat. NaN and infinities are refused.
func parseNum(b []byte, i int) (float64, int, bool) {
	start, n := i, len(b)
	neg := false
	if i < n && (b[i] == '-' || b[i] == '+') {
		neg = b[i] == '-'
		i++
	}
	var m uint64
	d0 := i
	for i < n && isDigit(b[i]) {
		m = m*10 + uint64(b[i]-'0')
		i++
	}
	digits := i - d0
	frac := 0
	if i < n && b[i] == '.' {
		i++
		f0 := i
		for i < n && isDigit(b[i]) {
			m = m*10 + uint64(b[i]-'0')
			i++
		}
		frac = i - f0
	}
	if digits > 0 && digits+frac <= 15 && (i == n || isSep(b[i])) {
		v := float64(m)
		if frac > 0 {
			v /= pow10[frac]
		}
		if neg {
			v = -v
		}
		return v, i, true
	}
	return parseNumSlow(b, start)
}

func parseNumSlow(b []byte, start int) (float64, int, bool) {
	end := start
	for end < len(b) && !isSep(b[end]) {
		end++
	}
	if end == start {
		return 0, end, false
	}
	tok := b[start:end]
	if !decimalSyntax(tok) {
		return 0, end, false // refused here: a strconv error would allocate
	}
	// strconv copies the text into any error it returns, so the string need not outlive tok.
	v, err := strconv.ParseFloat(unsafe.String(&tok[0], len(tok)), 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, end, false
	}
	return v, end, true
}

// digits reads decimal digits at b[i:] and returns their value (wrapping past 19
// digits; callers check the count) and the index after them. It is small enough to be
// inlined; digits8 is the better choice for long numbers.
func digits(b []byte, i int) (uint64, int) {
	var v uint64
	for ; i < len(b); i++ {
		c := b[i] - '0'
		if c > 9 {
			break
		}
		v = v*10 + uint64(c)
	}
	return v, i
}

// digits8 is digits that tests and converts eight bytes at a time (SWAR) when the
// slice's capacity allows the load; bytes past len(b) are loaded but never counted.
func digits8(b []byte, i int) (uint64, int) {
	var v uint64
	if e := b[:cap(b)]; i >= 0 && i+8 <= len(e) {
		x := binary.LittleEndian.Uint64(e[i:])
		// A byte is a digit when its high nibble is 3 and adding 6 keeps it so. Carries
		// only move up, to later bytes, so the first non-digit is found exactly.
		const hi, zeros, six = 0xF0F0F0F0F0F0F0F0, 0x3030303030303030, 0x0606060606060606
		nd := (x&hi ^ zeros) | ((x+six)&hi ^ zeros)
		k := 8
		if nd != 0 {
			k = bits.TrailingZeros64(nd) >> 3
		}
		k = min(k, len(b)-i)
		if k <= 0 {
			return 0, i
		}
		v = swar8((x - zeros) << (64 - 8*uint(k)))
		i += k
		if k < 8 {
			return v, i
		}
	}
	for ; i < len(b); i++ {
		c := b[i] - '0'
		if c > 9 {
			break
		}
		v = v*10 + uint64(c)
	}
	return v, i
}

// swar8 converts eight digit values 0..9, the first in the lowest byte, to their
// number: pairs, then quadruples, then the whole (each step multiplies and shifts).
func swar8(d uint64) uint64 {
	d = (d * (10<<8 + 1)) >> 8
	d = ((d & 0x00FF00FF00FF00FF) * (100<<16 + 1)) >> 16
	return ((d & 0x0000FFFF0000FFFF) * (10000<<32 + 1)) >> 32
}

// decimalSyntax reports whether b is [+-]digits[.digits][(e|E)[+-]digits], with at least
// one digit before the exponent: the numbers the protocol allows.
func decimalSyntax(b []byte) bool {
	i := 0
	if i < len(b) && (b[i] == '+' || b[i] == '-') {
		i++
	}
	d := 0
	for ; i < len(b) && isDigit(b[i]); i++ {
		d++
	}
	if i < len(b) && b[i] == '.' {
		for i++; i < len(b) && isDigit(b[i]); i++ {
			d++
		}
	}
	if d == 0 {
		return false
	}
	if i < len(b) && (b[i] == 'e' || b[i] == 'E') {
		i++
		if i < len(b) && (b[i] == '+' || b[i] == '-') {
			i++
		}
		e := i
		for i < len(b) && isDigit(b[i]) {
			i++
		}
		if i == e {
			return false
		}
	}
	return i == len(b)
}

// parseUint reads an unsigned decimal integer below 2^63 at b[i:] ending at a separator
// or the end of b.
func parseUint(b []byte, i int) (uint64, int, bool) {
	n := len(b)
	var v uint64
	d0 := i
	for i < n && isDigit(b[i]) {
		v = v*10 + uint64(b[i]-'0')
		i++
	}
	if i == d0 || i-d0 > 18 || (i < n && !isSep(b[i])) {
		return 0, i, false
	}
	return v, i, true
}

// parseDrive reads 1, 0, -1, +1, + or - at b[i:].
func parseDrive(b []byte, i int) (Drive, int, bool) {
	n := len(b)
	if i >= n {
		return 0, i, false
	}
	var d Drive
	switch b[i] {
	case '1':
		d = Charge
	case '0':
		d = Hold
	case '+':
		d = Charge
		if i+1 < n && b[i+1] == '1' {
			i++
		}
	case '-':
		d = Discharge
		if i+1 < n && b[i+1] == '1' {
			i++
		}
	default:
		return 0, i, false
	}
	i++
	if i < n && !isSep(b[i]) {
		return 0, i, false
	}
	return d, i, true
}

// parseHeader reads a column header line ("t,sp,pv,u") starting at line[i:].
func (p *Parser) parseHeader(line []byte, i int) RecordKind {
	cols := p.spareCols[:0] // two buffers take turns: no allocation once warm
	var seen uint8
	known := false
	n := len(line)
	for {
		for i < n && isSep(line[i]) {
			i++
		}
		if i >= n {
			break
		}
		k0 := i
		if !isKeyStart(line[i]) {
			return p.reject(ErrSyntax, "", line)
		}
		for i < n && isKeyByte(line[i]) {
			i++
		}
		if i < n && !isSep(line[i]) {
			return p.reject(ErrSyntax, "", line)
		}
		name := line[k0:i]
		c := column{kind: colExtra}
		for k := colT; k <= colU; k++ {
			if string(name) == fieldNames[k] {
				c.kind = k
			}
		}
		if c.kind != colExtra {
			known = true
			if seen&(1<<c.kind) != 0 {
				return p.reject(ErrDuplicateKey, fieldNames[c.kind], line)
			}
			seen |= 1 << c.kind
		} else {
			var ok bool
			if c.name, ok = p.intern(name); !ok {
				return p.reject(ErrTooManyKeys, "", line)
			}
			for _, o := range cols {
				if o.kind == colExtra && o.name == c.name {
					return p.reject(ErrDuplicateKey, c.name, line)
				}
			}
		}
		cols = append(cols, c)
	}
	if !known {
		return p.reject(ErrSyntax, "", line)
	}
	const need = 1<<colSP | 1<<colPV
	if seen&need != need {
		field := "sp"
		if seen&(1<<colSP) != 0 {
			field = "pv"
		}
		return p.reject(ErrMissingField, field, line)
	}
	p.cols, p.spareCols = cols, p.cols
	p.stats.Headers++
	return RecNone
}

// parseRow reads a numeric row ("512,498,1") against the column header.
func (p *Parser) parseRow(line []byte, i int, host int64, hasHost bool) RecordKind {
	if p.cols == nil {
		return p.reject(ErrNoHeader, "", line)
	}
	s := &p.sample
	*s = Sample{}
	p.extras = p.extras[:0]
	n := len(line)
	for _, c := range p.cols {
		for i < n && isSep(line[i]) {
			i++
		}
		if i >= n {
			return p.reject(ErrFieldCount, "", line)
		}
		var ok bool
		switch c.kind {
		case colT:
			var v uint64
			if v, i, ok = parseUint(line, i); ok {
				s.T = p.unwrap(v)
				s.Flags |= HasT
			}
		case colN:
			var v uint64
			if v, i, ok = parseUint(line, i); ok {
				s.N = int64(v)
				s.Flags |= HasN
			}
		case colSP:
			s.SP, i, ok = parseNum(line, i)
		case colPV:
			s.PV, i, ok = parseNum(line, i)
		case colU:
			if s.U, i, ok = parseDrive(line, i); ok {
				s.Flags |= HasU
			} else {
				return p.reject(ErrBadDrive, "u", line)
			}
		default:
			var v float64
			if v, i, ok = parseNum(line, i); ok {
				p.extras = append(p.extras, Extra{Name: c.name, Value: v})
			}
		}
		if !ok {
			field := c.name
			if c.kind != colExtra {
				field = fieldNames[c.kind]
			}
			return p.reject(ErrBadNumber, field, line)
		}
	}
	for i < n && isSep(line[i]) {
		i++
	}
	if i < n {
		return p.reject(ErrFieldCount, "", line)
	}
	return p.accept(host, hasHost)
}

// parseHash reads a '#' line from line[i:]: a meta line when its first word is
// key=value, else a comment.
func (p *Parser) parseHash(line []byte, i int) RecordKind {
	rest := line[i:]
	// The first word decides; comments are told apart without allocating.
	w0 := i
	for w0 < len(line) && isSep(line[w0]) {
		w0++
	}
	w1 := w0
	for w1 < len(line) && !isSep(line[w1]) {
		w1++
	}
	if bytes.IndexByte(line[w0:w1], '=') <= 0 {
		if !printableText(line) {
			return p.reject(ErrBinary, "", line)
		}
		p.stats.Comments++
		return RecNone
	}
	words := bytes.FieldsFunc(rest, func(r rune) bool { return r == ' ' || r == '\t' || r == ',' })
	var m Meta
	list := false // after accepts=, the words without '=' continue its list
	for _, w := range words {
		k, v, ok := bytes.Cut(w, []byte{'='})
		if !ok && list {
			if !m.addAccept(w) {
				return p.reject(ErrBadMeta, "accepts", line)
			}
			continue
		}
		key := string(k)
		if !ok || len(k) == 0 || len(v) == 0 {
			return p.reject(ErrBadMeta, SanitizeN(k, 32), line)
		}
		f, err := m.setField(key, string(v))
		if err != nil {
			return p.reject(ErrBadMeta, key, line)
		}
		if f != 0 {
			if m.Set&f != 0 {
				return p.reject(ErrDuplicateKey, key, line)
			}
			m.Set |= f
		}
		list = f == FieldAccepts
	}
	p.delta = m
	p.meta = p.meta.Merge(m)
	p.stats.Metas++
	return RecMeta
}

// setField stores one meta key=value in m and returns its field bit (0 for an unknown
// key, which is ignored so newer firmware can send more).
func (m *Meta) setField(key, val string) (MetaField, error) {
	positive := func(unit string) (float64, error) {
		v, err := si.ParseUnit(val, unit)
		if err == nil && v <= 0 {
			err = ErrBadMeta
		}
		return v, err
	}
	var err error
	switch key {
	case "vref":
		m.Vref, err = positive("V")
		return FieldVref, err
	case "adc_bits":
		var b int
		b, err = strconv.Atoi(val)
		if err == nil && (b < 1 || b > 32) {
			err = ErrBadMeta
		}
		m.ADCBits = b
		return FieldADCBits, err
	case "period_us":
		var us float64
		us, err = positive("")
		m.Period = us * 1e-6
		return FieldPeriod, err
	case "mode":
		switch val {
		case "two-state":
			m.Mode = TwoState
		case "three-state":
			m.Mode = ThreeState
		default:
			err = ErrBadMeta
		}
		return FieldMode, err
	case "deadband":
		m.Deadband, err = si.Parse(val)
		if err == nil && m.Deadband < 0 {
			err = ErrBadMeta
		}
		return FieldDeadband, err
	case "supply":
		m.Supply, err = positive("V")
		return FieldSupply, err
	case "r":
		m.R, err = positive("Ω")
		return FieldR, err
	case "c":
		m.C, err = positive("F")
		return FieldC, err
	case "load":
		m.Load, err = positive("Ω")
		return FieldLoad, err
	case "accepts":
		if !m.addAccept([]byte(val)) {
			err = ErrBadMeta
		}
		return FieldAccepts, err
	}
	return 0, nil
}

// reject counts a rejected line and remembers why. A line with control bytes or invalid
// UTF-8 is reported as ErrBinary whatever else was wrong with it.
func (p *Parser) reject(err error, field string, line []byte) RecordKind {
	if err != ErrTooLong && err != ErrBinary && !printableText(line) {
		err, field = ErrBinary, ""
	}
	p.stats.Rejected++
	if i := reasonIndex(err); i >= 0 {
		p.stats.ByReason[i]++
	}
	p.errKind, p.errField, p.errText, p.errLineNo = err, field, line, p.line
	if len(p.stats.FirstRejects) < MaxRejectsKept {
		p.stats.FirstRejects = append(p.stats.FirstRejects, p.LastError())
	}
	return RecRejected
}
