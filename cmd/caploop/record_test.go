package main

import (
	"bytes"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/wire"
)

// buildCaploop builds the caploop binary into dir and returns its path.
func buildCaploop(t testing.TB, dir string) string {
	t.Helper()
	buildOnce.Do(func() { builtBin, buildErr = buildBinary() })
	if buildErr != nil {
		t.Fatal(buildErr)
	}
	return builtBin
}

// The program is built once per test run and shared by the tests that run it.
var (
	buildOnce sync.Once
	builtBin  string
	buildErr  error
	buildDir  string
)

func buildBinary() (string, error) {
	gobin := filepath.Join(runtime.GOROOT(), "bin", "go")
	if _, err := os.Stat(gobin); err != nil {
		if gobin, err = exec.LookPath("go"); err != nil {
			return "", fmt.Errorf("go tool not found: %v", err)
		}
	}
	dir, err := os.MkdirTemp("", "caploop-test-bin-")
	if err != nil {
		return "", err
	}
	buildDir = dir
	bin := filepath.Join(dir, "caploop")
	cmd := exec.Command(gobin, "build", "-o", bin, ".")
	if out, err := cmd.CombinedOutput(); err != nil {
		return "", fmt.Errorf("go build: %v\n%s", err, out)
	}
	return bin, nil
}

func TestMain(m *testing.M) {
	code := m.Run()
	if buildDir != "" {
		os.RemoveAll(buildDir)
	}
	os.Exit(code)
}

// fakeBoard writes numbered data lines to a pseudo-terminal's master side at about
// 2000 lines per second, as a running board would, and remembers when each went out.
type fakeBoard struct {
	p    *wire.PTY
	stop chan struct{}
	done chan struct{}

	mu   sync.Mutex
	sent []time.Time // sent[n] = when line n was written
}

func boardLine(n int) string {
	return fmt.Sprintf("t=%d n=%d sp=512 pv=%d u=%d", 1000*n, n, 480+n%64, n%3-1)
}

func startBoard(p *wire.PTY, from int) *fakeBoard {
	b := &fakeBoard{p: p, stop: make(chan struct{}), done: make(chan struct{}), sent: make([]time.Time, from)}
	go func() {
		defer close(b.done)
		// The tail of a line the board was writing before the port was opened.
		if _, err := p.Master().WriteString("=498 u=1\n"); err != nil {
			return
		}
		tick := time.NewTicker(2 * time.Millisecond)
		defer tick.Stop()
		n := from
		for {
			select {
			case <-b.stop:
				return
			case <-tick.C:
			}
			var w strings.Builder
			for i := 0; i < 4; i++ {
				w.WriteString(boardLine(n+i) + "\n")
			}
			if _, err := p.Master().WriteString(w.String()); err != nil {
				return // unplugged
			}
			now := time.Now()
			b.mu.Lock()
			for i := 0; i < 4; i++ {
				b.sent = append(b.sent, now)
			}
			b.mu.Unlock()
			n += 4
		}
	}()
	return b
}

func (b *fakeBoard) halt() {
	select {
	case <-b.stop:
	default:
		close(b.stop)
	}
	// A write blocked on a full queue ends when the pty is closed by the test's cleanup.
	select {
	case <-b.done:
	case <-time.After(200 * time.Millisecond):
	}
}

func (b *fakeBoard) sentAt(n int64) time.Time {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.sent[n]
}

func (b *fakeBoard) count() int {
	b.mu.Lock()
	defer b.mu.Unlock()
	return len(b.sent)
}

// replay reads a capture with the telemetry Scanner and checks it: a well-formed file
// (header, complete records, nothing rejected), samples numbered without a gap from
// first, events in order. It returns the sample numbers' range and the events.
func replay(t *testing.T, path string, first int64) (last int64, events []string) {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.HasPrefix(data, []byte(telemetry.CaptureMagic+" v1 ")) {
		t.Fatalf("capture header: got %q", bytes.SplitN(data, []byte("\n"), 2)[0])
	}
	if !bytes.HasSuffix(data, []byte("\n")) {
		t.Fatalf("capture ends inside a record: ...%q", data[max(0, len(data)-60):])
	}
	src, err := telemetry.OpenFile(path)
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	sc := telemetry.NewScanner(src)
	sc.Name = path
	next := first
	for sc.Scan() {
		switch sc.Kind() {
		case telemetry.RecSample:
			s := sc.Sample()
			if !s.Has(telemetry.HasN) || !s.Has(telemetry.HasHost) {
				t.Fatalf("line %d: sample without n or host time", s.Line)
			}
			if s.N != next {
				t.Fatalf("line %d: sample n=%d, want n=%d (a line was lost or invented)", s.Line, s.N, next)
			}
			next++
		case telemetry.RecEvent:
			events = append(events, strings.Fields(sc.Event().Text + " ")[0])
		}
	}
	if err := sc.Err(); err != nil {
		t.Fatalf("replay: %v", err)
	}
	st := sc.Stats()
	if st.Rejected != 0 || st.Partial != 0 {
		t.Errorf("replay: %d rejected, %d partial lines, want none (first: %v)", st.Rejected, st.Partial, st.FirstRejects)
	}
	if ok, _ := sc.Capture(); !ok {
		t.Error("replay: the Scanner did not take the file for a capture")
	}
	return next - 1, events
}

