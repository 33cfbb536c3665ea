package report

import (
	"testing"

	"github.com/caploop/caploop/analysis"
)

// TestGatePercentOfFullScale: a limit in % becomes volts with the file's vref, and a
// file without a vref has no full scale: the gate is skipped there and says why.
func TestGatePercentOfFullScale(t *testing.T) {
	g, err := (&GateText{Ripple: "2%", Overshoot: "0.5 %"}).Parse()
	if err != nil {
		t.Fatal(err)
	}
	f := func(v float64) *float64 { return &v }
	sum := &analysis.Summary{
		Board:    analysis.Board{VrefV: f(3.3)},
		Segments: []analysis.Segment{{SetpointV: f(1.65), SetpointCounts: 512, RipplePPV: f(0.07)}},
		Steps:    []analysis.StepFigures{{FromV: f(0), ToV: f(1.65), ToCounts: 512, OvershootV: f(0.01)}},
	}
	res := g.Check(sum)
	if len(res) != 2 {
		t.Fatalf("%d results, want 2: %+v", len(res), res)
	}
	// 2 % of 3.3 V = 66 mV < 70 mV: fail; 0.5 % of 3.3 V = 16.5 mV > 10 mV: pass.
	if r := res[0]; r.Status != GateFail || r.Limit != 0.066 || r.Message != "70 mV > 66 mV (2% of vref 3.3 V)" {
		t.Errorf("ripple: %+v", r)
	}
	if r := res[1]; r.Status != GatePass || r.Limit != 0.0165 || r.Message != "10 mV <= 16.5 mV (0.5% of vref 3.3 V)" {
		t.Errorf("overshoot: %+v", r)
	}
	sum.Board.VrefV = nil
	res = g.Check(sum)
	if r := res[0]; r.Status != GateSkip || r.Message != "no limit: 2% of full scale: the file gives no vref" {
		t.Errorf("without vref: %+v", r)
	}
}
