package live

import (
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/tui/internal/gen"
)

// reader plays the screen's part without a screen: it takes snapshots as they come and
// keeps the points, the newest counters and the end.
type reader struct {
	t      *testing.T
	p      *Pipeline
	points []Point
	stats  Stats
	done   bool
	resets int
	events []Event
}

func (r *reader) take() {
	r.t.Helper()
	select {
	case <-r.p.Ready():
	case <-time.After(200 * time.Millisecond):
	}
	s := r.p.Take()
	if s.Reset {
		r.points, r.stats, r.done = r.points[:0], Stats{}, false
		r.resets++
	}
	r.points = append(r.points, s.Points...)
	r.events = append(r.events, s.Events...)
	if s.Stats != nil {
		r.stats = *s.Stats
	}
	if s.Err != nil {
		r.t.Fatalf("source: %v", s.Err)
	}
	if s.Done {
		r.done = true
	} else if len(s.Points) > 0 {
		r.done = false
	}
}

// until takes snapshots until ok holds, failing after 10 s.
func (r *reader) until(what string, ok func() bool) {
	r.t.Helper()
	for deadline := time.Now().Add(10 * time.Second); !ok(); r.take() {
		if time.Now().After(deadline) {
			r.t.Fatalf("%s: not reached; counters %+v", what, r.stats)
		}
	}
}

func genReplay(t *testing.T, n int64, o ReplayOptions) *Pipeline {
	t.Helper()
	o.Path = "generated"
	o.Open = func() (telemetry.Source, error) { return gen.NewSource(n, 1e-4) }
	p, err := NewReplay(o)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { p.Close() })
	return p
}

// TestReplayControls holds a replay at its start, steps it, runs it to the end at full
// speed, seeks back to the start and runs it again: every sample is analysed each time
// and no point is delivered twice.
func TestReplayControls(t *testing.T) {
	t.Parallel()
	const n = 20000 // 2 s at 10 kS/s
	p := genReplay(t, n, ReplayOptions{Speed: 1, Paused: true, Options: Options{NoAdvice: true}})
	r := &reader{t: t, p: p}
	r.until("held at the start", func() bool { return r.stats.State == StateHeld })
	if r.stats.Samples > 1 {
		t.Fatalf("held replay analysed %d samples, want at most 1", r.stats.Samples)
	}
	p.Step(0.05)
	r.until("step of 50 ms", func() bool { return r.stats.Position >= 0.05 })
	time.Sleep(100 * time.Millisecond)
	r.take()
	if pos := r.stats.Position; pos > 0.051 || r.stats.State != StateHeld {
		t.Errorf("after one step: %s at %.4f s, want held at 0.05 s", r.stats.State, pos)
	}
	p.SetSpeed(0)
	p.Run()
	r.until("end", func() bool { return r.stats.State == StateEnded && r.done })
	if r.stats.Samples != n || len(r.points) != n {
		t.Errorf("samples analysed %d, points delivered %d; want %d each", r.stats.Samples, len(r.points), n)
	}
	p.Seek(-10)
	r.until("restart", func() bool { return r.resets == 1 })
	r.until("end again", func() bool { return r.stats.State == StateEnded && r.done && r.stats.Samples == n })
	if len(r.points) != n {
		t.Errorf("points after seeking back and replaying = %d, want %d (no duplicates)", len(r.points), n)
	}
	for i := 1; i < len(r.points); i++ {
		if r.points[i].T < r.points[i-1].T {
			t.Fatalf("point %d at %.4f s comes before point %d at %.4f s", i, r.points[i].T, i-1, r.points[i-1].T)
		}
	}
}

// lastJump returns the newest jump event.
func (r *reader) lastJump() (Event, bool) {
	for i := len(r.events) - 1; i >= 0; i-- {
		if r.events[i].Kind == EventJump {
			return r.events[i], true
		}
	}
	return Event{}, false
}

