package main

import (
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"
)

// tmuxScreen drives a program inside a real terminal multiplexer session on a private
// server socket, so the test sees exactly what a user would.
type tmuxScreen struct {
	t      *testing.T
	socket string
	name   string
}

func (s *tmuxScreen) tmux(args ...string) (string, error) {
	out, err := exec.Command("tmux", append([]string{"-L", s.socket}, args...)...).CombinedOutput()
	return string(out), err
}

func (s *tmuxScreen) capture() string {
	out, _ := s.tmux("capture-pane", "-p", "-t", s.name)
	return out
}

func (s *tmuxScreen) keys(k ...string) {
	s.t.Helper()
	if out, err := s.tmux(append([]string{"send-keys", "-t", s.name}, k...)...); err != nil {
		s.t.Fatalf("tmux send-keys %v: %v %s", k, err, out)
	}
}

// waitFor polls the screen until re matches, and returns the submatches.
func (s *tmuxScreen) waitFor(what string, re *regexp.Regexp, timeout time.Duration) []string {
	s.t.Helper()
	start := time.Now()
	deadline := start.Add(timeout)
	var screen string
	for time.Now().Before(deadline) {
		screen = s.capture()
		if m := re.FindStringSubmatch(screen); m != nil {
			s.t.Logf("%s: after %s", what, time.Since(start).Round(100*time.Millisecond))
			return m
		}
		time.Sleep(200 * time.Millisecond)
	}
	s.t.Fatalf("%s: %q did not appear within %s; screen:\n%s", what, re, timeout, screen)
	return nil
}

func (s *tmuxScreen) alive() bool {
	_, err := s.tmux("has-session", "-t", s.name)
	return err == nil
}

// TestLiveScreenTmux runs `caploop sim --pty` and `caploop live` on its path inside a
// tmux session, applies the suggested deadband from the screen and checks that the band
// jumps stop, then sees the virtual board unplugged and plugged in again.
func TestLiveScreenTmux(t *testing.T) {
	if testing.Short() {
		t.Skip("end-to-end screen test takes about 40 s; skipped with -short")
	}
	needTmux(t)
	t.Parallel() // waits on a real-time board most of its 35 s: beside the other slow tests
	dir := t.TempDir()
	bin := buildCaploop(t, dir)

	// The virtual board: unplugged after 25 s, back 3 s later, behind a stable link.
	link := filepath.Join(dir, "board")
	path := servePTY(t, bin, 1, "--link", link, "--unplug-after", "25s", "--replug-after", "3s")[0]
	if path != link {
		t.Fatalf("sim printed %q, want the link %q", path, link)
	}

	scr := &tmuxScreen{t: t, socket: fmt.Sprintf("caploop-e2e-%d", os.Getpid()), name: "live"}
	cmdline := fmt.Sprintf("NO_COLOR=1 %s live %s", bin, path)
	if out, err := scr.tmux("new-session", "-d", "-s", scr.name, "-x", "120", "-y", "40", cmdline); err != nil {
		t.Fatalf("tmux new-session: %v %s", err, out)
	}
	t.Cleanup(func() { scr.tmux("kill-server") })

	scr.waitFor("live screen", regexp.MustCompile(`LIVE · \S+ · connected`), 10*time.Second)
	m := scr.waitFor("suggested deadband", regexp.MustCompile(`advice: deadband (\d+) counts \(now (\d+)\) · d sends it`), 20*time.Second)
	want, _ := strconv.Atoi(m[1])
	if m[2] != "4" {
		t.Fatalf("board deadband before the change = %s, want the scenario's 4", m[2])
	}
	scr.keys("d")
	scr.waitFor("confirmation question", regexp.MustCompile(fmt.Sprintf(`send "set deadband=%d" to the board\? y/n`, want)), 5*time.Second)
	scr.keys("y")
	scr.waitFor("board confirmation", regexp.MustCompile(fmt.Sprintf(`the board confirmed deadband %d`, want)), 10*time.Second)

	// The figures view compares the segment before the change with one after it.
	scr.keys("2")
	// Wait until the "after" segment has at least 1500 steady samples (1.5 s).
	cmpRE := regexp.MustCompile(`steady\s+\d+ samples from \S+ \S+\s+(\d+) samples from[\s\S]*band jumps\s+(\d+)\s+(\d+)`)
	var before, after int
	for deadline := time.Now().Add(25 * time.Second); ; {
		jm := scr.waitFor("band jumps before and after", cmpRE, time.Until(deadline))
		n, _ := strconv.Atoi(jm[1])
		before, _ = strconv.Atoi(jm[2])
		after, _ = strconv.Atoi(jm[3])
		if n >= 1500 {
			break
		}
		if time.Now().After(deadline) {
			t.Fatalf("the segment after the change did not reach 1500 steady samples; screen:\n%s", scr.capture())
		}
		time.Sleep(300 * time.Millisecond)
	}
	if before == 0 {
		t.Errorf("band jumps before the change = 0, want > 0 (the scenario's band is too narrow)")
	}
	if after != 0 {
		t.Errorf("band jumps after deadband %d = %d, want 0", want, after)
	}

	// Unplug and re-plug.
	scr.keys("1")
	scr.waitFor("unplug shown", regexp.MustCompile(`UNPLUGGED, waiting for the board`), 25*time.Second)
	scr.waitFor("recovery shown", regexp.MustCompile(`LIVE · \S+ · connected · [1-9]\d* S/s`), 15*time.Second)

	scr.keys("q")
	deadline := time.Now().Add(5 * time.Second)
	for scr.alive() && time.Now().Before(deadline) {
		time.Sleep(100 * time.Millisecond)
	}
	if scr.alive() {
		t.Fatalf("the screen did not quit on q; screen:\n%s", scr.capture())
	}
}

