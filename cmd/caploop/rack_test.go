package main

import (
	"io"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/report"
	"github.com/caploop/caploop/tui"
)

func TestExpandPorts(t *testing.T) {
	dir := t.TempDir()
	for _, n := range []string{"ttyACM1", "ttyACM0", "ttyUSB0"} {
		os.WriteFile(filepath.Join(dir, n), nil, 0o644)
	}
	got, err := expandPorts([]string{filepath.Join(dir, "ttyACM*"), filepath.Join(dir, "ttyACM0"), "/dev/ttyS9"}, false, io.Discard)
	want := []string{filepath.Join(dir, "ttyACM0"), filepath.Join(dir, "ttyACM1"), "/dev/ttyS9"}
	if err != nil || !reflect.DeepEqual(got, want) {
		t.Errorf("expandPorts = %q, %v; want %q", got, err, want)
	}
	if _, err := expandPorts([]string{filepath.Join(dir, "ttyXYZ*")}, false, io.Discard); err == nil || !strings.Contains(err.Error(), "matches no path") {
		t.Errorf("a pattern matching nothing: %v", err)
	}
}

func TestRackVerdict(t *testing.T) {
	g := report.GateText{Ripple: "20mV", Jumps: "0"}
	gs, err := g.Parse()
	if err != nil {
		t.Fatal(err)
	}
	if got := gateNames(g); got != "max-ripple 20mV, max-jumps 0" {
		t.Errorf("gateNames = %q", got)
	}
	v := verdictOf(gs, true)
	seg := func(ripple float64, jumps int64) analysis.Segment {
		return analysis.Segment{SetpointCounts: 246, SetpointV: f64p(1.2), SteadySamples: 100, RipplePPV: f64p(ripple), BandJumps: jumps}
	}
	pass := v(&analysis.Summary{Segments: []analysis.Segment{seg(0.015, 0)}})
	if pass.State != tui.VerdictPass || pass.Short != "pass" {
		t.Errorf("15 mV, no jumps: %+v", pass)
	}
	fail := v(&analysis.Summary{Segments: []analysis.Segment{seg(0.015, 0), seg(0.031, 3)}})
	if fail.State != tui.VerdictFail || fail.Short != "FAIL ripple" || !strings.Contains(fail.Detail, "segment 2") || !strings.Contains(fail.Detail, "and 1 more") {
		t.Errorf("31 mV and 3 jumps in segment 2: %+v", fail)
	}
	// With only the ripple gate, a segment without a steady part has nothing to judge.
	rippleOnly, _ := (&report.GateText{Ripple: "20mV"}).Parse()
	wait := verdictOf(rippleOnly, true)(&analysis.Summary{Segments: []analysis.Segment{{SetpointCounts: 246}}})
	if wait.State != tui.VerdictNone || wait.Short != "waiting" {
		t.Errorf("no steady part: %+v", wait)
	}
	if none := verdictOf(gs, false)(&analysis.Summary{Segments: []analysis.Segment{seg(1, 9)}}); none != (tui.Verdict{}) {
		t.Errorf("no gates: %+v", none)
	}
}

func f64p(v float64) *float64 { return &v }
