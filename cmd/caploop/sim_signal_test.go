package main

import (
	"bufio"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
)

// TestSimPTYEndsOnSignal runs `caploop sim --pty` a thousand times faster than real time
// with a program that opens the device and never reads it (the board is fed faster than
// its reader and waits for it), sends SIGTERM or SIGINT, and checks that the process ends
// within 1 s with status 0 and that the device link and its temporary folder are gone.
func TestSimPTYEndsOnSignal(t *testing.T) {
	if testing.Short() {
		t.Skip("builds and runs the program; skipped with -short")
	}
	t.Parallel()
	bin := buildCaploop(t, "")
	for _, sig := range []syscall.Signal{syscall.SIGTERM, syscall.SIGINT} {
		t.Run(sig.String(), func(t *testing.T) {
			t.Parallel()
			cmd := exec.Command(bin, "sim", "--pty", "--speed", "1000")
			stdout, err := cmd.StdoutPipe()
			if err != nil {
				t.Fatal(err)
			}
			var stderr strings.Builder
			cmd.Stderr = &stderr
			if err := cmd.Start(); err != nil {
				t.Fatal(err)
			}
			done := make(chan error, 1)
			go func() { done <- cmd.Wait() }()
			t.Cleanup(func() { cmd.Process.Kill() })
			path, err := bufio.NewReader(stdout).ReadString('\n')
			if err != nil {
				t.Fatalf("no device path: %v", err)
			}
			path = strings.TrimSpace(path)
			dev, err := os.OpenFile(path, os.O_RDWR|syscall.O_NOCTTY, 0)
			if err != nil {
				t.Fatalf("open %s: %v", path, err)
			}
			defer dev.Close()
			time.Sleep(time.Second) // the board fills the terminal and waits
			start := time.Now()
			if err := cmd.Process.Signal(sig); err != nil {
				t.Fatal(err)
			}
			select {
			case err := <-done:
				took := time.Since(start)
				t.Logf("%s ended sim in %s", sig, took.Round(time.Millisecond))
				if err != nil {
					t.Errorf("exit: %v\n%s", err, stderr.String())
				}
				if took > time.Second {
					t.Errorf("%s took %s to end sim, want within 1 s", sig, took)
				}
			case <-time.After(5 * time.Second):
				t.Fatalf("sim still runs 5 s after %s", sig)
			}
			if _, err := os.Lstat(path); !os.IsNotExist(err) {
				t.Errorf("device link %s left behind: %v", path, err)
			}
			if _, err := os.Stat(filepath.Dir(path)); !os.IsNotExist(err) {
				t.Errorf("temporary folder %s left behind: %v", filepath.Dir(path), err)
			}
		})
	}
}
