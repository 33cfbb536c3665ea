package main

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"go.bug.st/serial"

	"github.com/caploop/caploop/telemetry"
)

// runSim runs `caploop` in-process with args and returns standard output and the error.
func runSim(t *testing.T, ctx context.Context, stdout *lockedBuf, args ...string) error {
	t.Helper()
	root := newRoot()
	root.SetArgs(args)
	root.SetOut(stdout)
	root.SetErr(&lockedBuf{})
	return root.ExecuteContext(ctx)
}

// lockedBuf is a bytes.Buffer safe for one writer and one reader goroutine.
type lockedBuf struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (l *lockedBuf) Write(p []byte) (int, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.Write(p)
}

func (l *lockedBuf) String() string {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.String()
}

func TestSimFast(t *testing.T) {
	args := []string{"sim", "--fast", "--samples", "200", "--r", "22k", "--c", "2.2u", "--deadband", "7", "--seed", "3"}
	var a, b lockedBuf
	if err := runSim(t, context.Background(), &a, args...); err != nil {
		t.Fatal(err)
	}
	if err := runSim(t, context.Background(), &b, args...); err != nil {
		t.Fatal(err)
	}
	if a.String() != b.String() {
		t.Error("two runs with one seed differ")
	}
	lines := strings.Split(strings.TrimSuffix(a.String(), "\n"), "\n")
	want := []string{
		"# virtual board boot",
		"# vref=5 adc_bits=10 period_us=1000 mode=three-state deadband=7",
		"# supply=5 r=22000 c=2.2e-06 load=1000000",
	}
	for i, w := range want {
		if lines[i] != w {
			t.Errorf("line %d = %q, want %q", i+1, lines[i], w)
		}
	}
	if n := len(lines) - len(want); n != 200 {
		t.Errorf("%d data lines, want 200", n)
	}
	if !strings.HasPrefix(lines[len(lines)-1], "t=199000 n=199 sp=246 ") {
		t.Errorf("last line %q, want t=199000 n=199 sp=246 ...", lines[len(lines)-1])
	}
}

func TestSimScenarioFileAndOut(t *testing.T) {
	dir := t.TempDir()
	scn := filepath.Join(dir, "bench.scn")
	os.WriteFile(scn, []byte("# bench reference\nsupply = 3.3\nr = 10k\nc = 10u\nbits = 12\nmode = two-state\nprofile = const\nsp = 1.65\nat = 0.1s set period_us=500\n"), 0o644)
	out := filepath.Join(dir, "out.txt")
	var stdout lockedBuf
	// Flags win over the file: --bits 11.
	if err := runSim(t, context.Background(), &stdout, "sim", "--scenario", scn, "--bits", "11", "--fast", "--duration", "0.2s", "--out", out); err != nil {
		t.Fatal(err)
	}
	if stdout.String() != "" {
		t.Errorf("stdout %q, want nothing with --out", stdout.String())
	}
	data, err := os.ReadFile(out)
	if err != nil {
		t.Fatal(err)
	}
	text := string(data)
	for _, w := range []string{
		"# vref=5 adc_bits=11 period_us=1000 mode=two-state deadband=4\n",
		"# supply=3.3 r=10000 c=1e-05 load=1000000\n",
		"# period_us=500\n",
		"t=100000 n=100 sp=676 ",
		"t=100500 n=101 sp=676 ",
	} {
		if !strings.Contains(text, w) {
			t.Errorf("output lacks %q", w)
		}
	}
	// 100 samples at 1 ms, then 0.1 s at 500 µs.
	if n := strings.Count(text, "\nt="); n != 300 {
		t.Errorf("%d data lines, want 300", n)
	}
}

