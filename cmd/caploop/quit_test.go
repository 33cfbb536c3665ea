package main

import (
	"bytes"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"github.com/creack/pty"

	"github.com/caploop/caploop/telemetry/wire"
)

// ptyRun runs the program in a pseudo-terminal of 100x30, keeps reading what it draws,
// and lets the test wait for text and type keys.
type ptyRun struct {
	t    *testing.T
	cmd  *exec.Cmd
	tty  *os.File
	mu   sync.Mutex
	out  bytes.Buffer
	done chan error    // the process's exit
	read chan struct{} // closed when all its output has been read
}

func startPTY(t *testing.T, env []string, bin string, args ...string) *ptyRun {
	t.Helper()
	cmd := exec.Command(bin, args...)
	cmd.Env = append(os.Environ(), env...)
	tty, err := pty.StartWithSize(cmd, &pty.Winsize{Cols: 100, Rows: 30})
	if err != nil {
		t.Fatalf("start in a pty: %v", err)
	}
	r := &ptyRun{t: t, cmd: cmd, tty: tty, done: make(chan error, 1), read: make(chan struct{})}
	go func() {
		defer close(r.read)
		buf := make([]byte, 32<<10)
		for {
			n, err := tty.Read(buf)
			r.mu.Lock()
			r.out.Write(buf[:n])
			r.mu.Unlock()
			if err != nil {
				return
			}
		}
	}()
	go func() { r.done <- cmd.Wait() }()
	t.Cleanup(func() {
		cmd.Process.Kill()
		tty.Close()
	})
	return r
}

// drained waits (up to 2 s) until the output of an ended process has all been read.
func (r *ptyRun) drained() {
	select {
	case <-r.read:
	case <-time.After(2 * time.Second):
	}
}

func (r *ptyRun) text() string {
	r.mu.Lock()
	defer r.mu.Unlock()
	return r.out.String()
}

func (r *ptyRun) waitFor(what string, timeout time.Duration) {
	r.t.Helper()
	for deadline := time.Now().Add(timeout); time.Now().Before(deadline); time.Sleep(50 * time.Millisecond) {
		if strings.Contains(r.text(), what) {
			return
		}
	}
	r.t.Fatalf("%q did not appear within %s; output:\n%q", what, timeout, tail(r.text(), 2000))
}

func tail(s string, n int) string {
	if len(s) > n {
		return s[len(s)-n:]
	}
	return s
}

// TestQuitEndsReplayOnBlockedFIFO replays a FIFO whose writer sent a few lines and stays
// open, so the replay is blocked in a read, and checks that q ends the process within
// 1 s (../shared/CONVENTIONS.md: "q ends any screen within 1 s") with exit status 0 and
// the terminal restored (the alternate screen left).
func TestQuitEndsReplayOnBlockedFIFO(t *testing.T) {
	if testing.Short() {
		t.Skip("builds and runs the program in a pseudo-terminal; skipped with -short")
	}
	t.Parallel()
	dir := t.TempDir()
	bin := buildCaploop(t, dir)
	fifo := filepath.Join(dir, "board.fifo")
	if err := syscall.Mkfifo(fifo, 0o600); err != nil {
		t.Skipf("cannot make a FIFO here: %v", err)
	}
	// O_RDWR opens a FIFO without waiting for a reader (Linux); the test never reads it,
	// so it acts as a writer that stays open.
	w, err := os.OpenFile(fifo, os.O_RDWR, 0)
	if err != nil {
		t.Fatal(err)
	}
	defer w.Close()
	head, err := os.ReadFile("../../testdata/three-state-good.txt")
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.SplitAfter(string(head), "\n")
	if _, err := io.WriteString(w, strings.Join(lines[:min(len(lines), 400)], "")); err != nil {
		t.Fatal(err)
	}

	r := startPTY(t, []string{"NO_COLOR=1", "TERM=xterm-256color"}, bin, "replay", fifo, "--speed", "max")
	r.waitFor("REPLAY", 10*time.Second)
	time.Sleep(500 * time.Millisecond) // let it read what was written and block for more
	select {
	case err := <-r.done:
		t.Fatalf("the replay ended before q: %v; output:\n%q", err, tail(r.text(), 2000))
	default:
	}
	start := time.Now()
	if _, err := r.tty.Write([]byte("q")); err != nil {
		t.Fatal(err)
	}
	select {
	case err := <-r.done:
		took := time.Since(start)
		t.Logf("q ended the process in %s", took.Round(time.Millisecond))
		if err != nil {
			t.Errorf("exit: %v; output:\n%q", err, tail(r.text(), 2000))
		}
		if took > time.Second {
			t.Errorf("q took %s to end the process, want within 1 s", took)
		}
	case <-time.After(5 * time.Second):
		t.Fatalf("the process still runs 5 s after q; output:\n%q", tail(r.text(), 2000))
	}
	r.drained()
	out := r.text()
	if i, j := strings.LastIndex(out, "\x1b[?1049h"), strings.LastIndex(out, "\x1b[?1049l"); i < 0 || j < i {
		t.Errorf("the alternate screen was not left (enter at %d, leave at %d)", i, j)
	}
}

