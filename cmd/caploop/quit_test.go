package main

import (
	"bytes"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"github.com/creack/pty"
)

// ptyRun runs the program in a pseudo-terminal of 100x30, keeps reading what it draws,
// and lets the test wait for text and type keys.
type ptyRun struct {
	t    *testing.T
	cmd  *exec.Cmd
	tty  *os.File
	mu   sync.Mutex
	out  bytes.Buffer
	done chan error
}

func startPTY(t *testing.T, env []string, bin string, args ...string) *ptyRun {
	t.Helper()
	cmd := exec.Command(bin, args...)
	cmd.Env = append(os.Environ(), env...)
	tty, err := pty.StartWithSize(cmd, &pty.Winsize{Cols: 100, Rows: 30})
	if err != nil {
		t.Fatalf("start in a pty: %v", err)
	}
	r := &ptyRun{t: t, cmd: cmd, tty: tty, done: make(chan error, 1)}
	go func() {
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
	out := r.text()
	if i, j := strings.LastIndex(out, "\x1b[?1049h"), strings.LastIndex(out, "\x1b[?1049l"); i < 0 || j < i {
		t.Errorf("the alternate screen was not left (enter at %d, leave at %d)", i, j)
	}
}
