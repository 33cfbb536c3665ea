package telemetry

import (
	"errors"
	"fmt"
	"math"

	"github.com/caploop/caploop/telemetry/si"
)

// ErrOutOfRange is the sentinel of every value refused by the input range table.
var ErrOutOfRange = errors.New("outside its range")

// Range is one row of the input range table that meta lines, `caploop design` and
// `caploop sim` share (the README prints it). A value is accepted when
// Min <= v <= Max (Min < v when MinOpen), and it is finite.
type Range struct {
	Key     string  // protocol key: vref, supply, adc_bits, period_us, r, c, load, deadband
	Name    string  // plain words for messages: "ADC reference"
	Unit    string  // SI unit of the value as checked ("V", "s", "Ω", "F", "" for counts and bits)
	Min     float64 // lowest accepted value
	Max     float64 // highest accepted value (+Inf: no upper limit)
	MinOpen bool    // Min itself is refused (load > 0)
	Note    string  // what else applies inside the range (a caution, a stage needed)
	Scale   string  // what the bounds are, when they follow from another value ("counts of a 10-bit converter")
}

// Ranges is the one input range table. Deadband and the sp/pv readings depend on the ADC
// resolution and are checked by CheckDeadband and CheckCount.
var Ranges = []Range{
	{Key: "vref", Name: "ADC reference", Unit: "V", Min: 0.1, Max: 10},
	{Key: "supply", Name: "supply", Unit: "V", Min: 0.5, Max: 1000,
		Note: "above 5.5 V a logic pin cannot drive it: a switch stage is needed; above 60 V DC the circuit is a hazard"},
	{Key: "adc_bits", Name: "ADC resolution", Unit: "bits", Min: 4, Max: 24,
		Note: "firmware that oversamples declares its effective bits"},
	{Key: "period", Name: "sample period", Unit: "s", Min: 1e-6, Max: 10},
	{Key: "r", Name: "series resistor", Unit: "Ω", Min: 1, Max: 100e6},
	{Key: "c", Name: "capacitor", Unit: "F", Min: 1e-12, Max: 1},
	{Key: "load", Name: "load", Unit: "Ω", Min: 0, Max: math.Inf(1), MinOpen: true},
}

// RangeError says which value was refused and what its range is.
type RangeError struct {
	Key   string
	Value float64
	Range Range
}

func (e *RangeError) Error() string {
	r := e.Range
	v := formatRangeValue(e.Value, r.Unit)
	lo := formatRangeValue(r.Min, r.Unit)
	var msg string
	switch {
	case math.IsInf(r.Max, 1) && r.MinOpen:
		msg = fmt.Sprintf("%s %s is %s: it must be above %s", r.Name, v, ErrOutOfRange, lo)
	case math.IsInf(r.Max, 1):
		msg = fmt.Sprintf("%s %s is %s: it must be at least %s", r.Name, v, ErrOutOfRange, lo)
	default:
		msg = fmt.Sprintf("%s %s is %s %s to %s", r.Name, v, ErrOutOfRange, lo, formatRangeValue(r.Max, r.Unit))
	}
	if r.Scale != "" {
		msg += " (" + r.Scale + ")"
	}
	return msg
}

// Unwrap returns ErrOutOfRange.
func (e *RangeError) Unwrap() error { return ErrOutOfRange }

func formatRangeValue(v float64, unit string) string {
	switch {
	case math.IsNaN(v) || math.IsInf(v, 0):
		return fmt.Sprint(v)
	case unit == "bits":
		return fmt.Sprintf("%g bits", v)
	case unit == "":
		return fmt.Sprintf("%g", v)
	case math.Abs(v) >= 1e15 || (v != 0 && math.Abs(v) < 1e-15):
		return fmt.Sprintf("%g %s", v, unit) // beyond the SI prefixes
	}
	return si.Format(v, unit)
}

// RangeOf returns the row for key and whether there is one.
func RangeOf(key string) (Range, bool) {
	for _, r := range Ranges {
		if r.Key == key {
			return r, true
		}
	}
	return Range{}, false
}

// CheckRange returns nil when v is finite and inside the range of key, else a *RangeError
// (which wraps ErrOutOfRange). A key without a row is accepted.
func CheckRange(key string, v float64) error {
	r, ok := RangeOf(key)
	if !ok {
		return nil
	}
	bad := math.IsNaN(v) || math.IsInf(v, 0) || v > r.Max || v < r.Min || (r.MinOpen && v == r.Min)
	if bad {
		return &RangeError{Key: key, Value: v, Range: r}
	}
	return nil
}

// CheckDeadband checks a deadband half-width in counts: 0 up to a quarter of full scale
// (2^bits / 4). With bits unknown (0) only the sign and finiteness are checked.
func CheckDeadband(db float64, bits int) error {
	r := Range{Key: "deadband", Name: "deadband", Unit: "", Min: 0, Max: math.Inf(1)}
	if bits > 0 {
		r.Max = math.Ldexp(1, bits) / 4
		r.Scale = fmt.Sprintf("counts, a quarter of the %d-bit full scale at most", bits)
	}
	if math.IsNaN(db) || math.IsInf(db, 0) || db < r.Min || db > r.Max {
		return &RangeError{Key: "deadband", Value: db, Range: r}
	}
	return nil
}

// CheckCount checks a setpoint or reading in counts: 0 to 2^bits - 1. With bits unknown
// (0) only finiteness and sign are checked.
func CheckCount(name string, v float64, bits int) error {
	r := Range{Key: name, Name: name, Unit: "", Min: 0, Max: math.Inf(1)}
	if bits > 0 {
		r.Max = math.Ldexp(1, bits) - 1
		r.Scale = fmt.Sprintf("counts of a %d-bit converter", bits)
	}
	if math.IsNaN(v) || math.IsInf(v, 0) || v < r.Min || v > r.Max {
		return &RangeError{Key: name, Value: v, Range: r}
	}
	return nil
}
