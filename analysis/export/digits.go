package export

import (
	"math"
	"strconv"
)

// digitPairs holds "00" to "99", for writing two digits at a time.
const digitPairs = "00010203040506070809101112131415161718192021222324252627282930313233343536373839" +
	"40414243444546474849505152535455565758596061626364656667686970717273747576777879" +
	"8081828384858687888990919293949596979899"

// appendFixed appends v / 10^dec with exactly dec decimals (0 < dec <= 18):
// appendFixed(b, -1234567, 6) appends "-1.234567". |v| must be below 10^18.
func appendFixed(dst []byte, v int64, dec int) []byte {
	if v < 0 {
		dst = append(dst, '-')
		v = -v
	}
	var b [40]byte
	i := len(b)
	u := uint64(v)
	k := dec
	for ; k >= 2; k -= 2 {
		d := u % 100 * 2
		u /= 100
		i -= 2
		b[i], b[i+1] = digitPairs[d], digitPairs[d+1]
	}
	if k == 1 {
		i--
		b[i] = byte('0' + u%10)
		u /= 10
	}
	i--
	b[i] = '.'
	for u >= 100 {
		d := u % 100 * 2
		u /= 100
		i -= 2
		b[i], b[i+1] = digitPairs[d], digitPairs[d+1]
	}
	if u >= 10 {
		i -= 2
		b[i], b[i+1] = digitPairs[u*2], digitPairs[u*2+1]
	} else {
		i--
		b[i] = byte('0' + u)
	}
	return append(dst, b[i:]...)
}

// pow10f holds 10^k for k = 0..6, exact in float64.
var pow10f = [...]float64{1, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6}

// appendCounts appends a number read from the board (a count, an extra channel): a whole
// number as an integer ("512"), one with at most 6 decimals in the fewest decimals that
// read back to exactly v ("511.5", "21.25"), anything else in strconv's shortest exact
// form ("1e-07"). The decimals are checked exactly: for |x| < 2^53, x / 10^d is the
// correctly rounded quotient, which is what reading "x with d decimals" gives.
func appendCounts(dst []byte, v float64) []byte {
	if v == math.Trunc(v) && math.Abs(v) < 1e15 {
		return appendInt(dst, int64(v))
	}
	for d := 1; d < len(pow10f); d++ {
		x := math.Round(v * pow10f[d])
		if math.Abs(x) >= 1<<53 {
			break
		}
		if x/pow10f[d] == v {
			return appendFixed(dst, int64(x), d)
		}
	}
	return strconv.AppendFloat(dst, v, 'g', -1, 64)
}

// appendScaled appends v rounded to dec decimals (scale = 10^dec), as appendFixed does,
// or in the shortest exact form when v is too large for that.
func appendScaled(dst []byte, v float64, dec int, scale float64) []byte {
	x := v * scale
	if math.Abs(x) < 1e17 {
		return appendFixed(dst, int64(math.Round(x)), dec)
	}
	return strconv.AppendFloat(dst, v, 'g', -1, 64)
}

// voltsDecimals returns the decimals the volts columns carry for an ADC step of lsb
// volts: 6 (µV) as long as that keeps a tenth of a step, more for finer converters, at
// most 12; always even (appendFixed writes digit pairs).
func voltsDecimals(lsb float64) int {
	d := 6
	for d < 12 && math.Pow(10, -float64(d)) > lsb/10 {
		d++
	}
	return d
}