// TestReplayScreenQuits runs `caploop replay` in tmux and ends it with Ctrl-C and with
// SIGTERM: each time the program exits with status 0 and the terminal is back on its
// normal screen, with no trace of the bench screen.
func TestReplayScreenQuits(t *testing.T) {
	if testing.Short() {
		t.Skip("end-to-end screen test; skipped with -short")
	}
	needTmux(t)
	t.Parallel()
	dir := t.TempDir()
	bin := buildCaploop(t, dir)
	capture, err := filepath.Abs("../../testdata/tuned.cap")
	if err != nil {
		t.Fatal(err)
	}
	for _, how := range []string{"ctrl-c", "sigterm", "q"} {
		t.Run(how, func(t *testing.T) {
			scr := &tmuxScreen{t: t, socket: fmt.Sprintf("caploop-quit-%d-%s", os.Getpid(), how), name: "replay"}
			shell := fmt.Sprintf("NO_COLOR=1 %s replay %s --speed 2; echo exit=$?; sleep 30", bin, capture)
			if out, err := scr.tmux("new-session", "-d", "-s", scr.name, "-x", "80", "-y", "24", "sh", "-c", shell); err != nil {
				t.Fatalf("tmux new-session: %v %s", err, out)
			}
			t.Cleanup(func() { scr.tmux("kill-server") })
			scr.waitFor("replay screen", regexp.MustCompile(`REPLAY 2x · tuned\.cap`), 10*time.Second)
			switch how {
			case "ctrl-c":
				scr.keys("C-c")
			case "q":
				scr.keys("q")
			case "sigterm":
				shPID, err := scr.tmux("display-message", "-p", "-t", scr.name, "#{pane_pid}")
				if err != nil {
					t.Fatalf("pane pid: %v", err)
				}
				kids, err := os.ReadFile(fmt.Sprintf("/proc/%s/task/%s/children", strings.TrimSpace(shPID), strings.TrimSpace(shPID)))
				if err != nil || len(strings.Fields(string(kids))) != 1 {
					t.Fatalf("caploop process under the pane's shell: %q %v", kids, err)
				}
				if out, err := exec.Command("kill", "-TERM", strings.Fields(string(kids))[0]).CombinedOutput(); err != nil {
					t.Fatalf("kill: %v %s", err, out)
				}
			}
			scr.waitFor("exit status", regexp.MustCompile(`exit=0`), 5*time.Second)
			if s := scr.capture(); strings.Contains(s, "REPLAY") || strings.Contains(s, "[1 trace]") {
				t.Errorf("the bench screen is still on the terminal after exit:\n%s", s)
			}
		})
	}
}

// needTmux skips the test when tmux is missing, and fails it under CI=true, where .ci/run
// installs tmux.
func needTmux(t testing.TB) {
	t.Helper()
	if testing.Short() {
		t.Skip("-short: skips the end-to-end screen test (it runs tmux)")
	}
	if _, err := exec.LookPath("tmux"); err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("tmux is required in CI: %v", err)
		}
		t.Skip("tmux not installed; skipping the end-to-end screen test")
	}
}
