package main

import (
	"bytes"
	"errors"
	"runtime/debug"
	"strings"
	"testing"

	"github.com/caploop/caploop/analysis/loop/virtual"
)

// runRoot runs caploop with args in process and returns its output and exit code.
func runRoot(t *testing.T, args ...string) (stdout, stderr string, code int) {
	t.Helper()
	root := newRoot()
	var out, errb bytes.Buffer
	root.SetOut(&out)
	root.SetErr(&errb)
	root.SetArgs(args)
	if err := root.Execute(); err != nil {
		code = 2
		var ee *exitError
		if errors.As(err, &ee) {
			code = ee.code
		}
		errb.WriteString(err.Error())
	}
	return out.String(), errb.String(), code
}

func TestVersion(t *testing.T) {
	out, _, code := runRoot(t, "--version")
	if code != 0 || !strings.HasPrefix(out, "caploop ") || !strings.Contains(out, "go1.") {
		t.Errorf("--version: %q, exit %d", out, code)
	}
	old := version
	version = "1.4.0"
	defer func() { version = old }()
	if out, _, _ := runRoot(t, "--version"); out != "caploop 1.4.0\n" {
		t.Errorf("--version with a set version: %q", out)
	}
	info := &debug.BuildInfo{GoVersion: "go1.26.8", Main: debug.Module{Version: "(devel)"}, Settings: []debug.BuildSetting{
		{Key: "vcs.revision", Value: "0123456789abcdef0123"}, {Key: "vcs.time", Value: "2026-11-30T10:00:00Z"}, {Key: "vcs.modified", Value: "true"}}}
	if got, want := buildVersion(info), "devel 0123456789ab+modified (2026-11-30), go1.26.8"; got != want {
		t.Errorf("buildVersion = %q, want %q", got, want)
	}
	info.Main.Version = "v1.2.3"
	if got, want := buildVersion(info), "v1.2.3, go1.26.8"; got != want {
		t.Errorf("buildVersion of a tagged module = %q, want %q", got, want)
	}
}

// TestWindowRefused: a window that is not a positive duration is a usage error (exit 2)
// with a message, before any port or file is opened.
func TestWindowRefused(t *testing.T) {
	for _, args := range [][]string{
		{"live", "/dev/ttyNOPE", "--window", "-1s"},
		{"live", "/dev/ttyNOPE", "--window", "0s"},
		{"replay", "../../testdata/tuned.cap", "--window", "-1s"},
	} {
		_, stderr, code := runRoot(t, args...)
		if code != 2 || !strings.Contains(stderr, "--window") || !strings.Contains(stderr, "positive duration") {
			t.Errorf("%v: exit %d, %q; want exit 2 naming --window", args, code, stderr)
		}
	}
}

// TestLivePortMissing: live on a port that is not there fails at once, as record does.
func TestLivePortMissing(t *testing.T) {
	_, stderr, code := runRoot(t, "live", "/dev/ttyNOPE")
	if code != 2 || !strings.Contains(stderr, "/dev/ttyNOPE not found") {
		t.Errorf("live /dev/ttyNOPE: exit %d, %q; want exit 2 and not found", code, stderr)
	}
}

// TestRecordPortArgument: record takes the port as its argument; --port is a hidden
// alias (given with an argument, it is one more port of a rig).
func TestRecordPortArgument(t *testing.T) {
	dir := t.TempDir()
	_, stderr, code := runRoot(t, "record", "--out", dir+"/a.cap")
	if code != 2 || !strings.Contains(stderr, "record PORT --out FILE") {
		t.Errorf("record without a port: exit %d, %q", code, stderr)
	}
	_, stderr, code = runRoot(t, "record", "/dev/ttyNOPE")
	if code != 2 || !strings.Contains(stderr, "--out FILE is required") {
		t.Errorf("record without --out: exit %d, %q", code, stderr)
	}
	out, _, _ := runRoot(t, "record", "--help")
	if !strings.Contains(out, "record PORT... --out FILE|DIR") || strings.Contains(out, "--port") {
		t.Errorf("record --help shows --port or lacks the usage:\n%s", out)
	}
	out, _, _ = runRoot(t, "ports", "--help")
	if strings.Contains(out, "--port") || !strings.Contains(out, "first argument") {
		t.Errorf("ports --help still says --port:\n%s", out)
	}
}

// TestSupplyRailName: a supply written as on a schematic, 3v3, is 3.3 V in design and in
// a scenario.
func TestSupplyRailName(t *testing.T) {
	out, stderr, code := runRoot(t, "design", "--supply", "3v3", "--period", "1ms", "--ripple", "100mV", "--series", "E12")
	if code != 0 || !strings.Contains(out, "supply 3.3 V") {
		t.Errorf("design --supply 3v3: exit %d, %q %q", code, out, stderr)
	}
	sc := virtual.DefaultScenario()
	if err := sc.Set("supply", "3v3"); err != nil || sc.Circuit.Supply != 3.3 {
		t.Errorf("scenario supply = 3v3: %v, %g", err, sc.Circuit.Supply)
	}
}

// TestNoFlowControlKey: the fault key reads true/false, and a scenario file written
// with it set reads back with it set.
func TestNoFlowControlKey(t *testing.T) {
	sc := virtual.DefaultScenario()
	if sc.Faults.NoFlowControl {
		t.Fatal("flow control is off by default; want on")
	}
	if err := sc.Set("no-flow-control", "maybe"); err == nil {
		t.Error(`no-flow-control = maybe accepted`)
	}
	if err := sc.Set("no-flow-control", "true"); err != nil || !sc.Faults.NoFlowControl {
		t.Fatalf("no-flow-control = true: %v", err)
	}
	var b bytes.Buffer
	if err := virtual.WriteScenario(&b, &sc); err != nil || !strings.Contains(b.String(), "no-flow-control = true\n") {
		t.Errorf("written scenario lacks the key: %v\n%s", err, b.String())
	}
}
