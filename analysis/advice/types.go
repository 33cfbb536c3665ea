package advice

// Advice is the advice block of `caploop summary --json` and the output of
// `caploop design --json`. Both commands fill it from one engine.
type Advice struct {
	DeadbandCounts *int             `json:"deadband_counts"`
	Deadband       *DeadbandWorking `json:"deadband_working"`
	Candidates     []Candidate      `json:"candidates"`
	SamplePeriod   *PeriodAdvice    `json:"sample_period"`
	Topology       []TopologyAdvice `json:"topology"`
	Cautions       []string         `json:"cautions"`
	Notes          []string         `json:"notes"`
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
	Verdict            string  `json:"verdict"` // "meets goals", "ripple too high", ...
	Trades             string  `json:"trades"`  // what it trades away
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
}
