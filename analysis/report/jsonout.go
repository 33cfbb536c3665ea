package report

import (
	"bytes"
	"encoding/json"
	"io"
	"strconv"
)

// SchemaVersion is the version of the JSON documents caploop writes (the schema file
// testdata/summary.schema.json describes version 1). Adding a field keeps it; removing
// a field or changing a meaning bumps it.
const SchemaVersion = 1

// JSONDigits is the number of significant digits a JSON number keeps.
const JSONDigits = 6

// MarshalJSON returns v as JSON the way every caploop document is written: numbers with
// a fraction or an exponent rounded to JSONDigits significant digits (whole numbers up to
// 16 digits, such as counts, stay exact), '<', '>' and '&' left as they are (no \u003c), and indented by
// two spaces when indent is true. There is no trailing newline.
func MarshalJSON(v any, indent bool) ([]byte, error) {
	var buf bytes.Buffer
	enc := json.NewEncoder(&buf)
	enc.SetEscapeHTML(false)
	if err := enc.Encode(v); err != nil {
		return nil, err
	}
	b := roundNumbers(bytes.TrimRight(buf.Bytes(), "\n"), JSONDigits)
	if !indent {
		return b, nil
	}
	var out bytes.Buffer
	if err := json.Indent(&out, b, "", "  "); err != nil {
		return nil, err
	}
	return out.Bytes(), nil
}

// WriteJSON writes v with MarshalJSON and a newline.
func WriteJSON(w io.Writer, v any, indent bool) error {
	b, err := MarshalJSON(v, indent)
	if err != nil {
		return err
	}
	_, err = w.Write(append(b, '\n'))
	return err
}

// roundNumbers rewrites the number literals of the valid JSON text b that hold a
// fraction or an exponent, rounded to digits significant digits. Strings are copied
// untouched (a digit inside a string is not a number).
func roundNumbers(b []byte, digits int) []byte {
	out := make([]byte, 0, len(b))
	for i := 0; i < len(b); {
		c := b[i]
		switch {
		case c == '"':
			j := i + 1
			for j < len(b) && b[j] != '"' {
				if b[j] == '\\' {
					j++
				}
				j++
			}
			j++ // the closing quote
			out = append(out, b[i:min(j, len(b))]...)
			i = j
		case c == '-' || c >= '0' && c <= '9':
			j := i
			frac := false
			for j < len(b) && bytes.IndexByte([]byte("+-0123456789.eE"), b[j]) >= 0 {
				if b[j] == '.' || b[j] == 'e' || b[j] == 'E' {
					frac = true
				}
				j++
			}
			out = append(out, roundLiteral(b[i:j], frac, digits)...)
			i = j
		default:
			out = append(out, c)
			i++
		}
	}
	return out
}

// roundLiteral rounds one number literal. A whole number written without a fraction is
// returned unchanged (a count stays exact) unless it has more digits than a float64
// holds exactly (above 2^53: a large float written in full); so is a literal that cannot
// be read.
func roundLiteral(lit []byte, frac bool, digits int) []byte {
	if !frac && len(bytes.TrimPrefix(lit, []byte{'-'})) <= 16 {
		return lit
	}
	v, err := strconv.ParseFloat(string(lit), 64)
	if err != nil {
		return lit
	}
	r, err := strconv.ParseFloat(strconv.FormatFloat(v, 'g', digits, 64), 64)
	if err != nil {
		return lit
	}
	if r == 0 {
		return []byte("0")
	}
	// The shortest form encoding/json itself would write for r.
	s, err := json.Marshal(r)
	if err != nil {
		return lit
	}
	return s
}
