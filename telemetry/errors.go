package telemetry

import (
	"errors"
	"strconv"
)

// Sentinel errors say what kind of fault a rejected line had; a *ParseError wraps one
// of them and says where. Test with errors.Is.
var (
	ErrBadNumber    = errors.New("telemetry: bad number")
	ErrBadDrive     = errors.New("telemetry: bad drive (want 1, 0, -1, +, -)")
	ErrFieldCount   = errors.New("telemetry: wrong number of fields")
	ErrMissingField = errors.New("telemetry: missing field")
	ErrTooLong      = errors.New("telemetry: line too long")
	ErrBinary       = errors.New("telemetry: binary or control bytes")
	ErrBadMeta      = errors.New("telemetry: bad meta value")
	ErrDuplicateKey = errors.New("telemetry: duplicate key")
	ErrSyntax       = errors.New("telemetry: not a key=value data line")
	ErrBadKey       = errors.New("telemetry: bad key")
	ErrNoHeader     = errors.New("telemetry: numeric line before a column header")
	ErrTooManyKeys  = errors.New("telemetry: too many distinct extra channels")
	ErrBadCapture   = errors.New("telemetry: bad capture record")
	ErrCutShort     = errors.New("telemetry: line cut short by a read error")
	// ErrCountRange: sp or pv outside 0..2^adc_bits-1 (the whole line is rejected).
	ErrCountRange = errors.New("telemetry: reading outside the converter's range")
	// ErrCaptureVersion: a capture header of a format version this package cannot read.
	// It stops a Scanner: nothing in an unknown format is read as data.
	ErrCaptureVersion = errors.New("telemetry: unknown capture format version")
)

// reasons lists the sentinels in the order of Stats.ByReason.
var reasons = [numReasons]error{
	ErrBadNumber, ErrBadDrive, ErrFieldCount, ErrMissingField, ErrTooLong, ErrBinary, ErrBadMeta,
	ErrDuplicateKey, ErrSyntax, ErrBadKey, ErrNoHeader, ErrTooManyKeys, ErrBadCapture, ErrCutShort,
	ErrCountRange, ErrCaptureVersion,
}

const numReasons = 16

// reasonIndex returns the index of err's sentinel in reasons, or -1.
func reasonIndex(err error) int {
	for i, r := range reasons {
		if r == err {
			return i
		}
	}
	for i, r := range reasons {
		if errors.Is(err, r) {
			return i
		}
	}
	return -1
}

// detailError is one case of a sentinel, with a message that says the value and its
// range (or version); errors.Is finds both the sentinel and the cause.
type detailError struct {
	sentinel error
	cause    error // a *RangeError, or nil
	msg      string
}

func (e *detailError) Error() string   { return e.msg }
func (e *detailError) Unwrap() []error { return []error{e.sentinel, e.cause} }

// namesField reports that the message already names the field at fault.
func (e *detailError) namesField() {}

// trimPrefix drops the package prefix of an error message.
func trimPrefix(msg string) string {
	if len(msg) > len("telemetry: ") && msg[:len("telemetry: ")] == "telemetry: " {
		return msg[len("telemetry: "):]
	}
	return msg
}

// RejectCount is the number of rejected lines for one reason.
type RejectCount struct {
	Err   error // one of the Err* sentinels
	Count int64
}

// Rejects returns the number of rejected lines whose reason is err (an Err* sentinel).
func (st Stats) Rejects(err error) int64 {
	if i := reasonIndex(err); i >= 0 {
		return st.ByReason[i]
	}
	return 0
}

// RejectReasons returns the reasons with at least one rejected line, with their counts,
// in a fixed order.
func (st Stats) RejectReasons() []RejectCount {
	var out []RejectCount
	for i, c := range st.ByReason {
		if c > 0 {
			out = append(out, RejectCount{reasons[i], c})
		}
	}
	return out
}

// ParseError is a rejected line, or a value dropped from a line that was kept: the file
// name, the 1-based line number, the field at fault (empty when the whole line is), the
// line as sanitised text (cut to about 80 bytes) and the error that says why (an Err*
// sentinel, or an error that wraps one and says the value and its range).
type ParseError struct {
	Name    string // file name as given to the Scanner or Parser ("" when unknown)
	Line    int64  // 1-based line number
	Field   string // key or column at fault, "" for the whole line (sanitised)
	Text    string // the offending line, sanitised and cut
	Err     error  // one of the Err* sentinels, or an error wrapping one
	Dropped bool   // only Field was dropped; the rest of the line was read
}

// Error returns "name:line: reason", with the field and the sanitised text when known.
// A dropped value reads "name:line: telemetry: field dropped: reason".
func (e *ParseError) Error() string {
	var b []byte
	if e.Name != "" {
		b = append(b, SanitizeN([]byte(e.Name), 200)...) // a file name is outside text
		b = append(b, ':')
	} else {
		b = append(b, "line "...)
	}
	b = strconv.AppendInt(b, e.Line, 10)
	b = append(b, ": "...)
	_, named := e.Err.(interface{ namesField() })
	switch {
	case e.Dropped:
		b = append(b, "telemetry: "...)
		b = append(b, e.Field...)
		b = append(b, " dropped: "...)
		if e.Err != nil {
			b = append(b, trimPrefix(e.Err.Error())...)
		}
		named = true
	case e.Err != nil:
		b = append(b, e.Err.Error()...)
	default:
		b = append(b, "telemetry: rejected"...)
	}
	if e.Field != "" && !named {
		b = append(b, " in "...)
		b = append(b, e.Field...)
	}
	if e.Text != "" {
		b = append(b, ": \""...)
		b = append(b, e.Text...) // already sanitised
		b = append(b, '"')
	}
	return string(b)
}

// Unwrap returns the sentinel, so errors.Is(err, ErrBadNumber) works.
func (e *ParseError) Unwrap() error { return e.Err }
