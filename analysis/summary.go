package analysis

// Summary is what one pass over a capture yields: the JSON document of
// `caploop summary --json` and the figures the live screen shows. Pointers are null in
// JSON where a figure does not apply or could not be measured; every key carries its
// unit as a suffix (_s, _v, _hz, _counts, _ohm, _f).
type Summary struct {
	Source        string   `json:"source"`
	Samples       int64    `json:"samples"`
	RejectedLines int64    `json:"rejected_lines"`
	FirstRejects  []Reject `json:"first_rejects"`
	// DroppedValues counts the values dropped from lines that were otherwise read (a meta
	// value outside the input range table, an extra channel that could not be taken);
	// FirstDrops says where and why for the first ones.
	DroppedValues int64         `json:"dropped_values"`
	FirstDrops    []Reject      `json:"first_drops"`
	DurationS     float64       `json:"duration_s"`
	SamplePeriodS *float64      `json:"sample_period_s"`
	PeriodFrom    string        `json:"sample_period_from"` // "t", "period_us", "host" or ""
	JitterS       *float64      `json:"jitter_s"`
	Gaps          int64         `json:"gaps"`           // missing samples seen from t or n
	InferredDrive bool          `json:"inferred_drive"` // u was missing and inferred from the rule
	Board         Board         `json:"board"`
	Plant         Plant         `json:"plant"`
	Segments      []Segment     `json:"segments"`
	Steps         []StepFigures `json:"steps"`
	// Tracking holds the figures of the samples taken while the setpoint moved in small,
	// frequent steps; null when it never did.
	Tracking    *Tracking    `json:"tracking"`
	Diagnostics []Diagnostic `json:"diagnostics"`
	Traces      *Traces      `json:"-"` // bounded waveforms for plots (report, screen)

	// SegmentsOmitted and StepsOmitted count segments and steps seen but not listed,
	// because the lists are bounded (Options.MaxSegments).
	SegmentsOmitted int64 `json:"segments_omitted"`
	StepsOmitted    int64 `json:"steps_omitted"`

	// Events are what happened to the stream besides samples (resets, gaps, unplugs,
	// settings changed by a meta line, lines sent to the board, notes), in order; each
	// but a note ends the open segment, without a step. Bounded: EventsOmitted counts
	// the rest.
	Events        []Event `json:"events"`
	EventsOmitted int64   `json:"events_omitted"`
	// Glitches are readings the identified plant cannot reach in the periods since the
	// last good one (6 sigma of noise aside); they are left out of the level figures
	// and the plant fit, while the drive that followed them counts.
	Glitches LineList `json:"glitches"`
	// SuspectLines are data lines lacking a field (t, n or u) that all but 1 % of the
	// data lines carry.
	SuspectLines LineList `json:"suspect_lines"`
}

// Reject is one rejected line: where and why. Text is already sanitised.
type Reject struct {
	Line   int64  `json:"line"`
	Reason string `json:"reason"`
}

// Board is what the meta lines said (last value of each field), null when not said.
type Board struct {
	VrefV          *float64 `json:"vref_v"`
	ADCBits        *int     `json:"adc_bits"`
	Mode           string   `json:"mode"`
	DeadbandCounts *float64 `json:"deadband_counts"`
	SupplyV        *float64 `json:"supply_v"`
	ROhm           *float64 `json:"r_ohm"`
	CF             *float64 `json:"c_f"`
	LoadOhm        *float64 `json:"load_ohm"`
}

