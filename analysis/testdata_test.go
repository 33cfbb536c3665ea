package analysis

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/caploop/caploop/telemetry"
)

// captureTruth is the part of a testdata NAME.truth.json (written by the virtual board's
// generator) these tests read.
type captureTruth struct {
	DataLines int64 `json:"data_lines"`
	Derived   struct {
		TauChargeS     float64  `json:"tau_charge_s"`
		TauDischargeS  float64  `json:"tau_discharge_s"`
		TauHoldS       *float64 `json:"tau_hold_s"`
		SenseHighV     float64  `json:"sense_high_v"`
		UnreachableSPs []int    `json:"unreachable_sps"`
	} `json:"derived"`
}

func summarizeTestdata(t *testing.T, name string) (*Summary, captureTruth) {
	t.Helper()
	path := filepath.Join("..", "testdata", name)
	src, err := telemetry.OpenFile(path)
	if err != nil {
		t.Skipf("testdata capture %s is not there: %v", path, err)
	}
	defer src.Close()
	sc := telemetry.NewScanner(src)
	sc.Name = name
	sum, err := Summarize(sc, Options{})
	if err != nil {
		t.Fatalf("Summarize(%s): %v", name, err)
	}
	var tr captureTruth
	ext := filepath.Ext(name)
	b, err := os.ReadFile(filepath.Join("..", "testdata", name[:len(name)-len(ext)]+".truth.json"))
	if err != nil {
		t.Fatalf("truth of %s: %v", name, err)
	}
	if err := json.Unmarshal(b, &tr); err != nil {
		t.Fatalf("truth of %s: %v", name, err)
	}
	return sum, tr
}

// within reports whether want lies in the 95 % interval ci, or within tol of got when
// there is no interval.
func within(got *float64, ci *[2]float64, want, tol float64) bool {
	if got == nil {
		return false
	}
	if ci != nil && want >= ci[0] && want <= ci[1] {
		return true
	}
	return math.Abs(*got-want) <= tol*math.Abs(want)
}

// TestTestdataCaptures runs the whole-file pass over the virtual board's captures and
// checks the identified plant against the closed-form truth the generator wrote beside
// each file (tau and the sensed charge level), and the diagnostics each scenario is
// made to show.
func TestTestdataCaptures(t *testing.T) {
	cases := []struct {
		file      string
		diags     []string // codes that must be present
		noDiags   []string // codes that must be absent
		tauTol    float64  // relative, when the interval misses
		noTau     bool     // the capture gives no charge run to fit
		samplesEq bool     // every data line is clean
		holdTol   float64  // relative tolerance of tau_hold when the interval misses (0 = 10 %)
		wide      bool     // too few charge runs: tau and v_high are not identifiable
	}{
		{file: "three-state-good.txt", noDiags: []string{DiagBandTooNarrow, DiagUnreachable}, tauTol: 0.05, samplesEq: true},
		{file: "three-state-chatter.txt", diags: []string{DiagBandTooNarrow}, tauTol: 0.05, samplesEq: true},
		{file: "two-state-ramp.txt", tauTol: 0.02, samplesEq: true},
		{file: "loaded-droop.txt", tauTol: 0.05, samplesEq: true},
		{file: "follower-limit.txt", diags: []string{DiagUnreachable, DiagSenseDrop}, tauTol: 0.02, samplesEq: true},
		{file: "dirty-stream.txt", diags: []string{DiagRejectedLines, DiagDroppedSamples}, tauTol: 0.1, holdTol: 0.3, wide: true},
		{file: "tuned.cap", tauTol: 0.1, samplesEq: true}, // the joint fit of charge and discharge (jointfit.go)
	}
	for _, tc := range cases {
		t.Run(tc.file, func(t *testing.T) {
			sum, tr := summarizeTestdata(t, tc.file)
			if tc.samplesEq && sum.Samples != tr.DataLines {
				t.Errorf("samples: got %d, want %d", sum.Samples, tr.DataLines)
			}
			p := sum.Plant
			if tc.wide {
				// Too few charge runs: the conventions' 10 % rule must null the figures, with the reason.
				if p.TauChargeS != nil || !strings.HasPrefix(p.TauChargeSReason, "not identifiable") {
					t.Errorf("tau_charge: got %g (%q), want null: its interval is wider than 10 %%", deref(p.TauChargeS), p.TauChargeSReason)
				}
			} else if !tc.noTau {
				if !within(p.TauChargeS, p.TauChargeCIS, tr.Derived.TauChargeS, tc.tauTol) {
					t.Errorf("tau_charge: got %g %v, want %g (in the interval or within %g %%)", deref(p.TauChargeS), p.TauChargeCIS, tr.Derived.TauChargeS, 100*tc.tauTol)
				}
				if !within(p.VHighV, p.VHighCIV, tr.Derived.SenseHighV, 0.02) {
					t.Errorf("v_high: got %g %v, want %g (in the interval or within 2 %%)", deref(p.VHighV), p.VHighCIV, tr.Derived.SenseHighV)
				}
			}
			holdTol := tc.holdTol
			if holdTol == 0 {
				holdTol = 0.1
			}
			if h := tr.Derived.TauHoldS; h != nil && p.TauHoldS != nil && !within(p.TauHoldS, p.TauHoldCIS, *h, holdTol) {
				t.Errorf("tau_hold: got %g %v, want %g", deref(p.TauHoldS), p.TauHoldCIS, *h)
			}
			codes := map[string]bool{}
			for _, d := range sum.Diagnostics {
				codes[d.Code] = true
			}
			for _, c := range tc.diags {
				if !codes[c] {
					t.Errorf("diagnostic %s missing; got %v", c, sum.Diagnostics)
				}
			}
			for _, c := range tc.noDiags {
				if codes[c] {
					t.Errorf("diagnostic %s present, want none", c)
				}
			}
			for _, seg := range sum.Segments {
				want := slices.Contains(tr.Derived.UnreachableSPs, int(seg.SetpointCounts))
				if seg.Unreachable != want {
					t.Errorf("segment at %g counts: unreachable %v, want %v", seg.SetpointCounts, seg.Unreachable, want)
				}
			}
		})
	}
}
