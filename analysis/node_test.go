package analysis

import (
	"math"
	"testing"

	"github.com/caploop/caploop/analysis/loop"
)

// TestNodeRippleSlowTwoState: the node ripple of slow two-state loops at 12 bit against
// the loop model's noise-free level over the segment's last half (its p-p at the sample
// instants), within 10 %. At tau 200 T the fits' small errors used to drift the
// trajectory's level over the window (+14 %); at tau 1000 T a window of 512 samples, half
// a time constant, missed the level's slow wander (-31 %).
func TestNodeRippleSlowTwoState(t *testing.T) {
	t.Parallel()
	cases := []struct {
		name    string
		r, load float64
		noise   float64
		sps     []int
		n       int64
		seed    uint64
	}{
		{"tau 194 T load 30 R", 200e3, 6e6, 0.7, []int{2048, 1229}, 4000, 63352},
		{"tau 1000 T", 1e6, 0, 0.5, []int{2048, 1024}, 5000, 15838},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			cfg := loop.Config{
				Circuit:    loop.Circuit{Supply: 3.3, R: tc.r, C: 1e-6, Load: tc.load},
				ADC:        loop.ADC{Vref: 3.3, Bits: 12, Noise: tc.noise},
				Controller: loop.Controller{Kind: loop.TwoState},
				Period:     1e-3,
				Seed:       tc.seed,
			}
			r := simulate(t, cfg, schedule(tc.n, tc.sps...), 2*tc.n, false)
			seg := r.sum.Segments[1]
			h := lastHalfOf(r, seg)
			t.Logf("node ripple %v counts (%q), true over the last half %.4g", deref(seg.RippleNodePPCounts), seg.RippleNodePPVReason, h.nodePP)
			if !near(seg.RippleNodePPCounts, h.nodePP, 0.10, 0) {
				t.Errorf("node ripple %v counts, true %.4g within 10 %%", deref(seg.RippleNodePPCounts), h.nodePP)
			}
			if math.IsNaN(h.nodePP) || h.nodePP < 4 {
				t.Fatalf("the model's node p-p %.3g counts: not a cycling loop", h.nodePP)
			}
		})
	}
}
