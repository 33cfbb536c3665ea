package telemetry

import "bytes"

// Byte classes of the protocol: separators, digits and key characters.

func isSep(c byte) bool { return c == ' ' || c == ',' || c == '\t' }

func isDigit(c byte) bool { return c-'0' <= 9 }

func isKeyStart(c byte) bool {
	return c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c == '_'
}

func isKeyByte(c byte) bool { return isKeyStart(c) || isDigit(c) || c == '.' }

// parseKV reads a key=value data line from line[i:]. It is the hot path.
func (p *Parser) parseKV(line []byte, i int, host int64, hasHost bool) RecordKind {
	// Fill p.sample in place: Sample is valid only for RecSample, so a rejected line
	// may leave it half written.
	s := p.out()
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
			var k RecordKind
			if i, k, ok = p.parseExtra(line, i); ok {
				return k
			}
		}
	}
	if len(p.drops) > 0 && !printableText(line) {
		return p.reject(ErrBinary, "", line)
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
	return p.accept(host, hasHost, line)
}

// parseExtra reads one extra channel word ("temp=21.5") at line[i:] into p.extras and
// returns the index after it. An extra the parser cannot take (a key with other
// characters, a 257th distinct name, a value that is not a number) is dropped with a
// reason and the line read on. It returns the index after the word, or done and the
// kind of the line when that is decided here (rejected, or a column header).
func (p *Parser) parseExtra(line []byte, i int) (next int, k RecordKind, done bool) {
	n := len(line)
	k0 := i
	for i < n && isKeyByte(line[i]) {
		i++
	}
	if !isKeyStart(line[k0]) || (i < n && line[i] != '=' && !isSep(line[i])) {
		// A key with other characters: dropped when the word is key=value.
		end := i
		for end < n && !isSep(line[end]) {
			end++
		}
		eq := bytes.IndexByte(line[k0:end], '=')
		if eq <= 0 {
			return i, p.reject(ErrBadKey, "", line), true
		}
		p.drop("", k0, k0+eq, ErrBadKey)
		return end, 0, false
	}
	if i >= n || line[i] != '=' {
		if bytes.IndexByte(line, '=') < 0 {
			return i, p.parseHeader(line, k0), true
		}
		return i, p.reject(ErrSyntax, "", line), true
	}
	name, known := p.intern(line[k0:i])
	if known {
		for _, e := range p.extras {
			if e.Name == name {
				p.stats.Partial++
				return i, p.reject(ErrDuplicateKey, name, line), true
			}
		}
	}
	v, j, ok := parseNum(line, i+1)
	switch {
	case !ok && glued(line):
		return j, p.rejectValue(ErrBadNumber, name, line), true
	case !ok:
		p.drop(name, k0, i, ErrBadNumber)
	case !known:
		p.drop("", k0, i, ErrTooManyKeys)
	default:
		p.extras = append(p.extras, Extra{Name: name, Value: v})
	}
	return j, 0, false
}
