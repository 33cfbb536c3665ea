// Package tui is caploop's bench screen: a bubbletea program built from small models
// (plot, figures, advice, status, help and the chart views) that shows a live board, a
// replayed capture or the built-in virtual board the same way.
//
// The engine is package tui/live: a live.Pipeline reads its source, analyses every
// sample and leaves a live.Snapshot (display points, events, summary, advice, counters);
// the screen's Model takes it with a re-armed command at most 20 times a second
// and redraws from it. This package holds the models and views only.
//
//	p, err := live.NewReplay(live.ReplayOptions{Path: "bench.cap", Speed: 1})
//	if err != nil {
//		return err
//	}
//	defer p.Close()
//	_, err = tea.NewProgram(tui.New(p, tui.Options{}), tea.WithAltScreen()).Run()
//
// The views, chosen with tab or 1 to 5:
//
//	trace    setpoint, band and measurement over the time window, the compact figures,
//	         the suggested deadband and the diagnostics
//	figures  every figure of the current steady segment and of the identified plant, or
//	         the figures before and after a deadband change side by side; the full advice
//	         and every diagnostic (it scrolls with ↑/↓ and PgUp/PgDn)
//	spread   histogram of the error over steady parts
//	ripple   ripple spectrum of the longest steady part
//	step     the last step response: pv samples as dots over the fitted plant model
//	         driven by the same drives, zoomed onto the rise
//
// The keys are in KeyMap (DefaultKeyMap); ? shows them all. On a live source, d sends
// "set deadband=N" with the suggested N after a y/n question and m marks the moment with
// a note (kept in the capture when recording). A replay jumps to the next or previous
// setpoint change, segment, mark or event (s/S, g/G, m/M, e/E), to a tenth of the capture
// (j and a digit) or its start (home), and changes speed with x/X. The series colours and
// glyphs are in palette.go.
//
// Diagnostics and advice follow the changes of settings (a `set` line sent, a setting a
// meta line changed, a deadband the board confirmed): after one, the diagnostics split
// into now (shown since the change) and earlier, each earlier one with its state: "fixed
// at 12.3s by deadband 9" once it has not recurred for 5 s or 5 limit cycles (the longer)
// after the change that addressed it, "watching" before that (diagsplit.go). The same
// diagnostic at several setpoints folds into one line with the segments listed. Advice
// is preliminary until tau is known within ±10 % and the advised deadband held for three
// updates, and a new suggestion replaces the shown one only after three updates in a row
// that differ from it (advicetrack.go). The before/after panel opens with what the
// change was meant to move and the trade made (tradeline.go).
//
// Rendering functions (RenderPlot, RenderHistogram, RenderSpectrum, RenderStep) are
// pure: data and size in, string out, and are covered by golden tests at 80x24 and
// 120x40 (go test ./tui -update regenerates testdata/).
package tui
