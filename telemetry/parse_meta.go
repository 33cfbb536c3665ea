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
	var said MetaField // keys given on this line, dropped or not
	list := false      // after accepts=, the words without '=' continue its list
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
		list = f == FieldAccepts
		if f == 0 {
			continue
		}
		if said&f != 0 {
			return p.reject(ErrDuplicateKey, key, line)
		}
		said |= f
		if err != nil {
			p.drop(key, 0, 0, err)
			continue
		}
		m.Set |= f
	}
	if !printableText(line) {
		return p.reject(ErrBinary, "", line)
	}
	// The deadband's range depends on the ADC resolution, from this line or before: a
	// deadband said before the resolution is checked again when the resolution comes.
	merged := p.meta.Merge(m)
	bits := 0
	if merged.Has(FieldADCBits) {
		bits = merged.ADCBits
	}
	if merged.Has(FieldDeadband) {
		if err := CheckDeadband(merged.Deadband, bits); err != nil {
			p.drop("deadband", 0, 0, err)
			m.Set &^= FieldDeadband
			merged.Set &^= FieldDeadband
			merged.Deadband = 0
		}
	}
	p.delta = Meta{}.Merge(m) // without the values of dropped keys
	p.meta = merged
	p.setCountRange()
	p.commitDrops(line)
	p.stats.Metas++
	return RecMeta
}

// setField stores one meta key=value in m and returns its field bit (0 for an unknown
// key, which is ignored so newer firmware can send more). The error is ErrBadMeta for a
// value that cannot be read, or a *RangeError for one outside the input range table.
func (m *Meta) setField(key, val string) (MetaField, error) {
	num := func(unit, rangeKey string, scale float64) (float64, error) {
		v, err := si.ParseUnit(val, unit)
		if err != nil {
			return 0, ErrBadMeta
		}
		v *= scale
		return v, CheckRange(rangeKey, v)
	}
	var err error
	switch key {
	case "vref":
		m.Vref, err = num("V", "vref", 1)
		return FieldVref, err
	case "adc_bits":
		b, aerr := strconv.Atoi(val)
		if aerr != nil {
			return FieldADCBits, ErrBadMeta
		}
		m.ADCBits = b
		return FieldADCBits, CheckRange("adc_bits", float64(b))
	case "period_us":
		m.Period, err = num("", "period", 1e-6)
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
		if err != nil {
			return FieldDeadband, ErrBadMeta
		}
		return FieldDeadband, CheckDeadband(m.Deadband, 0)
	case "supply":
		m.Supply, err = num("V", "supply", 1)
		return FieldSupply, err
	case "r":
		m.R, err = num("Ω", "r", 1)
		return FieldR, err
	case "c":
		m.C, err = num("F", "c", 1)
		return FieldC, err
	case "load":
		m.Load, err = num("Ω", "load", 1)
		return FieldLoad, err
	case "accepts":
		if !m.addAccept([]byte(val)) {
			err = ErrBadMeta
		}
		return FieldAccepts, err
	}
	return 0, nil
}
