package main

import (
	"bufio"
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

// TestTuneViewTmux runs `caploop sim --pty` (one setpoint, a narrow band, 4 times real
// time) and `caploop live` on its path inside a tmux session, starts the tune view with
// t, confirms the plan with y and waits for the before/after line: the board's own band
// shows band jumps, the advised one none (the loop model predicts 0 for this scenario,
// as TestTuneCommand checks headless). q then ends the screen with the settings restored.
func TestTuneViewTmux(t *testing.T) {
	if testing.Short() {
		t.Skip("end-to-end tune view test; skipped with -short")
	}
	needTmux(t)
	t.Parallel()
	dir := t.TempDir()
	bin := buildCaploop(t, dir)

	link := filepath.Join(dir, "board")
	sim := exec.Command(bin, "sim", "--pty", "--link", link, "--speed", "4", "--sp", "2.0", "--deadband", "2", "--v0", "2.0")
	stdout, err := sim.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	simLogPath := filepath.Join(dir, "sim.log")
	simLog, err := os.Create(simLogPath)
	if err != nil {
		t.Fatal(err)
	}
	defer simLog.Close()
	sim.Stderr = simLog
	if err := sim.Start(); err != nil {
		t.Fatalf("start sim: %v", err)
	}
	t.Cleanup(func() {
		sim.Process.Kill()
		sim.Wait()
		if t.Failed() {
			b, _ := os.ReadFile(simLogPath)
			t.Logf("sim log:\n%s", b)
		}
	})
	path, err := bufio.NewReader(stdout).ReadString('\n')
	if err != nil {
		t.Fatalf("sim did not print its device path: %v", err)
	}
	path = strings.TrimSpace(path)

	scr := &tmuxScreen{t: t, socket: fmt.Sprintf("caploop-tune-%d", os.Getpid()), name: "tune"}
	shell := fmt.Sprintf("NO_COLOR=1 %s live %s --range 1V..3V; echo exit=$?; sleep 30", bin, path)
	if out, err := scr.tmux("new-session", "-d", "-s", scr.name, "-x", "120", "-y", "40", "sh", "-c", shell); err != nil {
		t.Fatalf("tmux new-session: %v %s", err, out)
	}
	t.Cleanup(func() { scr.tmux("kill-server") })

	scr.waitFor("live screen", regexp.MustCompile(`LIVE · \S+ · connected · [1-9]\d* S/s`), 10*time.Second)
	scr.keys("t")
	scr.waitFor("plan to confirm", regexp.MustCompile(`send these settings\? y/n`), 15*time.Second)
	plan := scr.capture()
	if !strings.Contains(plan, "tune") {
		t.Errorf("the tune view is not shown; screen:\n%s", plan)
	}
	scr.keys("y")
	scr.waitFor("progress", regexp.MustCompile(`tune  step \d+ of \d+: `), 15*time.Second)
	m := scr.waitFor("before/after line", regexp.MustCompile(`before -> after: band jumps (\d+) -> (\d+), switching`), 60*time.Second)
	t.Logf("%s", m[0])
	before, _ := strconv.Atoi(m[1])
	after, _ := strconv.Atoi(m[2])
	if before == 0 {
		t.Errorf("band jumps with the board's band 2 = 0, want > 0 (the scenario's band is too narrow)")
	}
	if after != 0 {
		t.Errorf("band jumps with the advised band = %d, want 0 (the loop model's prediction)", after)
	}
	restore := scr.waitFor("restored", regexp.MustCompile(`tune done; restored: (set [^;(]+?) \(t runs`), 5*time.Second)[1]

	// Again, and q in the middle of the run: the screen ends once the board has its own
	// settings back, the restore line being the last set it took.
	scr.keys("t")
	scr.waitFor("plan to confirm again", regexp.MustCompile(`send these settings\? y/n`), 15*time.Second)
	scr.keys("y")
	scr.waitFor("second run under way", regexp.MustCompile(`tune  step [2-9] of \d+: `), 15*time.Second)
	scr.keys("q")
	scr.waitFor("exit status", regexp.MustCompile(`exit=0`), 10*time.Second)
	// The board logs what it took: the restore's setpoint, then its settings line.
	wantSP := regexp.MustCompile(`sp=(\d+)`).FindStringSubmatch(restore)
	if wantSP == nil {
		t.Fatalf("restore line %q has no sp", restore)
	}
	time.Sleep(300 * time.Millisecond)
	log, _ := os.ReadFile(simLogPath)
	var answers []string
	for _, l := range strings.Split(string(log), "\n") {
		if _, rest, ok := strings.Cut(l, "s set # "); ok {
			answers = append(answers, rest)
		}
	}
	n := len(answers)
	if n < 2 || answers[n-2] != "setpoint "+wantSP[1]+" held" || !strings.HasSuffix(answers[n-1], " deadband=2") {
		t.Errorf("after q the board's last answers are %q, want setpoint %s back and its own deadband=2 (restore line %q)", answers[max(n-2, 0):], wantSP[1], restore)
	}
}
