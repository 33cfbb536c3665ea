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

// TestLiveDiagnosticsFixedTmux applies the advised deadband on the virtual board from
// the screen (d, then y) and checks, as a user would read it: the trace no longer shows
// the narrow band as a diagnostic of now, it lists it as fixed by the new deadband once
// 5 s have passed without a band jump (CONVENTIONS.md), and the figures view's
// before/after panel names what the change was meant to move and the trade made.
func TestLiveDiagnosticsFixedTmux(t *testing.T) {
	needTmux(t)
	t.Parallel()
	dir := t.TempDir()
	bin := buildCaploop(t, dir)

	link := filepath.Join(dir, "board")
	path := servePTY(t, bin, 1, "--link", link)[0]

	scr := &tmuxScreen{t: t, socket: fmt.Sprintf("caploop-diag-%d", os.Getpid()), name: "live"}
	cmdline := fmt.Sprintf("NO_COLOR=1 %s live %s", bin, path)
	if out, err := scr.tmux("new-session", "-d", "-s", scr.name, "-x", "120", "-y", "40", cmdline); err != nil {
		t.Fatalf("tmux new-session: %v %s", err, out)
	}
	t.Cleanup(func() { scr.tmux("kill-server") })

	scr.waitFor("live screen", regexp.MustCompile(`LIVE · \S+ · connected`), 10*time.Second)
	// Before the change the narrow band is a diagnostic of now, with its warning glyph.
	scr.waitFor("band too narrow shown", regexp.MustCompile(`▲ (band too narrow|Setpoint [^\n]*band jumps)`), 20*time.Second)
	m := scr.waitFor("suggested deadband", regexp.MustCompile(`advice: deadband (\d+) counts \(now 4\) · d sends it · (preliminary|firm)`), 20*time.Second)
	want := m[1]
	scr.keys("d")
	scr.waitFor("confirmation question", regexp.MustCompile(`send "set deadband=`+want+`" to the board\? y/n`), 5*time.Second)
	scr.keys("y")
	scr.waitFor("board confirmation", regexp.MustCompile(`the board confirmed deadband `+want), 10*time.Second)

	// The trace: the old band's problem is earlier, then fixed by the new deadband.
	fixed := regexp.MustCompile(`✓ band too narrow \(segments? [\d, ]+\), fixed at \S+ by deadband ` + want)
	scr.waitFor("fixed on the trace", fixed, 20*time.Second)
	screen := scr.capture()
	for _, l := range strings.Split(screen, "\n") {
		if strings.Contains(l, "▲") && (strings.Contains(l, "band too narrow") || strings.Contains(l, "band jumps")) {
			t.Errorf("the trace still shows the narrow band as a diagnostic of now: %q\nscreen:\n%s", l, screen)
		}
	}

	// The figures view: the trade line above the before/after table, and the diagnostics
	// split into now and earlier.
	scr.keys("2")
	scr.waitFor("trade line", regexp.MustCompile(`deadband 4 → `+want+`: meant to cut band jumps and switching; trade: ripple, rms and mean error grow within the band`), 5*time.Second)
	scr.waitFor("diagnostics split", regexp.MustCompile(`diagnostics now \(since deadband `+want+` at \S+\)`), 5*time.Second)
	scr.keys("pgdown")
	scr.waitFor("fixed on view 2", regexp.MustCompile(`diagnostics earlier \(before deadband `+want+` at \S+\):\s+✓ fixed at \S+ by deadband `+want+`: Setpoints? `), 5*time.Second)

	scr.keys("q")
	deadline := time.Now().Add(5 * time.Second)
	for scr.alive() && time.Now().Before(deadline) {
		time.Sleep(100 * time.Millisecond)
	}
	if scr.alive() {
		t.Fatalf("the screen did not quit on q; screen:\n%s", scr.capture())
	}
}
