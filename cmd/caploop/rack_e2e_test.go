package main

import (
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"
)

// startSim starts the rack's boards: `caploop sim --pty --wait-open --speed 2` with args,
// and returns the device paths it prints (one a board).
func startSim(t *testing.T, bin string, boards int, args ...string) []string {
	t.Helper()
	return servePTY(t, bin, boards, append([]string{"--wait-open", "--speed", "2"}, args...)...)
}

// rowRE matches the rack row of the port ending in name, in the given state, with the
// verdict.
func rowRE(name, state, verdict string) string {
	return fmt.Sprintf(`(?m)^[> ] \S*%s +db \d+ 10b 1ms +%s .*%s`, regexp.QuoteMeta(name), state, verdict)
}

// TestRackScreenTmux runs four virtual boards at twice real time (two from one `sim --boards 2`, one that
// is unplugged and plugged in again, one with a deadband of 0 counts whose ripple fails
// --max-ripple) and `caploop live` on the four paths in tmux, recording them into a rig
// folder; then quits and summarises the folder.
func TestRackScreenTmux(t *testing.T) {
	if testing.Short() {
		t.Skip("end-to-end rack test takes about 12 s; skipped with -short")
	}
	needTmux(t)
	t.Parallel()
	dir := t.TempDir()
	bin := buildCaploop(t, dir)

	// Ripple of these parts, measured with sim --fast and summary (10 s of the demo
	// profile): C 2.2 µF or 1.8 µF with deadband 6 stays under 64 mV; the demo's parts with
	// deadband 0 reach 107-117 mV. The gate at 80 mV sits between them.
	pair := startSim(t, bin, 2, "--boards", "2", "--link", filepath.Join(dir, "pa"), "--c", "2.2u", "--deadband", "6")
	unplug := startSim(t, bin, 1, "--link", filepath.Join(dir, "pu"), "--c", "2.2u", "--deadband", "6",
		"--unplug-after", "6s", "--replug-after", "3s")
	narrow := startSim(t, bin, 1, "--link", filepath.Join(dir, "pn"), "--deadband", "0")
	ports := append(append(pair, unplug...), narrow...)
	names := []string{"pa1", "pa2", "pu", "pn"}
	for i, p := range ports {
		if filepath.Base(p) != names[i] {
			t.Fatalf("board %d at %s, want .../%s", i+1, p, names[i])
		}
	}

	rigDir := filepath.Join(dir, "rig")
	scr := &tmuxScreen{t: t, socket: fmt.Sprintf("caploop-rack-%d", os.Getpid()), name: "rack"}
	shell := fmt.Sprintf("NO_COLOR=1 %s live %s --max-ripple 80mV --record %s; echo exit=$?; sleep 60", bin, strings.Join(ports, " "), rigDir)
	if out, err := scr.tmux("new-session", "-d", "-s", scr.name, "-x", "130", "-y", "30", "sh", "-c", shell); err != nil {
		t.Fatalf("tmux new-session: %v %s", err, out)
	}
	t.Cleanup(func() { scr.tmux("kill-server") })

	scr.waitFor("four rows", regexp.MustCompile(`caploop rack · gates: max-ripple 80mV +4 boards`), 10*time.Second)
	for _, n := range names[:3] {
		scr.waitFor(n+" live and passing", regexp.MustCompile(rowRE(n, "live", "pass")), 15*time.Second)
	}
	scr.waitFor("narrow deadband fails", regexp.MustCompile(rowRE("pn", "live", "FAIL ripple")), 15*time.Second)

	// The unplugged board says so while the others stay live (samples within the last
	// 2 s), then comes back.
	unplugged := regexp.MustCompile(rowRE("pu", "unplugged", ""))
	scr.waitFor("unplug shown", unplugged, 15*time.Second)
	screen := scr.capture()
	t.Logf("rack with a board unplugged:\n%s", screen)
	for _, n := range []string{"pa1", "pa2", "pn"} {
		if !regexp.MustCompile(rowRE(n, "live", "")).MatchString(screen) {
			t.Errorf("board %s is not live while pu is unplugged:\n%s", n, screen)
		}
	}
	scr.waitFor("re-plug shown", regexp.MustCompile(rowRE("pu", "live", "pass")), 15*time.Second)

	// Enter opens the selected (first) board's bench screen; Esc returns.
	scr.keys("Enter")
	scr.waitFor("board screen", regexp.MustCompile(`rack · board 1 of 4 · \S*pa1 · live · esc: back to the rack[\s\S]*LIVE · \S*pa1 · connected`), 5*time.Second)
	scr.keys("Escape")
	scr.waitFor("back to the rack", regexp.MustCompile(`caploop rack · gates`), 5*time.Second)

	scr.keys("q")
	scr.waitFor("exit status 1", regexp.MustCompile(`exit=1`), 10*time.Second)
	if s := scr.capture(); !strings.Contains(s, "board 4") || !strings.Contains(s, "max-ripple") {
		t.Errorf("the failing board is not named on exit:\n%s", s)
	}

	// The recorded rig: one row per board; exit 1 with the gate, 0 without.
	out, err := exec.Command(bin, "summary", rigDir, "-q", "--no-advice", "--max-ripple", "80mV").CombinedOutput()
	var ee *exec.ExitError
	if !errors.As(err, &ee) || ee.ExitCode() != 1 {
		t.Fatalf("summary of the rig with the gate: %v, want exit 1\n%s", err, out)
	}
	for i, n := range names {
		re := regexp.MustCompile(fmt.Sprintf(`(?m)^  %d +%s\.cap +\S+ +- +\d+ .* (pass|FAIL \(\d+ gates\)) *$`, i+1, n))
		m := re.FindStringSubmatch(string(out))
		if m == nil {
			t.Errorf("no row for board %d (%s) in:\n%s", i+1, n, out)
			continue
		}
		if want := (n == "pn"); (m[1] != "pass") != want {
			t.Errorf("board %s verdict %q, want failing = %v", n, m[1], want)
		}
	}
	js, err := exec.Command(bin, "summary", rigDir, "-q", "--no-advice", "--json").Output()
	if err != nil {
		t.Fatalf("summary --json without gates: %v, want exit 0", err)
	}
	var docs []struct {
		SchemaVersion int    `json:"schema_version"`
		Verdict       string `json:"verdict"`
		Board         struct {
			Capture, Port string
		} `json:"board"`
		Samples int64 `json:"samples"`
	}
	if err := json.Unmarshal(js, &docs); err != nil || len(docs) != 4 {
		t.Fatalf("summary --json: %d docs, %v\n%s", len(docs), err, js)
	}
	for i, d := range docs {
		if d.SchemaVersion != 1 || d.Board.Capture != names[i]+".cap" || d.Board.Port != ports[i] || d.Samples < 1000 || d.Verdict != "pass" {
			t.Errorf("board %d doc: %+v", i+1, d)
		}
	}
}
