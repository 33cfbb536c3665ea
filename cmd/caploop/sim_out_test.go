package main

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
)

// TestSimOutNeverFollowsOrClobbers runs sim --out against a symbolic link, a FIFO, an
// existing capture (with and without --force) and an existing plain file.
func TestSimOutNeverFollowsOrClobbers(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	victim := filepath.Join(dir, "victim")
	if err := os.WriteFile(victim, []byte("keep me\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	link := filepath.Join(dir, "link.txt")
	if err := os.Symlink(victim, link); err != nil {
		t.Fatal(err)
	}
	fifo := filepath.Join(dir, "fifo.cap")
	if err := syscall.Mkfifo(fifo, 0o600); err != nil {
		t.Skipf("no FIFO here: %v", err)
	}
	old := filepath.Join(dir, "old.cap")
	if err := os.WriteFile(old, []byte("old capture\n"), 0o640); err != nil {
		t.Fatal(err)
	}
	plain := filepath.Join(dir, "plain.txt")
	if err := os.WriteFile(plain, []byte("old text\n"), 0o640); err != nil {
		t.Fatal(err)
	}
	run := func(args ...string) error {
		var stdout lockedBuf
		base := []string{"sim", "--fast", "--duration", "0.05s"}
		return runSim(t, context.Background(), &stdout, append(base, args...)...)
	}
	for _, tc := range []struct {
		name string
		args []string
		want string // exact error message
	}{
		{"plain to a link", []string{"--out", link}, "sim: refusing to write " + link + ": it is a symbolic link"},
		{"capture to a link", []string{"--capture", "--force", "--out", link}, "sim: refusing to write " + link + ": it is a symbolic link"},
		{"capture to a FIFO", []string{"--capture", "--out", fifo}, "sim: refusing to write " + fifo + ": it is a FIFO"},
		{"capture over a capture", []string{"--capture", "--out", old}, "sim: " + old + " exists; choose another file or add --force to overwrite it"},
	} {
		err := run(tc.args...)
		if err == nil || err.Error() != tc.want {
			t.Errorf("%s: error %v, want %q", tc.name, err, tc.want)
		}
	}
	if b, _ := os.ReadFile(victim); string(b) != "keep me\n" {
		t.Errorf("the link's target changed: %q", b)
	}
	if b, _ := os.ReadFile(old); string(b) != "old capture\n" {
		t.Errorf("the capture was clobbered without --force: %q", b)
	}

	// --force overwrites the capture in place, keeping its mode.
	if err := run("--capture", "--force", "--out", old); err != nil {
		t.Fatal(err)
	}
	if b, _ := os.ReadFile(old); !strings.Contains(string(b), "sp=") || strings.Contains(string(b), "old capture") {
		t.Errorf("--force did not overwrite the capture: %.80q", b)
	}
	if fi, _ := os.Stat(old); fi.Mode().Perm() != 0o640 {
		t.Errorf("capture mode %v, want 0640 kept", fi.Mode().Perm())
	}
	// Plain telemetry is replaced whole, keeping the mode.
	if err := run("--out", plain); err != nil {
		t.Fatal(err)
	}
	b, _ := os.ReadFile(plain)
	if !strings.Contains(string(b), "\n# vref=") || strings.Contains(string(b), "old text") {
		t.Errorf("plain output not replaced: %.80q", b)
	}
	if fi, _ := os.Stat(plain); fi.Mode().Perm() != 0o640 {
		t.Errorf("plain mode %v, want 0640 kept", fi.Mode().Perm())
	}
}
