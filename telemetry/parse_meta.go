package telemetry

import (
	"bytes"
	"strconv"

	"github.com/caploop/caploop/telemetry/si"
)

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
	for _, w := range words {
		k, v, ok := bytes.Cut(w, []byte{'='})
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
	}
	return 0, nil
}