// TestReplayJumps jumps through a generated capture whose setpoint steps at 1 s and
// 2 s (3 s at 10 kS/s): from a held start to each step, past the last (none), back,
// to a tenth of the capture, and back to the start after the end.
func TestReplayJumps(t *testing.T) {
	t.Parallel()
	const n = 30000
	p := genReplay(t, n, ReplayOptions{Speed: 1, Paused: true, Options: Options{NoAdvice: true}})
	if !p.Held() {
		t.Fatal("a replay opened with Paused does not report itself held")
	}
	r := &reader{t: t, p: p}
	r.until("held at the start", func() bool { return r.stats.State == StateHeld })
	at := func(what string, want float64) {
		t.Helper()
		r.until(what, func() bool { return r.stats.State == StateHeld && math.Abs(r.stats.Position-want) < 1e-9 })
	}
	p.Next(LandmarkStep)
	at("first step", 1)
	p.Next(LandmarkStep)
	at("second step", 2)
	p.Next(LandmarkStep)
	r.until("no later step", func() bool { ev, ok := r.lastJump(); return ok && ev.Value < 0 })
	if ev, _ := r.lastJump(); ev.Text != "no later setpoint step" {
		t.Errorf("jump past the last step says %q", ev.Text)
	}
	p.Prev(LandmarkStep)
	at("back to the first step", 1)
	if len(r.points) != 10001 {
		t.Errorf("points after jumping back = %d, want 10001 (0 to 1 s, no duplicates)", len(r.points))
	}
	p.Prev(LandmarkSegment)
	at("back to the first segment", 0)
	p.SeekFraction(0.5)
	at("half way", 1.5)
	p.SetSpeed(0)
	p.Run()
	r.until("end", func() bool { return r.stats.State == StateEnded && r.stats.Samples == n })
	p.Hold()
	p.SeekFraction(0)
	at("rewound after the end", 0)
	if r.stats.Samples != 1 {
		t.Errorf("samples after rewinding = %d, want 1", r.stats.Samples)
	}
	p.Step(0.25)
	at("a step ahead from the rewound start", 0.25)
}

// TestReplayBoardReset replays, in real time, a plain file whose board clock restarts
// (a reset: t goes back, which the parser reads as a wrap of the 32-bit clock, 71 min
// ahead). The replay must not sit through the false gap, and the clock goes on.
func TestReplayBoardReset(t *testing.T) {
	t.Parallel()
	path := filepath.Join(t.TempDir(), "reset.txt")
	var b strings.Builder
	b.WriteString("# vref=5 adc_bits=10 period_us=1000 mode=three-state deadband=4\n")
	for run := 0; run < 2; run++ {
		for k := 0; k < 200; k++ {
			fmt.Fprintf(&b, "t=%d sp=400 pv=%d u=0\n", 5000+k*1000, 399+k%3)
		}
	}
	if err := os.WriteFile(path, []byte(b.String()), 0o600); err != nil {
		t.Fatal(err)
	}
	p, err := NewReplay(ReplayOptions{Path: path, Speed: 1, Options: Options{NoAdvice: true}})
	if err != nil {
		t.Fatal(err)
	}
	defer p.Close()
	r := &reader{t: t, p: p}
	start := time.Now()
	for !r.done {
		if time.Since(start) > 5*time.Second {
			t.Fatalf("replay of 0.4 s of data still running after 5 s: %+v", r.stats)
		}
		r.take()
	}
	if len(r.points) != 400 {
		t.Fatalf("points = %d, want 400", len(r.points))
	}
	if got := r.points[len(r.points)-1].T; got > 1 {
		t.Errorf("last point at %.3f s, want under 1 s (the reset is no gap)", got)
	}
}

// TestLaggingScreen lets a replay run to its end with nobody taking snapshots: the
// display points beyond the retain count are dropped and counted, the analysis still
// sees every sample.
func TestLaggingScreen(t *testing.T) {
	t.Parallel()
	const n, retain = 50000, 4096
	p := genReplay(t, n, ReplayOptions{Speed: 0, Options: Options{NoAdvice: true, Retain: retain}})
	var s Snapshot
	for deadline := time.Now().Add(10 * time.Second); !s.Done; {
		if time.Now().After(deadline) {
			t.Fatal("replay did not end in 10 s")
		}
		time.Sleep(20 * time.Millisecond)
		p.mu.Lock()
		s = p.box
		p.mu.Unlock()
	}
	s = p.Take()
	if len(s.Points) > retain {
		t.Errorf("snapshot holds %d points, want at most %d", len(s.Points), retain)
	}
	if s.Dropped+int64(len(s.Points)) != n {
		t.Errorf("dropped %d + held %d = %d, want %d", s.Dropped, len(s.Points), s.Dropped+int64(len(s.Points)), n)
	}
	if s.Summary == nil || s.Summary.Samples != n {
		t.Errorf("summary = %v, want %d samples analysed", s.Summary, n)
	}
}

// TestNoTerminalLibrary checks that the engine stays apart from the screen: nothing it
// depends on draws on a terminal.
func TestNoTerminalLibrary(t *testing.T) {
	t.Parallel()
	if testing.Short() {
		t.Skip("-short: this test runs the go command")
	}
	goBin, err := exec.LookPath("go")
	if err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatal("no go command on PATH (CI=true)")
		}
		t.Skip("no go command on PATH: cannot list the dependencies")
	}
	out, err := exec.Command(goBin, "list", "-deps", ".").Output()
	if err != nil {
		t.Fatalf("go list: %v", err)
	}
	for _, dep := range strings.Fields(string(out)) {
		for _, bad := range []string{"github.com/charmbracelet/", "github.com/guptarohit/asciigraph", "github.com/caploop/caploop/tui\x00"} {
			if strings.HasPrefix(dep+"\x00", bad) {
				t.Errorf("tui/live depends on %s", dep)
			}
		}
	}
}
