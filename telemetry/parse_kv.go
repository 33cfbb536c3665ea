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