// waitForSamples waits until the capture file on disk holds at least n board lines,
// which also proves it is flushed while recording.
func waitForSamples(t *testing.T, path string, n int, stderr *syncBuffer) {
	t.Helper()
	deadline := time.Now().Add(15 * time.Second)
	for time.Now().Before(deadline) {
		data, _ := os.ReadFile(path)
		if bytes.Count(data, []byte(" < ")) >= n {
			return
		}
		time.Sleep(20 * time.Millisecond)
	}
	t.Fatalf("capture did not reach %d lines; stderr:\n%s", n, stderr.String())
}

// syncBuffer is a bytes.Buffer safe for the child's output goroutine and the test.
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// TestRecordCommand builds caploop, records a pseudo-terminal board and stops the
// recording mid-stream in each of the ways the capture must survive, then replays it.
func TestRecordCommand(t *testing.T) {
	if testing.Short() {
		t.Skip("builds the caploop binary; skipped with -short")
	}
	t.Parallel()
	bin := buildCaploop(t, t.TempDir())

	tests := []struct {
		name   string
		args   []string
		stop   func(t *testing.T, cmd *exec.Cmd, p *wire.PTY)
		events string // events the capture must hold, in order
		killed bool   // stopped by SIGKILL: no exit status to check
	}{
		{
			name:   "SIGINT",
			stop:   func(t *testing.T, cmd *exec.Cmd, p *wire.PTY) { cmd.Process.Signal(os.Interrupt) },
			events: "connected partial",
		},
		{
			name:   "SIGTERM",
			stop:   func(t *testing.T, cmd *exec.Cmd, p *wire.PTY) { cmd.Process.Signal(syscall.SIGTERM) },
			events: "connected partial",
		},
		{
			name:   "unplug with --exit-on-unplug",
			args:   []string{"--exit-on-unplug"},
			stop:   func(t *testing.T, cmd *exec.Cmd, p *wire.PTY) { p.Close() },
			events: "connected partial unplugged",
		},
		{
			name:   "--duration",
			args:   []string{"--duration", "3s"},
			stop:   func(t *testing.T, cmd *exec.Cmd, p *wire.PTY) {},
			events: "connected partial",
		},
		{
			// SIGKILL gives no chance to flush: what the periodic flush wrote must be there.
			name:   "SIGKILL",
			stop:   func(t *testing.T, cmd *exec.Cmd, p *wire.PTY) { cmd.Process.Kill() },
			events: "connected partial",
			killed: true,
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			p, err := wire.OpenPTY()
			if err != nil {
				t.Fatalf("OpenPTY: %v", err)
			}
			defer p.Close()
			board := startBoard(p, 0)
			defer board.halt()

			out := filepath.Join(t.TempDir(), "bench.cap")
			args := append([]string{"record", p.Path(), "--out", out}, tc.args...)
			cmd := exec.Command(bin, args...)
			var stderr syncBuffer
			cmd.Stderr = &stderr
			if err := cmd.Start(); err != nil {
				t.Fatal(err)
			}
			exited := make(chan error, 1)
			go func() { exited <- cmd.Wait() }()

			waitForSamples(t, out, 1500, &stderr) // on disk while still recording
			stopAt := time.Now()
			tc.stop(t, cmd, p)
			select {
			case err := <-exited:
				if err != nil && !tc.killed {
					t.Fatalf("caploop record: %v; stderr:\n%s", err, stderr.String())
				}
			case <-time.After(10 * time.Second):
				cmd.Process.Kill()
				t.Fatalf("caploop record did not stop; stderr:\n%s", stderr.String())
			}
			board.halt()

			last, events := replay(t, out, 0)
			if got := strings.Join(events, " "); got != tc.events {
				t.Errorf("events %q, want %q", got, tc.events)
			}
			if last < 1500 {
				t.Errorf("replayed samples 0..%d, want at least 1500", last)
			}
			if int(last) >= board.count() {
				t.Errorf("replayed up to n=%d but the board wrote only %d lines", last, board.count())
			}
			// Flushed at least every second: the last line on disk left the board less than
			// a second (plus scheduling slack on a busy machine) before the stop.
			if lag := stopAt.Sub(board.sentAt(last)); lag > 2*time.Second {
				t.Errorf("last recorded line was written %v before the stop, want under 2 s", lag)
			}
			if !tc.killed {
				msg := stderr.String()
				if !strings.Contains(msg, "recording "+p.Path()) {
					t.Errorf("stderr lacks the start message:\n%s", msg)
				}
				// A clean stop writes out everything read: the count the recorder reports is
				// the count on disk.
				var n int64
				if i := strings.Index(msg, "recorded "); i < 0 {
					t.Errorf("stderr lacks the summary:\n%s", msg)
				} else if _, err := fmt.Sscanf(msg[i:], "recorded %d lines", &n); err != nil {
					t.Errorf("summary %q: %v", msg[i:], err)
				} else if n != last+1 {
					t.Errorf("recorder read %d lines, the capture holds %d", n, last+1)
				}
			}
		})
	}
}

