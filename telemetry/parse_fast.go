package telemetry

import "encoding/binary"

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
	s := p.out()
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