// TestLiveQuitNotes runs `caploop live` on a pseudo-terminal fed like a board, in a
// pseudo-terminal of its own. With --record, quitting prints the capture's path and line
// count; without it, a mark made on the screen is printed on quit as not saved.
func TestLiveQuitNotes(t *testing.T) {
	if testing.Short() {
		t.Skip("builds and runs the program in a pseudo-terminal; skipped with -short")
	}
	t.Parallel()
	bin := buildCaploop(t, "")
	data, err := os.ReadFile("../../testdata/three-state-good.txt")
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.SplitAfter(string(data), "\n")
	for _, rec := range []bool{true, false} {
		name := map[bool]string{true: "record", false: "mark-not-saved"}[rec]
		t.Run(name, func(t *testing.T) {
			t.Parallel()
			board, err := wire.OpenPTY()
			if err != nil {
				t.Skipf("no pseudo-terminal: %v", err)
			}
			defer board.Close()
			stop := make(chan struct{})
			defer close(stop)
			go func() { // about 1000 lines/s, round and round
				for i := 0; ; i++ {
					select {
					case <-stop:
						return
					default:
					}
					if _, err := io.WriteString(board.Master(), lines[i%len(lines)]); err != nil {
						return
					}
					if i%10 == 0 {
						time.Sleep(10 * time.Millisecond)
					}
				}
			}()
			capPath := filepath.Join(t.TempDir(), "bench.cap")
			args := []string{"live", board.Path()}
			if rec {
				args = append(args, "--record", capPath)
			}
			r := startPTY(t, []string{"NO_COLOR=1", "TERM=xterm-256color"}, bin, args...)
			r.waitFor("connected", 10*time.Second)
			if !rec {
				r.tty.Write([]byte("m"))
				time.Sleep(200 * time.Millisecond)
				r.tty.Write([]byte("fan on\r"))
				r.waitFor("marked", 5*time.Second)
				time.Sleep(300 * time.Millisecond)
			} else {
				time.Sleep(time.Second)
			}
			r.tty.Write([]byte("q"))
			select {
			case err := <-r.done:
				if err != nil {
					t.Fatalf("exit: %v", err)
				}
			case <-time.After(5 * time.Second):
				t.Fatal("live did not end within 5 s of q")
			}
			r.drained()
			out := r.text()
			if i := strings.LastIndex(out, "\x1b[?1049l"); i >= 0 {
				out = out[i:]
			}
			if rec {
				m := regexp.MustCompile(`capture (\S+): (\d+) board lines, 0 marks`).FindStringSubmatch(out)
				if m == nil || m[1] != capPath {
					t.Fatalf("no capture note naming %s after quit:\n%q", capPath, out)
				}
				body, err := os.ReadFile(capPath)
				if err != nil {
					t.Fatal(err)
				}
				// The count is the board lines; the capture has a header and events too.
				n, _ := strconv.Atoi(m[2])
				if got := strings.Count(string(body), "\n"); n < 100 || got < n {
					t.Errorf("note says %d board lines; the capture has %d lines", n, got)
				}
				return
			}
			if !regexp.MustCompile(`1 mark not saved \(not recording`).MatchString(out) || !regexp.MustCompile(`\d+\.\d{3} s  fan on`).MatchString(out) {
				t.Errorf("no note of the unsaved mark after quit:\n%q", out)
			}
		})
	}
}

// TestLiveSilentPortHint: on a port that opens but says nothing, the status line gives a
// hint (the firmware, the port, the baud rate) after a few seconds instead of showing
// "connected" at 0 S/s for ever.
func TestLiveSilentPortHint(t *testing.T) {
	if testing.Short() {
		t.Skip("builds and runs the program in a pseudo-terminal; skipped with -short")
	}
	t.Parallel()
	bin := buildCaploop(t, "")
	board, err := wire.OpenPTY()
	if err != nil {
		t.Skipf("no pseudo-terminal: %v", err)
	}
	defer board.Close()
	r := startPTY(t, []string{"NO_COLOR=1", "TERM=xterm-256color"}, bin, "live", board.Path(), "--baud", "57600")
	r.waitFor("connected", 10*time.Second)
	r.waitFor("silent for 4 s", 10*time.Second)
	r.waitFor("firmware printing?", 5*time.Second)
	if !strings.Contains(r.text(), "baud 57600") {
		t.Errorf("the hint does not name the baud rate in use:\n%q", tail(r.text(), 2000))
	}
	r.tty.Write([]byte("q"))
	select {
	case <-r.done:
	case <-time.After(5 * time.Second):
		t.Fatal("live did not end within 5 s of q")
	}
}
