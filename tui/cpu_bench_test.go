package tui

import (
	"bytes"
	"context"
	"io"
	"runtime"
	"testing"
	"time"

	"github.com/caploop/caploop/analysis/loop/virtual"
	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/tui/live"
)

// byteSource is a telemetry.Source over bytes in memory.
type byteSource struct{ *bytes.Reader }

func (byteSource) Name() string { return "demo minute" }
func (byteSource) Close() error { return nil }

// demoMinute is the input of one minute of the demo, arranged as the screen receives it
// from a 1 kS/s board: one frame every frameInterval of board time with the points of
// that interval, a new summary every 100 ms of board time (as the pipeline's
// summaryInterval paces them) and the advice when it changes.
type demoMinute struct {
	frames []live.Snapshot
	board  float64 // board seconds covered
}

// recordDemoMinute runs the demo scenario's virtual board for a minute of board time
// (not in real time), replays it through the real pipeline as fast as it goes and
// re-times what the pipeline delivers into frames of board time.
func recordDemoMinute(tb testing.TB) demoMinute {
	tb.Helper()
	const minute = 60.0
	sc := virtual.DefaultScenario()
	sc.Duration = minute
	b, err := virtual.NewBoard(sc)
	if err != nil {
		tb.Fatal(err)
	}
	var buf bytes.Buffer
	if err := b.Run(context.Background(), &buf, false); err != nil && err != io.EOF {
		tb.Fatalf("virtual board: %v", err)
	}
	data := buf.Bytes()
	p, err := live.NewReplay(live.ReplayOptions{Speed: 0, Path: "demo minute",
		Open: func() (telemetry.Source, error) { return byteSource{bytes.NewReader(data)}, nil }})
	if err != nil {
		tb.Fatal(err)
	}
	defer p.Close()
	var snaps []live.Snapshot
	for deadline := time.Now().Add(time.Minute); ; {
		if time.Now().After(deadline) {
			tb.Fatal("the replay of a demo minute did not end within a minute")
		}
		select {
		case <-p.Ready():
		case <-p.Done():
		}
		s := p.Take()
		snaps = append(snaps, s)
		if s.Done || s.Err != nil {
			break
		}
	}
	// All points in time order, and the last summary and advice delivered.
	var pts []live.Point
	var last live.Snapshot
	for _, s := range snaps {
		pts = append(pts, s.Points...)
		if s.Summary != nil {
			last.Summary = s.Summary
		}
		if s.Advice != nil {
			last.Advice = s.Advice
		}
		if s.Stats != nil {
			last.Stats = s.Stats
		}
	}
	if len(pts) < 50_000 || last.Summary == nil {
		tb.Fatalf("a demo minute gave %d points and summary %v", len(pts), last.Summary != nil)
	}
	var d demoMinute
	dt := frameInterval.Seconds()
	end := pts[len(pts)-1].T
	d.board = end - pts[0].T
	i := 0
	nextSum := 0.0
	for t := pts[0].T + dt; i < len(pts); t += dt {
		var f live.Snapshot
		j := i
		for j < len(pts) && pts[j].T < t {
			j++
		}
		f.Points = pts[i:j]
		i = j
		if t >= nextSum {
			// A fresh summary object each time, as the pipeline builds one per interval.
			s := *last.Summary
			f.Summary = &s
			st := *last.Stats
			f.Stats = &st
			nextSum = t + 0.1
		}
		if len(d.frames) == 30 {
			f.Advice = last.Advice
		}
		d.frames = append(d.frames, f)
	}
	return d
}

// BenchmarkDemoMinute measures the screen's own work (Update and View of every frame)
// over one minute of the demo from a 1 kS/s board, and reports it as the share of one
// core it costs per second of board time (cpu-%): the target for a screen left open all
// day is under 5 %. Frames come as often as the model asks (frameEvery), each with the
// points of its stretch of board time. The pipeline's parsing and analysis are not
// counted. On Linux it counts the CPU time of the benchmark's thread (so a loaded
// machine does not inflate it; work the runtime does on other threads, such as most of
// the garbage collection, is left out), elsewhere the wall time.
func BenchmarkDemoMinute(b *testing.B) {
	d := recordDemoMinute(b)
	cases := []struct {
		name          string
		width, height int
		span          float64
		view          View
	}{
		{"120x40", 120, 40, 2, ViewTrace},
		{"250x70", 250, 70, 2, ViewTrace},
		{"120x40-window8s", 120, 40, 8, ViewTrace},
		{"120x40-figures", 120, 40, 2, ViewFigures},
	}
	for _, c := range cases {
		b.Run(c.name, func(b *testing.B) {
			runtime.LockOSThread()
			defer runtime.UnlockOSThread()
			b.ResetTimer()
			var el time.Duration
			views := 0
			for i := 0; i < b.N; i++ {
				m := New(live.NewIdle("demo minute", live.IdleOptions{}), Options{Span: c.span})
				m.width, m.height, m.view = c.width, c.height, c.view
				m.layout()
				start := threadCPU()
				for k := 0; k < len(d.frames); {
					// The frames of board time until the model's next frame, merged.
					n := max(int(m.frameEvery()/frameInterval), 1)
					f := mergeFrames(d.frames[k:min(k+n, len(d.frames))])
					k += n
					m.takeFrame(f)
					_ = m.View()
					views++
				}
				el += threadCPU() - start
			}
			b.ReportMetric(100*el.Seconds()/float64(b.N)/d.board, "cpu-%")
			b.ReportMetric(float64(views)/float64(b.N)/d.board, "frames/s")
		})
	}
}

// mergeFrames joins consecutive frames of demoMinute into one: their points (adjacent
// parts of one slice) and the newest summary, counters and advice.
func mergeFrames(fs []live.Snapshot) live.Snapshot {
	out := fs[0]
	for _, f := range fs[1:] {
		if len(f.Points) > 0 {
			if len(out.Points) == 0 {
				out.Points = f.Points
			} else {
				out.Points = out.Points[:len(out.Points)+len(f.Points)]
			}
		}
		if f.Summary != nil {
			out.Summary = f.Summary
		}
		if f.Stats != nil {
			out.Stats = f.Stats
		}
		if f.Advice != nil {
			out.Advice = f.Advice
		}
	}
	return out
}
