package tune

import (
	"errors"
	"fmt"
	"io"
	"strings"
	"time"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/advice"
	"github.com/caploop/caploop/analysis/report"
	"github.com/caploop/caploop/telemetry/si"
	"github.com/caploop/caploop/telemetry/wire"
)

// Conn is the board link tune drives; *wire.Link is one.
type Conn interface {
	Send(cmd string) error
	Batches() <-chan []wire.Line
	Annotate(text string)
	StartedAt() time.Time
}

// Range is the span of volts the output may visit (at the ADC input).
type Range struct {
	Lo, Hi float64 // V
}

// IsZero reports whether no range was given.
func (r Range) IsZero() bool { return r.Lo == 0 && r.Hi == 0 }

// String returns "0.5 V..3 V".
func (r Range) String() string { return si.Format(r.Lo, "V") + ".." + si.Format(r.Hi, "V") }

// ParseRange reads "0.5V..3V" (the unit may be left out on one side, "500mV..3V" works).
func ParseRange(s string) (Range, error) {
	lo, hi, ok := strings.Cut(strings.TrimSpace(s), "..")
	if !ok {
		return Range{}, fmt.Errorf("tune: --range %q: want LOW..HIGH in volts, such as 0.5V..3V", s)
	}
	a, err1 := si.ParseUnit(strings.TrimSpace(lo), "V")
	b, err2 := si.ParseUnit(strings.TrimSpace(hi), "V")
	if err1 != nil || err2 != nil {
		return Range{}, fmt.Errorf("tune: --range %q: want LOW..HIGH in volts, such as 0.5V..3V", s)
	}
	if !(a >= 0) || !(b > a) {
		return Range{}, fmt.Errorf("tune: --range %q: want 0 <= LOW < HIGH", s)
	}
	return Range{a, b}, nil
}

// Options configure Run. The zero value runs with the defaults below and asks nobody.
type Options struct {
	// Range is the span the output may visit; zero means the setpoints in use.
	Range Range
	// Confirm is shown the plan before any `set` and returns true to go on; nil means
	// confirmed (--yes).
	Confirm func(plan string) (bool, error)
	// Progress receives the progress lines (step k of n, time left): standard error.
	Progress io.Writer
	// Guided lets the run go on when the board does not take `set sp`: it says which
	// setpoint to dial in and waits for it (a person at the bench). Without it such a
	// board ends the run with ErrNeedsGuide.
	Guided bool
	// ApplyPeriod sends the advised sample period too (when the board takes period_us
	// and the advice suggests another one). Off by default: the advised deadband and the
	// model's band-jump prediction are for the present period.
	ApplyPeriod bool
	// Goals are the advice goals (ripple, settle...); Setpoints are set by Run.
	Goals advice.Goals
	// Gates are checked on the verify pass (the summary's gates); nil means none.
	Gates *report.Gates
	// MaxCycles bounds the wide-band identify cycles; 0 means 10.
	MaxCycles int
	// AskTimeout bounds the wait for the board's meta lines and first samples (host
	// time); 0 means 10 s. TakeTimeout bounds the wait for a `set sp` to show in the data
	// lines; 0 means 2 s. ReplugWait is how long an unplugged board is waited for; 0
	// means 10 s. GuidedWait is how long a dialled setpoint is waited for; 0 means 2 min.
	AskTimeout, TakeTimeout, ReplugWait, GuidedWait time.Duration
	// Now gives the date written into the header; nil means time.Now.
	Now func() time.Time
}

func (o Options) withDefaults() Options {
	if o.MaxCycles <= 0 {
		o.MaxCycles = 10
	}
	if o.AskTimeout <= 0 {
		o.AskTimeout = 10 * time.Second
	}
	if o.TakeTimeout <= 0 {
		o.TakeTimeout = 2 * time.Second
	}
	if o.ReplugWait <= 0 {
		o.ReplugWait = 10 * time.Second
	}
	if o.GuidedWait <= 0 {
		o.GuidedWait = 2 * time.Minute
	}
	if o.Progress == nil {
		o.Progress = io.Discard
	}
	if o.Now == nil {
		o.Now = time.Now
	}
	return o
}

// Why a run ended early. Run wraps them with the details.
var (
	ErrNoMeta      = errors.New("tune: the board did not describe itself")
	ErrUsage       = errors.New("tune: cannot plan")
	ErrDeclined    = errors.New("tune: the plan was not confirmed")
	ErrOutOfRange  = errors.New("tune: a reading left the range")
	ErrUnplugged   = errors.New("tune: the board was unplugged")
	ErrNeedsGuide  = errors.New("tune: the board does not take set sp")
	ErrQuit        = errors.New("tune: stopped by the user")
	ErrLinkClosed  = errors.New("tune: the port closed")
	ErrUnreachable = errors.New("tune: a setpoint was not reached")
)

// Result is what a run found and did. Fields are nil when the run ended before them.
type Result struct {
	Port      string         `json:"port"`
	Board     BoardInfo      `json:"board"`
	Plan      *Plan          `json:"plan"`
	Steps     []StepLog      `json:"steps"`
	Cycles    int            `json:"identify_cycles"`
	Plant     *PlantInfo     `json:"plant"`
	Advice    *advice.Advice `json:"advice"`
	AdviceErr string         `json:"advice_error,omitempty"`
	// Applied settings (nil: not sent).
	AppliedDeadband *int `json:"applied_deadband_counts"`
	AppliedPeriodUS *int `json:"applied_period_us"`
	// PredictedJumps are the band jumps the loop model shows with the advised band.
	PredictedJumps *int64              `json:"predicted_band_jumps"`
	Compare        *Comparison         `json:"compare"`
	Gates          []report.GateResult `json:"gates,omitempty"`
	GatesFailed    bool                `json:"gates_failed"`
	Restored       bool                `json:"restored"`
	RestoreNote    string              `json:"restore_note"`
	Stopped        string              `json:"stopped,omitempty"` // why the run ended early
	Guided         bool                `json:"guided"`
	Resumed        int                 `json:"resumed"` // re-plugs the run resumed after

	// The summaries of the passes (also in the record folder's JSON).
	Identify *analysis.Summary `json:"-"`
	Before   *analysis.Summary `json:"-"`
	After    *analysis.Summary `json:"-"`
}

// StepLog is one step of the run as it happened.
type StepLog struct {
	Pass      string   `json:"pass"` // "before", "identify", "verify"
	SetpointC int      `json:"setpoint_counts"`
	SetpointV float64  `json:"setpoint_v"`
	ArrivedS  *float64 `json:"arrived_s"` // board time from the command to the first reading in the band
	DwellS    float64  `json:"dwell_s"`   // board time held
	Note      string   `json:"note,omitempty"`
}

// PlantInfo is the identified plant in a few figures.
type PlantInfo struct {
	TauChargeS       *float64    `json:"tau_charge_s"`
	TauChargeCIS     *[2]float64 `json:"tau_charge_ci_s"`
	TauDischargeS    *float64    `json:"tau_discharge_s"`
	TauDischargeCIS  *[2]float64 `json:"tau_discharge_ci_s"`
	TauHoldS         *float64    `json:"tau_hold_s"`
	LoadRatio        *float64    `json:"load_ratio"`
	LoadRatioReason  string      `json:"load_ratio_reason,omitempty"`
	Kind             *string     `json:"kind"`
	NoiseRMSCounts   *float64    `json:"noise_rms_counts"`
	TauChargeSReason string      `json:"tau_charge_s_reason,omitempty"`
}