// Plant is the identified circuit: the real RC, not the one on the parts list.
// The _ci fields are 95 % confidence intervals [low, high]. EffectiveROhm and
// EffectiveCF solve tau = C (R || R_L) for R (with the meta C) or C (with the meta R),
// R_L being the meta load or else the identified one (none when neither is known).
type Plant struct {
	TauChargeS      *float64    `json:"tau_charge_s"`
	TauChargeCIS    *[2]float64 `json:"tau_charge_ci_s"`
	TauDischargeS   *float64    `json:"tau_discharge_s"`
	TauDischargeCIS *[2]float64 `json:"tau_discharge_ci_s"`
	VHighV          *float64    `json:"v_high_v"`
	VHighCIV        *[2]float64 `json:"v_high_ci_v"`
	VLowV           *float64    `json:"v_low_v"`
	VLowCIV         *[2]float64 `json:"v_low_ci_v"`
	TauHoldS        *float64    `json:"tau_hold_s"`
	TauHoldCIS      *[2]float64 `json:"tau_hold_ci_s"`
	NoiseRMSCounts  *float64    `json:"noise_rms_counts"`
	MissingCodes    []int       `json:"missing_codes"`
	StuckCodes      []int       `json:"stuck_codes"`
	EffectiveROhm   *float64    `json:"effective_r_ohm"` // from tau and the meta C
	EffectiveCF     *float64    `json:"effective_c_f"`   // from tau and the meta R
	LoadOhm         *float64    `json:"load_ohm"`        // R_load from LoadRatio and the meta R
	SenseDropV      *float64    `json:"sense_drop_v"`    // a buffer's drop between the node and the sense point

	// The same figures in samples and counts, which need neither the sample period nor
	// the ADC scale (null only when there is no fit).
	TauChargeSamples    *float64 `json:"tau_charge_samples"`
	TauDischargeSamples *float64 `json:"tau_discharge_samples"`
	TauHoldSamples      *float64 `json:"tau_hold_samples"`
	VHighCounts         *float64 `json:"v_high_counts"`
	VLowCounts          *float64 `json:"v_low_counts"`

	// ChargePairs, DischargePairs and HoldPairs count the sample pairs each fit used.
	ChargePairs    int64 `json:"charge_pairs"`
	DischargePairs int64 `json:"discharge_pairs"`
	HoldPairs      int64 `json:"hold_pairs"`

	// Kind says what explains the top of the range (see decidePlant): "none", "load"
	// (a resistive load on the node) or "buffer" (a follower: it drops the sensed
	// level and loads the node); null when the data cannot tell.
	Kind       *string `json:"kind"`
	KindReason string  `json:"kind_reason,omitempty"`
	// LoadRatio is R_load / R, from the hold droop (tau_hold / tau_charge - 1, no
	// supply needed) or, without a hold, from v_high and the supply; LoadFrom says
	// which ("hold_droop" or "v_high"). LoadOhm is LoadRatio times the meta R.
	LoadRatio       *float64    `json:"load_ratio"`
	LoadRatioCI     *[2]float64 `json:"load_ratio_ci"`
	LoadRatioReason string      `json:"load_ratio_reason,omitempty"`
	LoadOhmCI       *[2]float64 `json:"load_ohm_ci"`
	LoadOhmReason   string      `json:"load_ohm_reason,omitempty"`
	LoadFrom        string      `json:"load_from,omitempty"`
	// SenseDropV's interval and its source: "v_low" (the discharge heads below ground,
	// no supply needed) or "v_high" (what the supply and the load leave unexplained).
	SenseDropCIV     *[2]float64 `json:"sense_drop_ci_v"`
	SenseDropVReason string      `json:"sense_drop_v_reason,omitempty"`
	SenseDropFrom    string      `json:"sense_drop_from,omitempty"`
	// SupplyTol is the relative supply tolerance a drop of v_high had to exceed.
	SupplyTol float64 `json:"supply_tol"`

	// Reasons of the null figures above (omitted when the figure is there).
	TauChargeSReason          string `json:"tau_charge_s_reason,omitempty"`
	TauChargeSamplesReason    string `json:"tau_charge_samples_reason,omitempty"`
	TauDischargeSReason       string `json:"tau_discharge_s_reason,omitempty"`
	TauDischargeSamplesReason string `json:"tau_discharge_samples_reason,omitempty"`
	TauHoldSReason            string `json:"tau_hold_s_reason,omitempty"`
	TauHoldSamplesReason      string `json:"tau_hold_samples_reason,omitempty"`
	VHighVReason              string `json:"v_high_v_reason,omitempty"`
	VHighCountsReason         string `json:"v_high_counts_reason,omitempty"`
	VLowVReason               string `json:"v_low_v_reason,omitempty"`
	VLowCountsReason          string `json:"v_low_counts_reason,omitempty"`
	NoiseRMSCountsReason      string `json:"noise_rms_counts_reason,omitempty"`
	EffectiveROhmReason       string `json:"effective_r_ohm_reason,omitempty"`
	EffectiveCFReason         string `json:"effective_c_f_reason,omitempty"`

	notes []string // disagreements found while deciding the kind (diagnostics)
	// loadEstimate is the load's central value, ohm, kept for the advice when its
	// interval is too wide to show it (0 = none).
	loadEstimate float64
	// dropEstimate is a buffer's sense drop, V, its central value kept for the advice
	// when its interval is too wide to show it as a figure (0 = none).
	dropEstimate float64
}

