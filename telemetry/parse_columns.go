package telemetry

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
	skip bool   // a colExtra past the 256 names: read, then dropped from every row
}

var fieldNames = [...]string{colExtra: "", colT: "t", colN: "n", colSP: "sp", colPV: "pv", colU: "u"}

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
				c.name, c.skip = string(name), true
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
	s := p.out()
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
			v, i, ok = parseNum(line, i)
			switch {
			case !ok:
				p.drop(c.name, 0, 0, ErrBadNumber)
				ok = true
			case c.skip:
				p.drop(c.name, 0, 0, ErrTooManyKeys)
			default:
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
	if len(p.drops) > 0 && !printableText(line) {
		return p.reject(ErrBinary, "", line)
	}
	return p.accept(host, hasHost, line)
}
