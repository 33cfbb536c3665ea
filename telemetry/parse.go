package telemetry

import (
	"bytes"
	"math"
	"time"
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
// prefixes and units (47k, 4k7, 1u, 4.7µ, 3300mV). Unknown keys are ignored. Each value
// is held to the input range table (Ranges, CheckDeadband): a value outside its range, or
// one that cannot be read, drops only that key, with a reason in Stats.FirstDrops; a
// word that is not key=value, or a key given twice, rejects the whole line. A meta line
// may come again at any time: its fields apply from there on. A '#' line whose first
// word is not key=value is a comment.
//
// A data line is key=value pairs separated by spaces, tabs or commas, in any order:
// t (board time, µs, unsigned; a 32-bit clock that wraps is unwrapped), n (sequence
// number, unsigned), sp and pv (counts, any decimal number), u (drive: 1, 0, -1, or +,
// 0, -). sp and pv are required; once adc_bits is known they must lie within
// 0..2^adc_bits-1, else the line is rejected (ErrCountRange). Other keys (a letter or
// '_' then letters, digits, '_' or '.') are kept as extra channels; keys are
// case-sensitive. An extra that cannot be taken (a 257th distinct name, a key with
// other characters, a value that is not a number) is dropped and counted, and the
// sample is kept.
//
// A header line of column names without '=' ("t,sp,pv,u", "sp pv u", with n and extra
// names too; sp and pv required) makes later lines that start with a number rows of a
// numeric table (CSV or TSV: "1000,512,498,1").
//
// A UTF-8 byte order mark at the start of the first line (spreadsheet exports) is
// skipped. The first line decides capture mode: a line starting with CaptureMagic makes
// every later line a capture record whose host time replaces the one given to Parse;
// board lines ('<') are read as above, '>' and '!' lines become Events. A capture header
// of another version than CaptureVersion is refused (ErrCaptureVersion), and so is
// every later line: a Scanner stops there.
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
	dst    *Sample // where the next sample goes (Scanner.SetSampleDst); nil: sample
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

	// countMax is 2^adc_bits-1 when the meta gave adc_bits (countCheck set): sp and pv
	// beyond it, or below 0, reject their line.
	countMax   float64
	countCheck bool
	// refused is the error of a capture header of an unknown version; every later line
	// is rejected with it.
	refused error
	// drops are the values dropped from the line being parsed, recorded in Stats when
	// the line is kept.
	drops []pendingDrop

	noFast bool // tests: always take the general data line path

	errKind   error
	errField  string
	errText   []byte
	errLineNo int64
}

// Parse reads one line (with or without its "\n" or "\r\n") that has no host receive
// time. The returned Record's Extras slice is reused by the next call.
func (p *Parser) Parse(line []byte) Record { return p.parseLine(line, 0, false) }

// ParseReceived is Parse for a line the host received host ns after the source started
// (a capture's own time replaces it).
func (p *Parser) ParseReceived(line []byte, host int64) Record {
	return p.parseLine(line, host, true)
}

func (p *Parser) parseLine(line []byte, host int64, hasHost bool) Record {
	if n := len(line); n > 0 && line[n-1] == '\n' {
		line = line[:n-1]
	}
	k := p.parse(line, host, hasHost, false)
	r := Record{Kind: k, Meta: p.meta}
	switch k {
	case RecSample:
		r.Sample, r.Extras = *p.out(), p.extras
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
	p.drops = p.drops[:0]
	if p.line == 1 && bytes.HasPrefix(line, utf8BOM) {
		line = line[len(utf8BOM):]
	}
	if p.refused != nil {
		return p.reject(p.refused, "", line[:min(len(line), MaxLineLen)])
	}
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

// parseBoard reads a line the board sent.
func (p *Parser) parseBoard(line []byte, host int64, hasHost bool) RecordKind {
	if len(line) > 0 && (line[0] == 't' || line[0] == 's') && !p.noFast {
		if _, ok := p.fastLine(line, false); ok {
			return p.accept(host, hasHost, line)
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

// utf8BOM is the byte order mark some programs write at the start of a UTF-8 file.
var utf8BOM = []byte{0xEF, 0xBB, 0xBF}

// out returns where the sample of the line being parsed goes: dst when set, else
// sample.
func (p *Parser) out() *Sample {
	if p.dst != nil {
		return p.dst
	}
	return &p.sample
}

// accept completes p.sample and counts it, or rejects line when sp or pv lies outside
// the converter's range. The values dropped from the line are recorded when it is kept.
func (p *Parser) accept(host int64, hasHost bool, line []byte) RecordKind {
	s := p.out()
	if p.countCheck && (s.SP < 0 || s.SP > p.countMax || s.PV < 0 || s.PV > p.countMax) {
		return p.rejectCount(line)
	}
	if len(p.drops) > 0 {
		p.commitDrops(line)
	}
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

// rejectCount rejects a line whose sp or pv lies outside 0..2^adc_bits-1.
func (p *Parser) rejectCount(line []byte) RecordKind {
	line = bytes.TrimRight(line, "\r\n")
	s := p.out()
	field, v := "sp", s.SP
	if s.SP >= 0 && s.SP <= p.countMax {
		field, v = "pv", s.PV
	}
	err := CheckCount(field, v, p.meta.ADCBits)
	return p.reject(&detailError{sentinel: ErrCountRange, cause: err, msg: "telemetry: " + err.Error()}, field, line)
}

// setCountRange updates the sp and pv range after the meta changed.
func (p *Parser) setCountRange() {
	b := p.meta.ADCBits
	p.countCheck = p.meta.Has(FieldADCBits) && b > 0 && b <= 32
	p.countMax = math.Ldexp(1, b) - 1
}

// pendingDrop is a value dropped from the line being parsed: its field is
// line[from:to] (or name when set).
type pendingDrop struct {
	name     string
	from, to int
	err      error
}

// drop notes that the field line[from:to] (or name) of the current line is dropped.
func (p *Parser) drop(name string, from, to int, err error) {
	p.drops = append(p.drops, pendingDrop{name: name, from: from, to: to, err: err})
}

// commitDrops records the values dropped from line, which is kept.
func (p *Parser) commitDrops(line []byte) {
	for _, d := range p.drops {
		p.stats.Dropped++
		if len(p.stats.FirstDrops) >= MaxRejectsKept {
			continue
		}
		name := d.name
		if name == "" {
			name = SanitizeN(line[d.from:d.to], 32)
		}
		text := bytes.TrimRight(line, "\r\n")
		p.stats.FirstDrops = append(p.stats.FirstDrops, &ParseError{Name: p.Name, Line: p.line, Field: name,
			Text: SanitizeN(text, 80), Err: d.err, Dropped: true})
	}
	p.drops = p.drops[:0]
}

// reject counts a rejected line and remembers why. A line with control bytes or invalid
// UTF-8 is reported as ErrBinary whatever else was wrong with it, except a refused
// capture header, which keeps its reason (it ends the scan).
func (p *Parser) reject(err error, field string, line []byte) RecordKind {
	p.drops = p.drops[:0]
	if err != ErrTooLong && err != ErrBinary && (p.refused == nil || err != p.refused) && !printableText(line) {
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
