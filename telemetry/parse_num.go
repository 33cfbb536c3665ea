package telemetry

import (
	"encoding/binary"
	"math"
	"math/bits"
	"strconv"
	"unsafe"
)

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