// TestRecordKeepsWaitingAfterUnplug unplugs the board under a recording on a stable
// symlink, plugs a new one in and checks that one capture holds both sessions.
func TestRecordKeepsWaitingAfterUnplug(t *testing.T) {
	if testing.Short() {
		t.Skip("builds the caploop binary; skipped with -short")
	}
	dir := t.TempDir()
	bin := buildCaploop(t, dir)
	link := filepath.Join(dir, "board")
	a, err := wire.OpenPTY()
	if err != nil {
		t.Fatal(err)
	}
	defer a.Close()
	if err := a.Symlink(link); err != nil {
		t.Fatal(err)
	}
	boardA := startBoard(a, 0)
	defer boardA.halt()
	out := filepath.Join(dir, "rig.cap")
	cmd := exec.Command(bin, "record", link, "--out", out)
	var stderr syncBuffer
	cmd.Stderr = &stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	defer cmd.Process.Kill()
	waitForSamples(t, out, 500, &stderr)
	a.Close()
	boardA.halt()
	deadline := time.Now().Add(10 * time.Second)
	for !strings.Contains(stderr.String(), "unplugged; waiting") {
		if time.Now().After(deadline) {
			t.Fatalf("no unplug reported; stderr:\n%s", stderr.String())
		}
		time.Sleep(10 * time.Millisecond)
	}
	// The board restarts its numbering after a re-plug; the test keeps counting instead so
	// that the replay can check the whole capture for gaps: the second board starts where
	// the first one's recorded lines ended.
	data, _ := os.ReadFile(out)
	firstSession := bytes.Count(data, []byte(" < "))
	b, err := wire.OpenPTY()
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	boardB := startBoard(b, firstSession)
	defer boardB.halt()
	if err := b.Symlink(link); err != nil {
		t.Fatal(err)
	}
	waitForSamples(t, out, firstSession+500, &stderr)
	cmd.Process.Signal(os.Interrupt)
	if err := cmd.Wait(); err != nil {
		t.Fatalf("caploop record: %v; stderr:\n%s", err, stderr.String())
	}
	boardB.halt()
	last, events := replay(t, out, 0)
	if got, want := strings.Join(events, " "), "connected partial unplugged reconnected partial"; got != want {
		t.Errorf("events %q, want %q", got, want)
	}
	if last < int64(firstSession)+500 {
		t.Errorf("replayed up to n=%d, want at least %d", last, firstSession+500)
	}
	if !strings.Contains(stderr.String(), "reconnected") {
		t.Errorf("stderr lacks the reconnection:\n%s", stderr.String())
	}
}

// TestRecordFlagErrors checks the exit code and message of unusable flags.
func TestRecordFlagErrors(t *testing.T) {
	dir := t.TempDir()
	existing := filepath.Join(dir, "old.cap")
	if err := os.WriteFile(existing, []byte("keep"), 0o644); err != nil {
		t.Fatal(err)
	}
	link := filepath.Join(dir, "link.cap")
	if err := os.Symlink(existing, link); err != nil {
		t.Fatal(err)
	}
	fifo := filepath.Join(dir, "fifo.cap")
	if err := syscall.Mkfifo(fifo, 0o600); err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		name string
		args []string
		want string
	}{
		{"missing port", []string{filepath.Join(dir, "ttyNONE"), "--out", filepath.Join(dir, "a.cap")}, "not found"},
		{"bad baud", []string{"/dev/null", "--out", filepath.Join(dir, "b.cap"), "--baud", "fast"}, "--baud"},
		{"existing out", []string{"/dev/null", "--out", existing}, "--force"},
		{"not a port", []string{os.DevNull, "--out", filepath.Join(dir, "c.cap")}, "not a serial port"},
		// A capture path that is a link or a FIFO is refused, --force or not.
		{"out a symbolic link", []string{"/dev/null", "--out", link, "--force"}, "refusing to write " + link + ": it is a symbolic link"},
		{"out a FIFO", []string{"/dev/null", "--out", fifo, "--force"}, "refusing to write " + fifo + ": it is a FIFO"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			cmd := newRecordCmd()
			cmd.SetArgs(tc.args)
			var errOut bytes.Buffer
			cmd.SetErr(&errOut)
			cmd.SetOut(&errOut)
			err := cmd.Execute()
			if err == nil {
				t.Fatal("got no error")
			}
			if ee, ok := err.(*exitError); !ok || ee.code != 2 {
				t.Errorf("got %v, want exit code 2", err)
			}
			if !strings.Contains(err.Error(), tc.want) {
				t.Errorf("message %q lacks %q", err.Error(), tc.want)
			}
		})
	}
	if data, _ := os.ReadFile(existing); string(data) != "keep" {
		t.Error("an existing capture was overwritten without --force")
	}
	for _, name := range []string{"a.cap", "c.cap"} {
		if _, err := os.Stat(filepath.Join(dir, name)); err == nil {
			t.Errorf("%s left behind after a failed open", name)
		}
	}
}
