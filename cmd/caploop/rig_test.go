package main

import (
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"github.com/caploop/caploop/telemetry/rig"
)

// TestRecordRigAndSummary serves three virtual boards in process (sim --pty --boards 3),
// records them into one folder with record PORT PORT PORT --out DIR, and summarises the
// folder: a row per board, and the exit codes of summary (0, 1 on a failed gate, 2 on
// an unusable capture).
func TestRecordRigAndSummary(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	ctx, cancel := context.WithCancel(context.Background())
	var stdout lockedBuf
	done := make(chan error, 1)
	go func() {
		done <- runSim(t, ctx, &stdout, "sim", "--pty", "--boards", "3", "--wait-open", "--speed", "4", "--link", filepath.Join(dir, "b"))
	}()
	defer func() {
		cancel()
		select {
		case err := <-done:
			if err != nil {
				t.Errorf("sim --boards 3 returned %v after cancel", err)
			}
		case <-time.After(5 * time.Second):
			t.Error("sim --boards 3 did not stop")
		}
	}()
	deadline := time.Now().Add(5 * time.Second)
	for strings.Count(stdout.String(), "\n") < 3 {
		if time.Now().After(deadline) {
			t.Fatalf("sim --boards 3 printed %q", stdout.String())
		}
		time.Sleep(10 * time.Millisecond)
	}
	ports := strings.Fields(stdout.String())
	for i, p := range ports {
		if want := filepath.Join(dir, "b"+string(rune('1'+i))); p != want {
			t.Errorf("board %d path %s, want %s", i+1, p, want)
		}
	}

	rigDir := filepath.Join(dir, "rig")
	root := newRoot()
	var errb lockedBuf
	root.SetErr(&errb)
	// The third board through a link in another folder named like the first board's port:
	// the two captures would collide, so the second gets a suffix.
	other := filepath.Join(dir, "x")
	os.Mkdir(other, 0o755)
	if err := os.Symlink(ports[2], filepath.Join(other, "b1")); err != nil {
		t.Fatal(err)
	}
	root.SetArgs([]string{"record", ports[0], ports[1], filepath.Join(other, "b1"), "--out", rigDir, "--duration", "1500ms"})
	if err := root.Execute(); err != nil {
		t.Fatalf("record: %v\n%s", err, errb.String())
	}
	f, err := rig.Read(rigDir)
	if err != nil {
		t.Fatal(err)
	}
	want := []string{"b1.cap", "b2.cap", "b1-2.cap"}
	for i, b := range f.Boards {
		if b.Capture != want[i] || b.Port == "" {
			t.Errorf("rig board %d: %+v, want capture %s", i+1, b, want[i])
		}
	}
	// A second recording into the same folder is refused without --force.
	root = newRoot()
	root.SetErr(&errb)
	root.SetArgs([]string{"record", ports[0], ports[1], "--out", rigDir, "--duration", "100ms"})
	if err := root.Execute(); err == nil || !strings.Contains(err.Error(), "exists") {
		t.Errorf("record into a used rig folder: %v, want a refusal", err)
	}

	out, _, code := runSummaryCmd(t, rigDir, "--no-advice")
	if code != 0 {
		t.Fatalf("summary DIR without gates: exit %d\n%s", code, out)
	}
	for i, n := range want {
		re := regexp.MustCompile(`(?m)^  ` + string(rune('1'+i)) + ` +` + regexp.QuoteMeta(n) + ` +\S+ +- +[1-9]\d+ .* pass *$`)
		if !re.MatchString(out) {
			t.Errorf("no passing row for %s in\n%s", n, out)
		}
	}
	// Every board's ripple is above 1 mV and below 1 V (10-bit ADC on 5 V: a count is 4.9 mV).
	if _, _, code := runSummaryCmd(t, rigDir, "--no-advice", "--max-ripple", "1V"); code != 0 {
		t.Errorf("--max-ripple 1V: exit %d, want 0", code)
	}
	out, _, code = runSummaryCmd(t, rigDir, "--no-advice", "--max-ripple", "1mV")
	if code != 1 || strings.Count(out, "FAIL (") != 3 {
		t.Errorf("--max-ripple 1mV: exit %d, want 1 with three failing rows\n%s", code, out)
	}
	js, _, code := runSummaryCmd(t, rigDir, "--no-advice", "--json", "--max-ripple", "1mV")
	var docs []map[string]any
	if err := json.Unmarshal([]byte(js), &docs); err != nil || len(docs) != 3 || code != 1 {
		t.Fatalf("--json: %d docs, exit %d, %v", len(docs), code, err)
	}
	for i, d := range docs {
		if d["schema_version"] != 1.0 || d["verdict"] != "fail" || d["segments"] == nil {
			t.Errorf("doc %d: schema_version %v verdict %v", i+1, d["schema_version"], d["verdict"])
		}
	}

	// An unusable capture in the rig: exit 2, the others still in the table.
	f.Boards = append(f.Boards, rig.Board{Capture: "empty.cap", Port: "/dev/ttyACM9"})
	os.WriteFile(filepath.Join(rigDir, "empty.cap"), nil, 0o644)
	if err := rig.Write(rigDir, f); err != nil {
		t.Fatal(err)
	}
	out, _, code = runSummaryCmd(t, rigDir, "--no-advice")
	if code != 2 || !regexp.MustCompile(`(?m)^  4 +empty\.cap .*unusable`).MatchString(out) || strings.Count(out, " pass") != 3 {
		t.Errorf("rig with an empty capture: exit %d, want 2 and its row unusable\n%s", code, out)
	}
	// The HTML report draws capture files, not a rig folder.
	if _, _, code := runSummaryCmd(t, rigDir, "--report", filepath.Join(dir, "r.html")); code != 2 {
		t.Errorf("--report with a rig folder: exit %d, want 2", code)
	}
	// A folder with other arguments is a usage error.
	if _, _, code := runSummaryCmd(t, rigDir, filepath.Join(rigDir, "b1.cap")); code != 2 {
		t.Errorf("folder and file: exit %d, want 2", code)
	}
	// Without rig.json, the captures of the folder by name.
	os.Remove(filepath.Join(rigDir, rig.FileName))
	os.Remove(filepath.Join(rigDir, "empty.cap"))
	out, _, code = runSummaryCmd(t, rigDir, "--no-advice")
	if code != 0 || !strings.Contains(out, "3 boards") {
		t.Errorf("folder without rig.json: exit %d\n%s", code, out)
	}
}
