package loop

import "github.com/caploop/caploop/telemetry"

// Drive is the state of the charging pin for one sample period: the protocol's own
// telemetry.Drive (one word for one concept, from the line protocol down to the plant).
type Drive = telemetry.Drive

// Drive values, the same numbers as u= in the line protocol.
const (
	Discharge = telemetry.Discharge
	Hold      = telemetry.Hold
	Charge    = telemetry.Charge
)

// Kind is the drive law of the model: the closed-loop controllers a board announces as
// telemetry.Mode (TwoState, ThreeState) and the open-loop drives the model also runs.
type Kind uint8

// Controller kinds.
const (
	TwoState    Kind = iota // e < 0: charge, else discharge
	ThreeState              // e > db: discharge; e < -db: charge; else hold
	OpenDuty                // open loop: square wave, Duty of CycleSamples periods charging, rest discharging
	OpenPattern             // open loop: Pattern repeats
	OpenConst               // open loop: StepDrive for ever (a step response)
)

// Circuit is the switched RC network. Zero resistances and loads mean "absent".
type Circuit struct {
	Supply     float64  // pin high level, V
	R          float64  // series resistor on the charge path, ohm
	RDischarge float64  // series resistor on the discharge path, ohm; 0 = same as R
	RPin       float64  // pin output resistance, added to both paths, ohm
	C          float64  // capacitor, F
	Load       float64  // resistive load from the node to ground, ohm; 0 = none
	Leak       float64  // capacitor leakage resistance, ohm; 0 = none
	Follower   Follower // optional emitter follower between the node and the sense point
}

// Follower is an NPN emitter follower: base on the capacitor node, emitter to RE to
// ground; the ADC reads the emitter. Zero RE means no follower (the ADC reads the node).
type Follower struct {
	VBE  float64 // base-emitter drop, V (about 0.65 V)
	Beta float64 // current gain (100 if zero)
	RE   float64 // emitter resistor, ohm
}

// ADC is the converter that reads the sense point.
type ADC struct {
	Vref      float64 // nominal reference, V
	VrefError float64 // relative error of the real reference: 0.01 means 1 % high
	Bits      int     // resolution
	Gain      float64 // relative gain error (0 = ideal)
	Offset    float64 // offset error, counts
	Noise     float64 // Gaussian noise at the input, rms counts (0 = none)
}

// Controller picks the drive after each sample.
type Controller struct {
	Kind         Kind
	Deadband     int     // three-state half-width, counts
	Duty         float64 // OpenDuty: fraction of CycleSamples charging
	CycleSamples int     // OpenDuty: square-wave period in samples
	Pattern      []Drive // OpenPattern
	StepDrive    Drive   // OpenConst
}

// Config is everything one simulation needs. All values SI.
type Config struct {
	Circuit    Circuit
	ADC        ADC
	Controller Controller
	Period     float64 // sample period T, s
	Jitter     float64 // rms jitter of the sample instants, s (0 = none)
	DropRate   float64 // probability that a sample is lost from the telemetry (control still runs)
	Seed       uint64  // seeds noise, jitter and drops; the same seed gives the same run
	V0         float64 // capacitor voltage at t = 0, V
}

// Sample is one sample of a simulation: what the board read and the drive it chose.
type Sample struct {
	K       int64   // sample index
	T       float64 // time of the sample instant, s
	V       float64 // true capacitor voltage at the sample instant, V
	Sense   float64 // voltage at the ADC input (after the follower), V
	PV      int     // ADC code read
	SP      int     // setpoint, counts
	U       Drive   // drive chosen after this sample, held until the next
	Dropped bool    // the sample was lost from the telemetry
}