// Segment holds the figures of one run of samples with one setpoint, over its steady part.
// A change of the deadband on the same setpoint (tuning on the bench) also starts a new
// segment, without a step, so that each segment ran under one band.
type Segment struct {
	SetpointCounts    float64  `json:"setpoint_counts"`
	SetpointV         *float64 `json:"setpoint_v"`
	StartS            float64  `json:"start_s"`
	EndS              float64  `json:"end_s"`
	SteadyStartS      *float64 `json:"steady_start_s"`
	SteadySamples     int64    `json:"steady_samples"`
	MeanErrorV        *float64 `json:"mean_error_v"`
	MeanErrorCounts   *float64 `json:"mean_error_counts"`
	RipplePPV         *float64 `json:"ripple_pp_v"`
	RipplePPCounts    *float64 `json:"ripple_pp_counts"`
	RippleRobustPPV   *float64 `json:"ripple_robust_pp_v"`
	RippleRMSV        *float64 `json:"ripple_rms_v"`
	RippleRMSCounts   *float64 `json:"ripple_rms_counts"`
	DutyCharge        *float64 `json:"duty_charge"`
	DutyHold          *float64 `json:"duty_hold"`
	DutyDischarge     *float64 `json:"duty_discharge"`
	LimitCyclePeriodS *float64 `json:"limit_cycle_period_s"`
	SwitchingHz       *float64 `json:"switching_hz"`
	RippleFreqHz      *float64 `json:"ripple_freq_hz"`
	DeadbandEntries   int64    `json:"deadband_entries"`
	DeadbandExits     int64    `json:"deadband_exits"`
	BandJumps         int64    `json:"band_jumps"`
	Unreachable       bool     `json:"unreachable"`
	DeadbandCounts    *float64 `json:"deadband_counts"` // the band in force during the segment

	// RippleSignalPPV is the ripple with the ADC noise averaged out: the peak-to-peak of
	// the mean waveform of the limit cycle, aligned on each charge onset. Null when the
	// steady part holds fewer than 8 cycles.
	RippleSignalPPV *float64 `json:"ripple_signal_pp_v"`
	// LimitCycleDriveS is the cross-check of the limit-cycle period from the drive pattern:
	// the mean interval between charge onsets in the steady part.
	LimitCycleDriveS *float64 `json:"limit_cycle_drive_s"`
	// NoiseExits counts deadband exits on the side the hold droop cannot reach (upward
	// when the hold droops downward): exits caused by noise, not by droop.
	NoiseExits int64 `json:"noise_exits"`
	// LimitCyclePeriodSamples is the limit-cycle period in samples (known without the
	// sample period).
	LimitCyclePeriodSamples *float64 `json:"limit_cycle_period_samples"`
	// Settled says the steady part was reached (the error changed sign or entered the band).
	Settled bool `json:"settled"`
	// Tracking says the segment was opened by a tracking move (see Tracking): one of the
	// short segments of a moving setpoint (absent from JSON when false).
	Tracking bool `json:"tracking,omitempty"`

	// LimitCyclePeriodSReason says why the limit cycle is null (then also its _samples
	// twin and the ripple frequency).
	LimitCyclePeriodSReason string `json:"limit_cycle_period_s_reason,omitempty"`
	// PatternPeriodS is the exact repeat of the drive pattern over the last steady
	// samples kept, PatternOnsets the charge onsets (discharge onsets for a
	// discharge-only cycle) in one repeat: the pattern + - + - - repeats every 5
	// samples with 2 onsets, a limit cycle of 2.5 samples.
	PatternPeriodS       *float64 `json:"pattern_period_s"`
	PatternPeriodSamples *float64 `json:"pattern_period_samples"`
	PatternOnsets        *int     `json:"pattern_onsets"`
	PatternPeriodSReason string   `json:"pattern_period_s_reason,omitempty"`
	// Rests says the drive did not cycle in the steady part (it never switched, or at
	// most once into each drive): no limit cycle; the level then moves only by the hold
	// droop, HoldDroopVPerS (positive when the level falls), at the segment's mean level.
	// An unreachable setpoint's loop rests in charge (discharge below the lowest level)
	// where its level stops drifting: its steady part starts there, its node ripple is 0
	// and the hold droop is null with that reason.
	Rests                bool     `json:"rests"`
	HoldDroopVPerS       *float64 `json:"hold_droop_v_per_s"`
	HoldDroopVPerSReason string   `json:"hold_droop_v_per_s_reason,omitempty"`
	// RippleNodePPV is the ripple at the node without ADC noise: the peak-to-peak of the
	// identified plant driven by the observed drive sequence of the last steady samples
	// (4 time constants of the slowest drive, 512 to 4096 samples).
	// RipplePPV is the measured one, noise included: max - min of the readings over the
	// last half of the steady part (see HalfRange).
	RippleNodePPV       *float64 `json:"ripple_node_pp_v"`
	RippleNodePPCounts  *float64 `json:"ripple_node_pp_counts"`
	RippleNodePPVReason string   `json:"ripple_node_pp_v_reason,omitempty"`
	// LevelV is where the level sits at the end of an unreachable segment (the mean of
	// its last readings) and ShortfallV how far that is from the setpoint; null for a
	// reachable one.
	LevelV     *float64 `json:"level_v"`
	ShortfallV *float64 `json:"shortfall_v"`
}

