// Package tui is caploop's bench screen: a bubbletea program built from small models
// (plot, figures, advice, status, help and the chart views) that shows a live board, a
// replayed capture or the built-in virtual board the same way.
//
// The engine is package tui/live: a live.Pipeline reads its source, analyses every
// sample and leaves a live.Snapshot (display points, events, summary, advice, counters);
// the screen's Model takes it with a re-armed command at most about 30 times a second
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
// Rendering functions (RenderPlot, RenderHistogram, RenderSpectrum, RenderStep) are
// pure: data and size in, string out, and are covered by golden tests at 80x24 and
// 120x40 (go test ./tui -update regenerates testdata/).
package tui
