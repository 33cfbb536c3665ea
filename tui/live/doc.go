// Package live is the engine behind the bench screen: one Pipeline per source (a serial
// port through wire.Link, a replayed capture, or none for a screen driven by hand).
//
// A pipeline's goroutine reads lines from its source, parses them, feeds every sample to
// the analysis accumulator (never dropping one) and leaves display points, events,
// summary snapshots and counters in a Snapshot; the screen takes it when Ready says
// there is one, at its own pace. When the screen lags, only display points are dropped.
// The advice, which simulates candidate designs, runs in a goroutine of its own every
// couple of seconds and never holds up the analysis.
//
//	p, err := live.NewReplay(live.ReplayOptions{Path: "bench.cap", Speed: 1})
//	if err != nil {
//		return err
//	}
//	defer p.Close()
//	for {
//		select {
//		case <-p.Ready():
//			s := p.Take()
//			// draw s.Points, s.Summary, s.Advice...
//		case <-p.Done():
//			return nil
//		}
//	}
//
// A replay takes Hold, Run, SetSpeed, Step and Seek; a port takes Send and Mark. The
// package draws nothing: it imports no terminal library.
package live
