package tui

import (
	"bufio"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	tea "github.com/charmbracelet/bubbletea"

	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/wire"
	"github.com/caploop/caploop/tui/live"
)

// TestResize checks that every view fills the terminal exactly through a series of
// resizes, including very small and very wide ones.
func TestResize(t *testing.T) {
	m := fixtureModel(t, 80, 24)
	sizes := [][2]int{{80, 24}, {120, 40}, {60, 16}, {200, 60}, {81, 25}, {40, 12}}
	for _, sz := range sizes {
		mm, _ := m.Update(tea.WindowSizeMsg{Width: sz[0], Height: sz[1]})
		m = mm.(Model)
		for v := View(0); v < numViews; v++ {
			m = press(t, m, fmt.Sprint(int(v)+1))
			t.Run(fmt.Sprintf("%dx%d/%s", sz[0], sz[1], v), func(t *testing.T) {
				checkGrid(t, m.View(), sz[0], sz[1])
			})
		}
	}
}

// TestColor checks that colour appears only when asked for (NO_COLOR gives Color false).
func TestColor(t *testing.T) {
	for _, tc := range []struct {
		name  string
		color bool
	}{{"no colour", false}, {"colour", true}} {
		t.Run(tc.name, func(t *testing.T) {
			m := fixtureModel(t, 80, 24)
			m.opts.Color, m.plot.color = tc.color, tc.color
			got := strings.Contains(m.View(), "\x1b[")
			if got != tc.color {
				t.Errorf("escape sequences in the screen = %v, want %v", got, tc.color)
			}
		})
	}
}

// TestUntrustedText replays a capture whose board lines and host records carry escape
// sequences, control bytes and invalid UTF-8, and checks that none reaches the screen
// while the bad lines are counted.
func TestUntrustedText(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "dirty.cap")
	var b strings.Builder
	b.WriteString("#caploop-capture v1 start=2026-03-01T09:00:00.000000Z source=test\n")
	b.WriteString("0.000000 < # vref=5 adc_bits=10 period_us=1000 mode=three-state deadband=4\n")
	for k := 0; k < 400; k++ {
		fmt.Fprintf(&b, "%.6f < t=%d n=%d sp=400 pv=%d u=0\n", float64(k)/1000, k*1000, k, 398+k%5)
		if k == 100 {
			fmt.Fprintf(&b, "%.6f < \x1b[2J\x1b]0;owned\x07pv=\xff\xfe\n", float64(k)/1000)
			fmt.Fprintf(&b, "%.6f ! mark \x1b[31mred\x1b[0m \x00note\n", float64(k)/1000)
			fmt.Fprintf(&b, "%.6f ! \x1b[5mblink event\n", float64(k)/1000)
		}
	}
	if err := os.WriteFile(path, []byte(b.String()), 0o600); err != nil {
		t.Fatal(err)
	}
	m := replayToEnd(t, path, 120, 40, false)
	m.opts.Color = false
	for v := View(0); v < numViews; v++ {
		out := press(t, m, fmt.Sprint(int(v)+1)).View()
		if strings.ContainsAny(out, "\x1b\x00\x07") || !isValidUTF8(out) {
			t.Errorf("view %s shows raw control bytes: %q", v, out)
		}
	}
	if got := m.status.st.Rejected; got != 1 {
		t.Errorf("rejected lines = %d, want 1", got)
	}
	found := false
	for _, mk := range m.plot.marks {
		if strings.Contains(mk.Label, "red") {
			found = true
		}
	}
	if !found {
		t.Errorf("the capture's mark is not on the plot; marks %+v", m.plot.marks)
	}
}

func isValidUTF8(s string) bool { return strings.ToValidUTF8(s, "\uFFFD") == s }

// TestReplayControls drives a replay: held at the start (the first space runs it),
// advanced while held, run at max speed, rewound after its end.
func TestReplayControls(t *testing.T) {
	const n = 20000 // 2 s at 10 kS/s
	p, err := live.NewReplay(live.ReplayOptions{Path: "generated", Speed: 1, Paused: true,
		Open: func() (telemetry.Source, error) { return newGenSource(t, n, 1e-4), nil }})
	if err != nil {
		t.Fatal(err)
	}
	defer p.Close()
	m := New(p, Options{Span: 0.5})
	if !m.held || !strings.HasPrefix(m.status.View(), "HELD") {
		t.Errorf("a replay started held shows %q", m.status.View())
	}
	pump := framePump(t, &m)
	pump("held at the start", func() bool { return m.status.st.State == live.StateHeld })
	if got := m.status.st.Samples; got > 1 {
		t.Fatalf("held replay analysed %d samples, want at most 1", got)
	}
	m = press(t, m, "n") // advance a tenth of the 0.5 s window
	pump("advance of 50 ms", func() bool { return m.status.st.Position >= 0.05 })
	time.Sleep(100 * time.Millisecond)
	pump("a frame", func() bool { return true })
	if pos := m.status.st.Position; pos > 0.06 {
		t.Errorf("after one advance the replay is at %.3f s, want 0.05 s and held", pos)
	}
	m = press(t, m, "x", "x", "x", " ") // max speed, run: one space from a held start
	if m.held {
		t.Fatal("the first space did not run a replay started held")
	}
	pump("end", func() bool { return m.status.st.State == live.StateEnded })
	if got := m.status.st.Samples; got != n {
		t.Errorf("samples analysed = %d, want %d", got, n)
	}
	if m.status.st.Speed != 0 {
		t.Errorf("speed = %g, want 0 (max)", m.status.st.Speed)
	}
	m = press(t, m, "X", "X", "X", "home") // real time, rewind after the end
	pump("restart", func() bool { return m.status.st.State != live.StateEnded && m.plot.ring.Len() < n })
	m = press(t, m, "x", "x", "x") // max speed to the end
	pump("end again", func() bool { return m.status.st.State == live.StateEnded && m.status.st.Samples == n })
	if got := m.plot.ring.Len(); got != n {
		t.Errorf("points after rewinding and replaying = %d, want %d (no duplicates)", got, n)
	}
}