func TestSimFlagErrors(t *testing.T) {
	dir := t.TempDir()
	bad := filepath.Join(dir, "bad.scn")
	os.WriteFile(bad, []byte("r = 47k\n\nc = lots\n"), 0o644)
	tests := []struct {
		name string
		args []string
		want string
	}{
		{"bad value", []string{"--r", "4q7"}, `--r: virtual: r: si: invalid value "4q7"`},
		{"bad mode", []string{"--mode", "four-state"}, `--mode: virtual: mode: unknown mode "four-state"`},
		{"bad scenario line", []string{"--scenario", bad}, bad + `:3: virtual: c: si: invalid value "lots"`},
		{"missing scenario", []string{"--scenario", filepath.Join(dir, "none.scn")}, "no such file"},
		{"fast without limit", []string{"--fast"}, "sim: --fast needs --samples or --duration"},
		{"pty and out", []string{"--pty", "--out", "x"}, "sim: --pty serves in real time"},
		{"setpoint above vref", []string{"--sp", "6"}, "virtual: setpoint 6 V outside 0..vref"},
		{"bad at", []string{"--at", "set deadband=3"}, `--at: virtual: at: si: invalid value "set"`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			var out lockedBuf
			err := runSim(t, context.Background(), &out, append([]string{"sim"}, tc.args...)...)
			var ee *exitError
			if !errors.As(err, &ee) || ee.code != 2 {
				t.Fatalf("error %v, want one with exit code 2", err)
			}
			if !strings.Contains(err.Error(), tc.want) {
				t.Errorf("error %q, want it to contain %q", err, tc.want)
			}
		})
	}
}

// TestSimPTY is the acceptance path of `caploop sim --pty`: it prints one line, a device
// path; a serial program reads data lines from it and `set deadband=9` changes the
// deadband in the stream.
func TestSimPTY(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	var stdout lockedBuf
	link := filepath.Join(t.TempDir(), "board")
	done := make(chan error, 1)
	go func() { done <- runSim(t, ctx, &stdout, "sim", "--pty", "--link", link, "--speed", "4") }()
	defer func() {
		cancel()
		select {
		case err := <-done:
			if err != nil {
				t.Errorf("sim --pty returned %v after cancel, want nil", err)
			}
		case <-time.After(5 * time.Second):
			t.Error("sim --pty did not stop")
		}
		if got := stdout.String(); got != link+"\n" {
			t.Errorf("stdout %q, want exactly one line, the path %q", got, link)
		}
	}()
	deadline := time.Now().Add(5 * time.Second)
	for !strings.HasSuffix(stdout.String(), "\n") {
		if time.Now().After(deadline) {
			t.Fatal("sim --pty printed no path")
		}
		time.Sleep(10 * time.Millisecond)
	}
	path := strings.TrimSpace(stdout.String())
	port, err := serial.Open(path, &serial.Mode{BaudRate: 115200})
	if err != nil {
		t.Fatalf("serial.Open(%s): %v", path, err)
	}
	defer port.Close()
	port.SetReadTimeout(5 * time.Second)
	sc := bufio.NewScanner(port)
	next := func() string {
		if !sc.Scan() {
			t.Fatalf("port: no more lines: %v", sc.Err())
		}
		return sc.Text()
	}
	for data := 0; data < 100; {
		if strings.HasPrefix(next(), "t=") {
			data++
		}
	}
	if _, err := port.Write([]byte("set deadband=9\n")); err != nil {
		t.Fatal(err)
	}
	for i := 0; ; i++ {
		if next() == "# deadband=9" {
			break
		}
		if i > 20000 {
			t.Fatal("no # deadband=9 answer")
		}
	}
	if l := next(); !strings.HasPrefix(l, "t=") {
		t.Errorf("line after the answer %q, want a data line", l)
	}
}

// TestSimCapture: --capture writes a caploop capture that the Scanner reads back, with the
// host line as a sent record.
func TestSimCapture(t *testing.T) {
	var out lockedBuf
	if err := runSim(t, context.Background(), &out, "sim", "--fast", "--duration", "0.2s", "--capture", "--at", "0.1s set deadband=9"); err != nil {
		t.Fatal(err)
	}
	s := telemetry.NewScanner(strings.NewReader(out.String()))
	var samples int64
	var sent []string
	for s.Scan() {
		switch s.Kind() {
		case telemetry.RecSample:
			samples++
		case telemetry.RecEvent:
			if e := s.Event(); e.Dir == telemetry.ToBoard {
				sent = append(sent, e.Text)
			}
		}
	}
	if err := s.Err(); err != nil {
		t.Fatal(err)
	}
	if capt, _ := s.Capture(); !capt {
		t.Error("output not read as a capture")
	}
	if samples != 200 || len(sent) != 1 || sent[0] != "set deadband=9" {
		t.Errorf("%d samples, sent %q; want 200 and [set deadband=9]", samples, sent)
	}
	if st := s.Stats(); st.Rejected != 0 || s.Meta().Deadband != 9 {
		t.Errorf("%d rejected lines, deadband %g; want 0 and 9", st.Rejected, s.Meta().Deadband)
	}
}
