package telemetry

import (
	"math"
	"strconv"
)

// AppendData appends the data line for s to dst, without a line terminator, and returns
// the extended slice. Only the fields s has are written, in the order t, n, sp, pv, u:
//
//	t=123456 n=17 sp=512 pv=498 u=1
//
// Whole counts are written as integers, others in the shortest form that reads back to
// the same float64. The Scanner reads the line back to the same Sample (Line, Index and
// Host aside). AppendData does not allocate when dst has room.
func AppendData(dst []byte, s Sample) []byte {
	if s.Has(HasT) {
		dst = append(dst, "t="...)
		dst = strconv.AppendInt(dst, s.T, 10)
		dst = append(dst, ' ')
	}
	if s.Has(HasN) {
		dst = append(dst, "n="...)
		dst = strconv.AppendInt(dst, s.N, 10)
		dst = append(dst, ' ')
	}
	dst = append(dst, "sp="...)
	dst = appendCount(dst, s.SP)
	dst = append(dst, " pv="...)
	dst = appendCount(dst, s.PV)
	if s.Has(HasU) {
		switch s.U {
		case Charge:
			dst = append(dst, " u=1"...)
		case Discharge:
			dst = append(dst, " u=-1"...)
		default:
			dst = append(dst, " u=0"...)
		}
	}
	return dst
}

// AppendExtras appends " name=value" for each extra channel, for use after AppendData.
func AppendExtras(dst []byte, extras []Extra) []byte {
	for _, e := range extras {
		dst = append(dst, ' ')
		dst = append(dst, e.Name...)
		dst = append(dst, '=')
		dst = appendCount(dst, e.Value)
	}
	return dst
}

func appendCount(dst []byte, v float64) []byte {
	if v == math.Trunc(v) && math.Abs(v) < 1e15 {
		return strconv.AppendInt(dst, int64(v), 10)
	}
	return strconv.AppendFloat(dst, v, 'g', -1, 64)
}

// AppendMeta appends the meta line for the fields in m.Set to dst, without a line
// terminator, and returns the extended slice:
//
//	# vref=5 adc_bits=10 period_us=1000 mode=three-state deadband=21 supply=5 r=47000 c=1e-06 load=1e+06
//
// Values are plain SI numbers (period in microseconds, as the protocol says). With no
// field set the result is just "#", which reads back as a comment.
func AppendMeta(dst []byte, m Meta) []byte {
	dst = append(dst, '#')
	num := func(key string, v float64) {
		dst = append(dst, ' ')
		dst = append(dst, key...)
		dst = append(dst, '=')
		dst = appendCount(dst, v)
	}
	if m.Has(FieldVref) {
		num("vref", m.Vref)
	}
	if m.Has(FieldADCBits) {
		dst = append(dst, " adc_bits="...)
		dst = strconv.AppendInt(dst, int64(m.ADCBits), 10)
	}
	if m.Has(FieldPeriod) {
		// Round to a nanosecond so 1e-3 s prints as 1000, not 1000.0000000000001.
		num("period_us", math.Round(m.Period*1e9)/1e3)
	}
	if m.Has(FieldMode) {
		dst = append(dst, " mode="...)
		dst = append(dst, m.Mode.String()...)
	}
	if m.Has(FieldDeadband) {
		num("deadband", m.Deadband)
	}
	if m.Has(FieldSupply) {
		num("supply", m.Supply)
	}
	if m.Has(FieldR) {
		num("r", m.R)
	}
	if m.Has(FieldC) {
		num("c", m.C)
	}
	if m.Has(FieldLoad) {
		num("load", m.Load)
	}
	if m.Has(FieldAccepts) && m.Accepts != "" {
		dst = append(dst, " accepts="...)
		dst = append(dst, m.Accepts...)
	}
	return dst
}
