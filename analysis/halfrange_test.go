package analysis

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

// TestHalfRange: max - min over the last half read from the blocks equals the brute
// force over the last half, or over a few more of the newest readings (at most
// 2/halfBlocks of the series), at every length up to 20 000.
func TestHalfRange(t *testing.T) {
	t.Parallel()
	rng := rand.New(rand.NewPCG(3, 5))
	var h HalfRange
	h.Reset()
	var xs []float64
	for n := 1; n <= 20000; n++ {
		x := rng.NormFloat64()
		if n%1000 == 0 {
			x += 8 // an extreme now and then, to move in and out of the window
		}
		xs = append(xs, x)
		h.Add(x)
		got := h.PP(int64(n))
		want := (n + 1) / 2
		if n < HalfMin {
			want = n
		}
		ok := false
		for extra := 0; extra <= max(1, 2*n/halfBlocks)+1 && want+extra <= n; extra++ {
			w := xs[n-want-extra:]
			if got == slices.Max(w)-slices.Min(w) {
				ok = true
				break
			}
		}
		if !ok {
			w := xs[n-want:]
			t.Fatalf("n=%d: pp %g, last half %g (window to within %d readings)", n, got, slices.Max(w)-slices.Min(w), 2*n/halfBlocks)
		}
		if math.IsInf(got, 0) || math.IsNaN(got) {
			t.Fatalf("n=%d: pp %g", n, got)
		}
	}
}
