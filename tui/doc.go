// Package tui is caploop's bench screen: a bubbletea program built from small models
// (plot, figures, advice, status, help and the chart views) that shows a live board, a
// replayed capture or the built-in virtual board the same way.
//
// Data flows one way. A Pipeline goroutine reads lines from its source, parses them,
// feeds every sample to the analysis accumulator (never dropping one) and leaves display
// batches and summary snapshots in a mailbox; the screen's Model collects them with a
// re-armed command at most about 30 times a second and redraws from that snapshot.
//
//	p, err := tui.NewReplay(tui.ReplayOptions{Path: "bench.cap", Speed: 1})
//	if err != nil {
//		return err
//	}
//	defer p.Close()
//	_, err = tea.NewProgram(tui.New(p, tui.Options{}), tea.WithAltScreen()).Run()
//
// Rendering functions (RenderPlot, the chart views) are pure: data and size in, string out,
// and are covered by golden tests at 80x24 and 120x40.
package tui
