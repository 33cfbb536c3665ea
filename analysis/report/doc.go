// Package report draws the summaries of one or more captures as a single self-contained
// HTML page (inline CSS, inline SVG plots drawn with gonum/plot, no outside fetches) and
// as a single overview picture (SVG or PNG).
//
// The page shows, for each capture, the setpoint and the measurement over time with the
// deadband, a zoom on the steady ripple of each segment with the drive under it, the
// error histogram, the ripple spectrum, each step with its fitted exponential, and the
// tables of figures, diagnostics and advice. With two or more captures (before and after
// a change of deadband or parts) it adds a side-by-side table of the figures with their
// differences and overlays the steady ripple of every capture.
//
//	docs := []report.Doc{{Name: "before", Summary: s1}, {Name: "after", Summary: s2}}
//	err := report.WriteHTML(w, docs, report.Options{Title: "bench reference"})
//
// All text that comes from a capture (file names, reject reasons, diagnostics) is
// sanitised and HTML-escaped. The package does no terminal output and reads no clock.
package report
