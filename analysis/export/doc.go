// Package export turns a telemetry file into a table a spreadsheet opens without any
// parsing: one row per sample, CSV (RFC 4180) or TSV, with a header naming the units.
//
// It reads the file twice and keeps neither pass in memory. Survey, the first pass,
// finds the columns (the extra channels, whether host times and sequence numbers are
// there) and the figures the time axis needs; Write, the second pass, writes the rows.
//
//	l, err := export.Survey(telemetry.NewScanner(first))
//	...
//	res, err := export.Write(w, telemetry.NewScanner(second), l, export.Options{})
//
// The columns, in order:
//
//	board_time_s     board time from the first sample, s (t unwrapped across 2^32 wraps;
//	                 a board reset starts a new origin one sample period on, as the
//	                 summary's time axis does; without t, the sample number times the
//	                 sample period)
//	host_time_s      host receive time since the capture started, s (captures only)
//	n                the board's sequence number (when the lines carry it)
//	sp_counts, sp_v  setpoint in ADC counts and in volts
//	pv_counts, pv_v  measurement in ADC counts and in volts
//	drive            1 charge, 0 hold, -1 discharge (empty when the line had no u)
//	segment          segment index, 0-based, numbered as in `caploop summary` (by the
//	                 summary's own rule, analysis.SegmentRule): a new one at every setpoint
//	                 change, change of the deadband in force, reset, gap, unplug, meta
//	                 change and line sent to the board
//	deadband_counts, deadband_v
//	                 the deadband half-width in force (0 for a two-state loop; empty
//	                 when the meta lines have not said)
//	...              the extra channels, in the order they first appear, unitless
//
// Volts use the meta lines in force at each sample (counts * vref / 2^adc_bits); a
// cell is empty where the meta lines have not yet given vref and adc_bits.
package export
