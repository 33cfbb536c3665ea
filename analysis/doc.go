// Package analysis measures a switched-RC analog output loop from its telemetry in one
// streaming pass: segments of one setpoint and their steady figures (mean error, ripple,
// duty, limit-cycle period, deadband entries and band jumps), the response to each
// setpoint step, the real circuit behind it (tau for charge, discharge and hold, the
// charge and discharge levels, ADC noise), and diagnostics in plain sentences. While
// the setpoint moves in small, frequent steps (a ramp, a slow sine), where every sample
// or few would start a segment too short for figures, the Tracking figures (error, lag,
// duty, band jumps) say how well the reading followed it.
//
// The steady part of a segment starts at the first drive onset after the level reached
// its setpoint, and again at a later onset while the cycle's mean level still drifts; a
// loop that rests (a bounce or two, then one drive for good) has its ripple measured over
// that last run, after the last transient; its
// limit cycle is the mean interval between charge onsets (between discharge onsets for a
// discharge-only cycle), the ripple frequency its inverse, and the exact repeat of the
// drive pattern is reported apart.
//
// One Accumulator serves the live screen and the headless summary, so a figure on the
// screen and in `caploop summary` is the same number:
//
//	acc := analysis.New(analysis.Options{})
//	acc.SetMeta(meta)            // after each meta line
//	acc.Add(sample)              // for each data line, O(1) amortised
//	sum := acc.Summary()         // at any time, cost independent of the samples seen
//
// or, for a whole file,
//
//	sc := telemetry.NewScanner(f)
//	sum, err := analysis.Summarize(sc, analysis.Options{})
//
// Memory is bounded whatever the stream's length: running sums, fixed histograms, a
// window of the last steady readings and drives per segment for the spectrum, the drive
// pattern and the node ripple,
// and lists bounded by Options.MaxSegments. Volts and seconds come from the meta lines
// (vref, adc_bits, period_us) and the board time t; without them figures stay in counts
// and samples, and the volt and second fields are null.
//
// The package does no I/O and never reads the clock.
package analysis
