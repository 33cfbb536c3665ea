package telemetry

import "math"

// Drive is the drive the firmware applies after a sample until the next one:
// Charge (pin high through R), Hold (pin floating) or Discharge (pin low through R).
type Drive int8

// Drive values as they appear in u= on a data line (1, 0, -1; or +, 0, -).
const (
	Discharge Drive = -1
	Hold      Drive = 0
	Charge    Drive = 1
)

// String returns "charge", "hold" or "discharge".
func (d Drive) String() string {
	switch d {
	case Charge:
		return "charge"
	case Discharge:
		return "discharge"
	case Hold:
		return "hold"
	}
	return "unknown"
}

// Mode is the controller kind the board reports in mode=.
type Mode uint8

// Controller kinds. ModeUnknown is the zero value: the meta lines did not say.
const (
	ModeUnknown Mode = iota
	TwoState
	ThreeState
)

// String returns the protocol spelling: "two-state", "three-state" or "unknown".
func (m Mode) String() string {
	switch m {
	case TwoState:
		return "two-state"
	case ThreeState:
		return "three-state"
	}
	return "unknown"
}

// MetaField is one known key of a meta line, as a bit in Meta.Set.
type MetaField uint16

// The known meta keys.
const (
	FieldVref     MetaField = 1 << iota // vref, V
	FieldADCBits                        // adc_bits
	FieldPeriod                         // period_us
	FieldMode                           // mode
	FieldDeadband                       // deadband, counts (half-width)
	FieldSupply                         // supply, V
	FieldR                              // r, ohm
	FieldC                              // c, F
	FieldLoad                           // load, ohm
	FieldAccepts                        // accepts: the set keys the board takes
)

// Meta describes the board as its meta lines say. All values are SI (volts, seconds,
// ohms, farads); a field is known only when its bit is in Set, so a zero value means
// "not said", never "zero".
type Meta struct {
	Vref     float64 // ADC reference, V
	ADCBits  int     // ADC resolution, bits
	Period   float64 // sample period, s (the protocol sends period_us)
	Mode     Mode
	Deadband float64 // deadband half-width, counts
	Supply   float64 // pin high level, V
	R        float64 // series resistor, ohm
	C        float64 // capacitor, F
	Load     float64 // load from the node to ground, ohm
	Accepts  string  // the keys `set` takes, comma-separated ("sp,mode,deadband,period_us")
	Set      MetaField
}

// Has reports whether the meta lines gave field f.
func (m Meta) Has(f MetaField) bool { return m.Set&f != 0 }

// Merge returns m updated with every field that n has.
func (m Meta) Merge(n Meta) Meta {
	if n.Has(FieldVref) {
		m.Vref = n.Vref
	}
	if n.Has(FieldADCBits) {
		m.ADCBits = n.ADCBits
	}
	if n.Has(FieldPeriod) {
		m.Period = n.Period
	}
	if n.Has(FieldMode) {
		m.Mode = n.Mode
	}
	if n.Has(FieldDeadband) {
		m.Deadband = n.Deadband
	}
	if n.Has(FieldSupply) {
		m.Supply = n.Supply
	}
	if n.Has(FieldR) {
		m.R = n.R
	}
	if n.Has(FieldC) {
		m.C = n.C
	}
	if n.Has(FieldLoad) {
		m.Load = n.Load
	}
	if n.Has(FieldAccepts) {
		m.Accepts = n.Accepts
	}
	m.Set |= n.Set
	return m
}

// Codes returns the number of ADC codes, 2^adc_bits (1024 for 10 bits), or 0 when unknown.
func (m Meta) Codes() float64 {
	if !m.Has(FieldADCBits) || m.ADCBits <= 0 || m.ADCBits > 32 {
		return 0
	}
	return math.Ldexp(1, m.ADCBits)
}

// LSB returns the volts of one count, vref / 2^adc_bits, or NaN when either is unknown.
func (m Meta) LSB() float64 {
	n := m.Codes()
	if n == 0 || !m.Has(FieldVref) {
		return math.NaN()
	}
	return m.Vref / n
}

// Volts converts counts to volts: counts * vref / 2^adc_bits (NaN when unknown).
func (m Meta) Volts(counts float64) float64 { return counts * m.LSB() }

// SampleFlags say which optional fields of a Sample were present.
type SampleFlags uint8

// Sample flags.
const (
	HasT    SampleFlags = 1 << iota // board time t was on the line
	HasN                            // sequence number n was on the line
	HasU                            // drive u was on the line
	HasHost                         // host receive time is known (live source or capture)
)

// Sample is one data line: the reading the board took and the drive it chose.
type Sample struct {
	Line  int64       // line number in the source (1-based)
	Index int64       // sample number in the stream (0-based), counts accepted samples only
	T     int64       // board time, µs, unwrapped across 2^32 wraps (valid with HasT)
	N     int64       // board sequence number (valid with HasN)
	Host  int64       // host receive time, ns since the source started (valid with HasHost)
	SP    float64     // setpoint, counts
	PV    float64     // measured value, counts
	U     Drive       // drive applied after this sample (valid with HasU)
	Flags SampleFlags // which optional fields are valid
}

// Has reports whether the sample carries the optional field f.
func (s Sample) Has(f SampleFlags) bool { return s.Flags&f != 0 }
