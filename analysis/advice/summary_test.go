package advice

import (
	"errors"
	"math"
	"strings"
	"testing"

	"github.com/caploop/caploop/analysis"
)

func fp(v float64) *float64 { return &v }
func ip(v int) *int         { return &v }

// boardSummary is a hand-made summary: a bench reference whose 1 uF capacitor measures
// 30 % low (tau 33 ms with 47 kOhm: a class-2 ceramic under DC bias).
func boardSummary() *analysis.Summary {
	return &analysis.Summary{
		SamplePeriodS: fp(1e-3),
		Board: analysis.Board{VrefV: fp(5), ADCBits: ip(10), Mode: "three-state", DeadbandCounts: fp(6),
			SupplyV: fp(5), ROhm: fp(47e3), CF: fp(1e-6)},
		Plant: analysis.Plant{TauChargeS: fp(0.7 * 47e3 * 1e-6), NoiseRMSCounts: fp(0.6),
			VHighV: fp(5), EffectiveCF: fp(0.7e-6)},
		Segments: []analysis.Segment{{SetpointCounts: 300}, {SetpointCounts: 600}},
	}
}

func TestFromSummaryDesignsWithRealC(t *testing.T) {
	a, err := FromSummary(boardSummary(), Goals{})
	if err != nil {
		t.Fatal(err)
	}
	if got := a.Goals.CRatio; math.Abs(got-0.7) > 1e-9 {
		t.Errorf("c ratio = %g, want 0.7", got)
	}
	found := false
	for _, n := range a.Notes {
		found = found || strings.Contains(n, "30 % lower than marked")
	}
	if !found {
		t.Errorf("notes do not say the capacitor is 30 %% low: %q", a.Notes)
	}
	for _, c := range append(a.Candidates, *a.Current) {
		if math.Abs(c.EffectiveCF-0.7*c.CF) > 1e-12 {
			t.Errorf("R=%g C=%g: effective C %g, want 0.7 x marked", c.ROhm, c.CF, c.EffectiveCF)
		}
	}
	if a.Current == nil || a.Current.DeadbandCounts != 6 {
		t.Errorf("present circuit = %+v, want the board's band 6", a.Current)
	}
	if !a.Goals.NoiseMeasured || a.Goals.NoiseRMSCounts != 0.6 {
		t.Errorf("noise = %g measured %v, want the measured 0.6", a.Goals.NoiseRMSCounts, a.Goals.NoiseMeasured)
	}
	if got := a.Goals.SetpointCounts; len(got) != 2 || got[0] != 300 || got[1] != 600 {
		t.Errorf("setpoints = %v, want [300 600] from the segments", got)
	}
	// The band for the present circuit: step at 300 counts with the real tau.
	w := a.DeadbandWorking
	want := bandFor(w.StepCounts + 3*0.6)
	if *a.DeadbandCounts != want {
		t.Errorf("deadband = %d, want %d from step %.2f + 3 x 0.6", *a.DeadbandCounts, want, w.StepCounts)
	}
}

func TestFromSummaryMissingBoard(t *testing.T) {
	s := boardSummary()
	s.Board.VrefV = nil
	s.SamplePeriodS = nil
	_, err := FromSummary(s, Goals{})
	if !errors.Is(err, ErrNoBoard) || !strings.Contains(err.Error(), "vref") || !strings.Contains(err.Error(), "period") {
		t.Errorf("err = %v, want ErrNoBoard naming vref and the period", err)
	}
	if _, err := FromSummary(nil, Goals{}); err == nil {
		t.Errorf("FromSummary(nil) err = nil")
	}
}

func TestFromSummaryImplausibleC(t *testing.T) {
	s := boardSummary()
	s.Plant.TauChargeS = fp(3.5 * 47e3 * 1e-6)
	a, err := FromSummary(s, Goals{})
	if err != nil {
		t.Fatal(err)
	}
	if a.Goals.CRatio != 1 {
		t.Errorf("c ratio = %g, want 1 (3.5 x is not plausible)", a.Goals.CRatio)
	}
	if !strings.Contains(strings.Join(a.Notes, "\n"), "poor fit") {
		t.Errorf("notes do not mention the ignored ratio: %q", a.Notes)
	}
}
