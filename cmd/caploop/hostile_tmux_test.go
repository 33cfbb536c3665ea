package main

import (
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"
)

// TestHostileFileNameScreen runs replay on a file whose name holds ESC, OSC 52, OSC 0
// and U+202E inside a real terminal (tmux), and summary on a missing file of that name
// in another, and checks the captured screens (with their escapes) and the pane titles:
// the name shows as escaped text and never acts.
func TestHostileFileNameScreen(t *testing.T) {
	if testing.Short() {
		t.Skip("screen test in tmux; skipped with -short")
	}
	needTmux(t)
	t.Parallel()
	dir := t.TempDir()
	bin := buildCaploop(t, dir)
	data, err := os.ReadFile(capture(t, "three-state-good.txt"))
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, hostileName), data, 0o644); err != nil {
		t.Fatal(err)
	}
	// The name goes through printf in a script, so no raw escape is on tmux's command line.
	printfName := `run\033[31m\033]52;c;aGk=\007\033]0;pwned\007\342\200\256reversed.txt`
	script := filepath.Join(dir, "run.sh")
	body := fmt.Sprintf("#!/bin/sh\ncd %q || exit 1\nname=$(printf '%s')\nif [ \"$1\" = replay ]; then exec %q replay \"$name\" --paused; fi\n%q summary --quiet \"$name.missing\"\necho \"exit $?\"\nsleep 60\n",
		dir, printfName, bin, bin)
	if err := os.WriteFile(script, []byte(body), 0o755); err != nil {
		t.Fatal(err)
	}

	scr := &tmuxScreen{t: t, socket: fmt.Sprintf("caploop-hostile-%d", os.Getpid()), name: "replay"}
	if out, err := scr.tmux("new-session", "-d", "-s", "replay", "-x", "160", "-y", "40", "NO_COLOR=1 "+script+" replay"); err != nil {
		t.Fatalf("tmux new-session: %v %s", err, out)
	}
	t.Cleanup(func() { scr.tmux("kill-server") })
	if out, err := scr.tmux("new-session", "-d", "-s", "errors", "-x", "160", "-y", "20", script+" errors"); err != nil {
		t.Fatalf("tmux new-session: %v %s", err, out)
	}

	scr.waitFor("replay status bar", regexp.MustCompile(`(HELD|REPLAY) · run`), 15*time.Second)
	time.Sleep(500 * time.Millisecond) // a few frames
	errScr := &tmuxScreen{t: t, socket: scr.socket, name: "errors"}
	errScr.waitFor("summary's error", regexp.MustCompile(`exit 2`), 15*time.Second)

	for _, s := range []*tmuxScreen{scr, errScr} {
		raw, _ := s.tmux("capture-pane", "-p", "-e", "-t", s.name) // with the escapes tmux holds for the cells
		if strings.Contains(raw, "\x1b]") || strings.Contains(raw, "\a") || strings.Contains(raw, "\u202e") {
			t.Errorf("%s: raw OSC, BEL or U+202E on the screen:\n%q", s.name, raw)
		}
		if strings.Contains(raw, "\x1b[31m") {
			t.Errorf("%s: the name's red attribute reached the screen", s.name)
		}
		if !strings.Contains(raw, `\x1b[31m`) {
			t.Errorf("%s: the name is not shown as escaped text:\n%s", s.name, s.capture())
		}
		title, _ := s.tmux("display-message", "-p", "-t", s.name, "#{pane_title}")
		if strings.Contains(title, "pwned") {
			t.Errorf("%s: the file name retitled the terminal: %q", s.name, title)
		}
		// tmux keeps what an OSC 52 would have put on the clipboard as a paste buffer.
		if bufs, _ := s.tmux("list-buffers"); strings.TrimSpace(bufs) != "" {
			t.Errorf("%s: the file name wrote the clipboard: %q", s.name, bufs)
		}
	}
	scr.keys("q")
}
