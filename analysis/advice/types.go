package advice

// Advice is the advice block of `caploop summary --json` and the output of
// `caploop design --json`. Both commands fill it from one engine.
type Advice struct {
	DeadbandCounts  *int             `json:"deadband_counts"`
	DeadbandWorking *DeadbandWorking `json:"deadband_working"`
	Candidates      []Candidate      `json:"candidates"`
	SamplePeriod    *PeriodAdvice    `json:"sample_period"`
	Topology        []TopologyAdvice `json:"topology"`
	Cautions        []string         `json:"cautions"`
	Notes           []string         `json:"notes"`

	// Added fields.
	Goals   *GoalsUsed   `json:"goals"`   // the goals and assumptions the advice was made for
	Current *Candidate   `json:"current"` // the board's present R and C as the model predicts them (summary only)
	Search  *SearchStats `json:"search"`  // how many pairs were tried, run and verified

	// Problems come first: what must change before any tuning helps (a circuit far too
	// fast for the sample period).
	Problems   []string        `json:"problems"`
	Plant      *PlantUsed      `json:"plant"`      // the one plant the advice assumed
	Tolerances *TolerancesUsed `json:"tolerances"` // the spread of real parts the verdicts use
}

// GoalsUsed are the resolved goals and assumptions, defaults filled in.
type GoalsUsed struct {
	Mode           string  `json:"mode"`
	SupplyV        float64 `json:"supply_v"`
	VrefV          float64 `json:"vref_v"`
	ADCBits        int     `json:"adc_bits"`
	PeriodS        float64 `json:"period_s"`
	LoadOhm        float64 `json:"load_ohm"`
	RipplePPV      float64 `json:"ripple_pp_v"`
	SettleS        float64 `json:"settle_s"`
	SettleTolV     float64 `json:"settle_tolerance_v"` // settled = within this of the setpoint (top candidate)
	StaticErrorV   float64 `json:"static_error_v"`     // 0 = no goal
	PinCurrentA    float64 `json:"pin_current_a"`
	MinPeriodS     float64 `json:"min_period_s"`
	NoiseRMSCounts float64 `json:"noise_rms_counts"`
	NoiseMeasured  bool    `json:"noise_measured"`
	SigmaMultiple  float64 `json:"sigma_multiple"`
	SetpointCounts []int   `json:"setpoints_counts"`
	StepFromCounts int     `json:"full_scale_step_from_counts"`
	StepToCounts   int     `json:"full_scale_step_to_counts"`
	CRatio         float64 `json:"c_ratio"`        // real / marked capacitance used in the design
	RRatio         float64 `json:"r_ratio"`        // real / marked resistance used in the design
	LeakOhm        float64 `json:"leak_ohm"`       // capacitor leakage from the hold droop, 0 = none
	FollowerVBEV   float64 `json:"follower_vbe_v"` // follower drop between node and ADC, 0 = none
	RParts         string  `json:"r_parts"`
	CParts         string  `json:"c_parts"`
	PinCurrentWhy  string  `json:"pin_current_basis"` // where the pin limit comes from
}

// SearchStats say how much work the search did.
type SearchStats struct {
	PairsTried     int `json:"pairs_tried"`     // every R and C pair considered (closed forms)
	PairsSimulated int `json:"pairs_simulated"` // short closed-loop runs
	PairsMeeting   int `json:"pairs_meeting"`   // pairs meeting the goals in the short run
}

// DeadbandWorking shows the arithmetic behind the suggested deadband.
type DeadbandWorking struct {
	StepCounts      float64 `json:"step_counts"`         // largest single step near the used setpoints
	NoiseRMSCounts  float64 `json:"noise_rms_counts"`    // measured (or assumed) ADC noise
	SigmaMultiple   float64 `json:"sigma_multiple"`      // noise margin, in sigmas
	MarginCounts    float64 `json:"margin_counts"`       // sigma multiple * noise
	StaticErrorV    float64 `json:"static_error_v"`      // what the band costs in accuracy
	FromVoltageBand *int    `json:"from_voltage_band"`   // dV * full-scale / vref, when a ripple goal is given
	Rule            string  `json:"rule"`                // the rule of the trade, in words
	VerifiedJumps   int64   `json:"verified_band_jumps"` // band jumps in the checking simulation

	// Added fields.
	Steps         []SetpointStep `json:"steps"`               // the step at each used setpoint
	NarrowerDB    int            `json:"narrower_db"`         // the band one count narrower, for the check below
	NarrowerJumps int64          `json:"narrower_band_jumps"` // band jumps the model shows with that band
}

// Candidate is one R and C pair with what the loop model predicts for it.
type Candidate struct {
	ROhm               float64 `json:"r_ohm"`
	CF                 float64 `json:"c_f"`
	Series             string  `json:"series"`
	DeadbandCounts     int     `json:"deadband_counts"`
	PredictedRipplePPV float64 `json:"predicted_ripple_pp_v"`
	PredictedSettleS   float64 `json:"predicted_settle_s"`
	PinCurrentA        float64 `json:"pin_current_a"`
	VInfSagV           float64 `json:"v_inf_sag_v"`
	Verdict            string  `json:"verdict"` // "meets goals", "ripple too high", ...; then "; " and any rules broken
	Trades             string  `json:"trades"`  // what it trades away

	// Added fields.
	TauS          float64  `json:"tau_s"`                 // charge time constant with the real C and the load
	EffectiveCF   float64  `json:"effective_c_f"`         // the capacitance designed with (marked C times the measured ratio)
	StaticErrorV  float64  `json:"static_error_v"`        // largest mean error over the steady parts, model
	BandJumps     int64    `json:"band_jumps"`            // band jumps in the checking runs (three-state)
	Settled       bool     `json:"settled"`               // both full-scale steps settled within the run
	WindowSamples int      `json:"steady_window_samples"` // samples per setpoint the ripple is measured over
	MeetsGoals    bool     `json:"meets_goals"`           // every numeric goal met in the loop model (worst seed)
	RulesBroken   []string `json:"rules_broken"`          // rules of the trade broken (RuleLoad, ...), empty = none

	// Ripple as it will be measured: max - min of the ADC readings over the last half of the steady part
	// (from the first reading in the band, as a summary measures it) of a hold of the
	// settling time plus ReadWindowSamples (noise and quantisation included), the mean
	// over the checking seeds, and a --max-ripple gate with margin for it.
	ReadRipplePPV     float64           `json:"predicted_read_ripple_pp_v"`
	ReadWindowSamples int               `json:"read_window_samples"`
	SuggestedGateV    float64           `json:"suggested_max_ripple_v"`
	SuggestedGate     string            `json:"suggested_max_ripple"` // as the flag takes it: "40mV"
	Tolerance         *ToleranceVerdict `json:"tolerance"`            // corners and Monte Carlo over the spread of real parts
}

// PeriodAdvice says whether another sample period would serve the goal better.
type PeriodAdvice struct {
	CurrentS   float64 `json:"current_s"`
	SuggestedS float64 `json:"suggested_s"`
	FloorS     float64 `json:"floor_s"` // ADC conversion time
	Reason     string  `json:"reason"`
}

// TopologyAdvice is a change of circuit when no R/C pair can meet the goals.
type TopologyAdvice struct {
	Change             string  `json:"change"`
	PredictedRipplePPV float64 `json:"predicted_ripple_pp_v"`
	PredictedSettleS   float64 `json:"predicted_settle_s"`
	Reason             string  `json:"reason"`

	// Added fields.
	Meets bool `json:"meets_goals"`
}