// StepFigures describe the response to one setpoint change.
type StepFigures struct {
	AtS        float64  `json:"at_s"`
	FromV      *float64 `json:"from_v"`
	ToV        *float64 `json:"to_v"`
	FromCounts float64  `json:"from_counts"`
	ToCounts   float64  `json:"to_counts"`
	RiseS      *float64 `json:"rise_s"`
	SettleS    *float64 `json:"settle_s"`
	OvershootV *float64 `json:"overshoot_v"`
	SlewVPerS  *float64 `json:"slew_v_per_s"`
	// SettleS is the time from the step until the error enters and stays within
	// +-SettleTolCounts: the deadband plus one step at the new setpoint (the larger of
	// the charge and discharge steps there), at least 1 % of full scale. The readings
	// are judged against it widened by one count of quantisation and 4.5 sigma of the
	// ADC noise. Null with SettleSReason when the step is within the tolerance or the
	// level did not stay inside before the segment ended.
	SettleSReason   string   `json:"settle_s_reason,omitempty"`
	SettleTolCounts *float64 `json:"settle_tol_counts"`
	SettleTolV      *float64 `json:"settle_tol_v"`
}

// Diagnostic is one finding, a plain sentence with the numbers behind it.
type Diagnostic struct {
	Code     string `json:"code"`     // stable identifier: unreachable_setpoint, band_too_narrow, ...
	Severity string `json:"severity"` // "info", "warning" or "error"
	Message  string `json:"message"`
}

// Traces are bounded waveforms kept for plots. Every slice is bounded in length whatever
// the capture's size (decimated with min/max envelopes where needed).
type Traces struct {
	// Overview: time (s), setpoint and measurement (V, or counts when vref is unknown),
	// and the min/max envelope of pv in each bucket.
	T, SP, PV, PVMin, PVMax []float64
	Volts                   bool // the values are volts (else counts)
	// Per segment, a window of the steady part (a few limit-cycle periods) at full rate.
	Zoom []ZoomTrace
	// Error histogram over steady parts: bin centres in counts and counts of samples.
	ErrBins, ErrHist []float64
	// Ripple spectrum of the longest steady part: frequency (Hz) and amplitude (counts).
	SpecFreq, SpecAmp []float64
	// Step responses with the fitted exponential.
	StepTraces []StepTrace
}

// ZoomTrace is a short full-rate window of one segment's steady part.
type ZoomTrace struct {
	Segment  int
	T, PV, U []float64
}

// StepTrace is one step response with the exponential fitted to it.
type StepTrace struct {
	Step          int
	T, PV, Fitted []float64
}