// framePump returns a function that applies the pipeline's frames to *m until ok holds,
// failing after 10 s.
func framePump(t *testing.T, m *Model) func(what string, ok func() bool) {
	last := time.Time{}
	return func(what string, ok func() bool) {
		t.Helper()
		for deadline := time.Now().Add(10 * time.Second); ; {
			switch msg := wait(m.src, last)().(type) {
			case samplesMsg:
				m.takeFrame(msg.snap)
			case sourceErrMsg:
				t.Fatalf("replay: %v", msg.err)
			}
			last = time.Now()
			if ok() {
				return
			}
			if time.Now().After(deadline) {
				t.Fatalf("%s: not reached; status %+v", what, m.status.st)
			}
		}
	}
}

// TestMarkRecorded marks a moment on a live link with a recording and checks the mark
// is in the capture file as a host event.
func TestMarkRecorded(t *testing.T) {
	pt, err := wire.OpenPTY()
	if err != nil {
		t.Skipf("no pseudo-terminal: %v", err)
	}
	defer pt.Close()
	rec := filepath.Join(t.TempDir(), "marks.cap")
	p := live.NewPort(live.PortOptions{Serial: wire.SerialConfig{Path: pt.Path()}, Record: rec, Options: live.Options{NoAdvice: true}})
	m := New(p, Options{})
	last := time.Time{}
	for deadline := time.Now().Add(5 * time.Second); m.status.st.State != "connected"; {
		if time.Now().After(deadline) {
			t.Fatalf("link did not connect; state %q", m.status.st.State)
		}
		if msg, ok := wait(p, last)().(samplesMsg); ok {
			m.takeFrame(msg.snap)
		}
		last = time.Now()
	}
	fmt.Fprintf(pt.Master(), "# vref=5 adc_bits=10 period_us=1000\nt=0 sp=400 pv=401 u=0\nt=1000 sp=400 pv=399 u=0\n")
	for deadline := time.Now().Add(5 * time.Second); m.status.st.Samples < 2 || m.status.st.RecordBytes == 0; {
		if time.Now().After(deadline) {
			t.Fatalf("samples %d, capture size %d after 5 s", m.status.st.Samples, m.status.st.RecordBytes)
		}
		if msg, ok := wait(p, last)().(samplesMsg); ok {
			m.takeFrame(msg.snap)
		}
		last = time.Now()
	}
	if line := m.status.View(); !strings.Contains(line, "rec marks.cap ") {
		t.Errorf("status line %q does not show the recording", line)
	}
	m = press(t, m, "m", "f", "a", "n", " ", "o", "n")
	mm, cmd := m.Update(tea.KeyMsg{Type: tea.KeyEnter})
	m = mm.(Model)
	if cmd == nil {
		t.Fatal("enter on a note returned no command")
	}
	if msg := cmd(); msg != nil {
		t.Fatalf("mark: %v", msg)
	}
	if err := p.Close(); err != nil {
		t.Fatalf("close: %v", err)
	}
	f, err := os.Open(rec)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	found := false
	for sc.Scan() {
		if strings.HasSuffix(sc.Text(), " ! mark fan on") {
			found = true
		}
	}
	if !found {
		t.Errorf("capture %s has no \"! mark fan on\" record", rec)
	}
	if len(m.plot.marks) == 0 || m.plot.marks[len(m.plot.marks)-1].Label != "fan on" {
		t.Errorf("marks on the plot = %+v, want the last to be \"fan on\"", m.plot.marks)
	}
}

// TestKeysInOneMessage checks that several keys read in one chunk (fast typing, scripts)
// act one by one: "++" zooms in twice, "mfan" opens the note prompt and types "fan".
func TestKeysInOneMessage(t *testing.T) {
	m := fixtureModel(t, 80, 24)
	mm, _ := m.Update(tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune("++")})
	m = mm.(Model)
	if m.plot.span != 0.75 {
		t.Errorf("span after \"++\" = %g s, want 0.75 s (3 s halved twice)", m.plot.span)
	}
	mm, _ = liveFixture(t).Update(tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune("mfan")})
	m = mm.(Model)
	if !m.noting || string(m.note) != "fan" {
		t.Errorf("after \"mfan\": noting %v, note %q; want true, \"fan\"", m.noting, string(m.note))
	}
}
