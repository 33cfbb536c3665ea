package tui

import (
	"io"
	"runtime"
	"testing"
	"time"

	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/wire"
	"github.com/caploop/caploop/tui/internal/gen"
	"github.com/caploop/caploop/tui/live"
)

// newGenSource returns the generated stream of gen.NewSource or fails tb.
func newGenSource(tb testing.TB, n int64, period float64) *gen.Source {
	tb.Helper()
	g, err := gen.NewSource(n, period)
	if err != nil {
		tb.Fatalf("gen.NewSource: %v", err)
	}
	return g
}

// screenLoop plays the part of the bubbletea program: it waits for frames with the
// model's own command, applies them with Update and draws with View, until the model's
// status says all want samples were analysed. It returns the number of frames drawn.
func screenLoop(tb testing.TB, m Model, want int64, timeout time.Duration) (Model, int) {
	tb.Helper()
	frames := 0
	deadline := time.Now().Add(timeout)
	last := time.Time{}
	for m.status.st.Samples < want {
		if time.Now().After(deadline) {
			tb.Fatalf("pipeline analysed %d of %d samples in %s", m.status.st.Samples, want, timeout)
		}
		msg := wait(m.src, last)()
		last = time.Now()
		switch msg := msg.(type) {
		case samplesMsg:
			m.takeFrame(msg.snap)
		case sourceErrMsg:
			tb.Fatalf("source error: %v", msg.err)
		}
		_ = m.View()
		frames++
	}
	return m, frames
}

// BenchmarkReplayMax runs the screen's pipeline as fast as it goes: scanner, analysis,
// the screen model's Update and View at most FrameRate times a second. Reports lines/s.
func BenchmarkReplayMax(b *testing.B) {
	const n = 1_000_000
	for i := 0; i < b.N; i++ {
		p, err := live.NewReplay(live.ReplayOptions{Speed: 0, Path: "generated",
			Open: func() (telemetry.Source, error) { return newGenSource(b, n, 1e-3), nil }})
		if err != nil {
			b.Fatal(err)
		}
		m := New(p, Options{})
		m.width, m.height = 120, 40
		m.layout()
		start := time.Now()
		m, frames := screenLoop(b, m, n, 5*time.Minute)
		el := time.Since(start)
		p.Close()
		b.ReportMetric(float64(n)/el.Seconds(), "lines/s")
		b.ReportMetric(float64(frames)/el.Seconds(), "frames/s")
	}
}

// BenchmarkLivePTY feeds generated lines through a real pseudo-terminal into the live
// pipeline (Link, parser, analysis, advice) and the screen model's Update and View, as
// fast as the writer can go. It fails if a line was dropped before the analysis, and
// reports lines/s. Run on one core with -cpu 1.
func BenchmarkLivePTY(b *testing.B) {
	const n = 1_000_000
	for i := 0; i < b.N; i++ {
		pt, err := wire.OpenPTY()
		if err != nil {
			b.Skipf("no pseudo-terminal: %v", err)
		}
		p := live.NewPort(live.PortOptions{Serial: wire.SerialConfig{Path: pt.Path()}})
		m := New(p, Options{})
		m.width, m.height = 120, 40
		m.layout()
		// Wait until the link has the port open (so the terminal is raw, no echo).
		for deadline := time.Now().Add(5 * time.Second); m.status.st.State != "connected"; {
			if time.Now().After(deadline) {
				b.Fatalf("link did not connect; state %q", m.status.st.State)
			}
			if msg, ok := wait(p, time.Time{})().(samplesMsg); ok {
				m.takeFrame(msg.snap)
			}
		}
		g := newGenSource(b, n, 1e-4)
		start := time.Now()
		werr := make(chan error, 1)
		go func() {
			_, err := io.Copy(pt.Master(), g)
			werr <- err
		}()
		m, frames := screenLoop(b, m, n, 5*time.Minute)
		el := time.Since(start)
		if err := <-werr; err != nil {
			b.Fatalf("write to the pseudo-terminal: %v", err)
		}
		if d := m.status.st.Lost; d != 0 {
			b.Fatalf("%d lines dropped before the analysis", d)
		}
		p.Close()
		pt.Close()
		b.ReportMetric(float64(n)/el.Seconds(), "lines/s")
		b.ReportMetric(float64(frames)/el.Seconds(), "frames/s")
	}
}

// BenchmarkHourAt10k replays an accelerated hour at 10 k samples/s (36 M samples)
// through the whole screen pipeline and reports the heap in use afterwards (after a
// GC), which must stay under 100 MiB: the ring of retained points plus the analysis's
// streaming state, whatever the session length.
func BenchmarkHourAt10k(b *testing.B) {
	const n = 36_000_000
	for i := 0; i < b.N; i++ {
		p, err := live.NewReplay(live.ReplayOptions{Speed: 0, Path: "generated", Options: live.Options{NoAdvice: true},
			Open: func() (telemetry.Source, error) { return newGenSource(b, n, 1e-4), nil }})
		if err != nil {
			b.Fatal(err)
		}
		m := New(p, Options{})
		m.width, m.height = 120, 40
		m.layout()
		start := time.Now()
		m, _ = screenLoop(b, m, n, 30*time.Minute)
		el := time.Since(start)
		runtime.GC()
		var ms runtime.MemStats
		runtime.ReadMemStats(&ms)
		heap := float64(ms.HeapInuse) / (1 << 20)
		sys := float64(ms.Sys) / (1 << 20)
		p.Close()
		b.ReportMetric(float64(n)/el.Seconds(), "lines/s")
		b.ReportMetric(heap, "heap-MiB")
		b.ReportMetric(sys, "sys-MiB")
		if heap >= 100 {
			b.Errorf("heap in use after an hour at 10 k samples/s = %.1f MiB, want < 100 MiB", heap)
		}
		runtime.KeepAlive(m)
	}
}
