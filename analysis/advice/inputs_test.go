package advice

import (
	"reflect"
	"testing"

	"github.com/caploop/caploop/analysis"
)

// Two summaries whose advice inputs are equal get the same advice, whatever else in them
// differs (the figures of a segment, its order, a repeated setpoint): that is what lets a
// live screen skip the advice while its inputs stay put.
func TestInputsSameAdviceWhenEqual(t *testing.T) {
	a := boardSummary()
	b := boardSummary()
	b.Segments = []analysis.Segment{{SetpointCounts: 600, SteadySamples: 5000, RipplePPCounts: fp(3)}, {SetpointCounts: 300.2}, {SetpointCounts: 600}}
	b.Samples = 123456
	ia, ib := InputsOfSummary(a, Goals{}), InputsOfSummary(b, Goals{})
	if !ia.Near(ib, 0) {
		t.Fatal("inputs differ for summaries that differ only outside the advice's inputs")
	}
	adv1, err := FromSummary(a, Goals{})
	if err != nil {
		t.Fatal(err)
	}
	adv2, err := FromSummary(b, Goals{})
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(adv1, adv2) {
		t.Error("equal inputs gave different advice")
	}
}

func TestInputsNear(t *testing.T) {
	base := InputsOfSummary(boardSummary(), Goals{})
	cases := []struct {
		name string
		edit func(s *analysis.Summary)
		near bool
	}{
		{"noise 1 % up", func(s *analysis.Summary) { *s.Plant.NoiseRMSCounts *= 1.01 }, true},
		{"noise 10 % up", func(s *analysis.Summary) { *s.Plant.NoiseRMSCounts *= 1.10 }, false},
		{"tau 2 % down", func(s *analysis.Summary) { *s.Plant.TauChargeS *= 0.98 }, true},
		{"tau 20 % down", func(s *analysis.Summary) { *s.Plant.TauChargeS *= 0.8 }, false},
		{"deadband 6 to 7", func(s *analysis.Summary) { *s.Board.DeadbandCounts = 7 }, false},
		{"a new setpoint", func(s *analysis.Summary) {
			s.Segments = append(s.Segments, analysis.Segment{SetpointCounts: 450})
		}, false},
		{"an unreachable setpoint", func(s *analysis.Summary) {
			s.Segments = append(s.Segments, analysis.Segment{SetpointCounts: 1100, Unreachable: true})
		}, true},
		{"two-state", func(s *analysis.Summary) { s.Board.Mode = "two-state" }, false},
		{"no vref", func(s *analysis.Summary) { s.Board.VrefV = nil }, false},
	}
	for _, c := range cases {
		s := boardSummary()
		c.edit(s)
		if got := base.Near(InputsOfSummary(s, Goals{}), 0.03); got != c.near {
			t.Errorf("%s: near = %v, want %v", c.name, got, c.near)
		}
	}
	// The missing-board reason is an input too: two summaries without a board are near.
	s1, s2 := boardSummary(), boardSummary()
	s1.Board.VrefV, s2.Board.VrefV = nil, nil
	if !InputsOfSummary(s1, Goals{}).Near(InputsOfSummary(s2, Goals{}), 0) {
		t.Error("two summaries missing the same board fields are not near")
	}
}
