package main

import (
	"math"
	"testing"

	"github.com/caploop/caploop/analysis/loop/virtual"
)

// The E12 series (IEC 60063): ... 39 47 56 68 ... and 680 820 1000.
func TestE12Step(t *testing.T) {
	for _, c := range []struct {
		v    float64
		n    int
		want float64
	}{
		{47e3, 1, 56e3}, {47e3, 2, 68e3}, {47e3, -1, 39e3},
		{1e-6, -1, 820e-9}, {1e-6, 1, 1.2e-6}, {8.2e3, 1, 10e3}, {10e3, -1, 8.2e3},
	} {
		if got := e12Step(c.v, c.n); math.Abs(got/c.want-1) > 1e-9 {
			t.Errorf("e12Step(%g, %d) = %g, want %g", c.v, c.n, got, c.want)
		}
	}
}

func TestRackScenarioDiffers(t *testing.T) {
	base := virtual.DefaultScenario()
	seen := map[[3]float64]bool{}
	for k := 0; k < 4; k++ {
		sc := rackScenario(base, k)
		if _, err := virtual.NewBoard(sc); err != nil {
			t.Fatalf("board %d: %v", k+1, err)
		}
		key := [3]float64{float64(sc.Seed), sc.Circuit.R, sc.Circuit.C}
		if seen[key] {
			t.Errorf("board %d repeats seed and parts %v", k+1, key)
		}
		seen[key] = true
	}
	if sc := rackScenario(base, 0); sc.Seed != base.Seed || sc.Circuit != base.Circuit {
		t.Errorf("board 1 is not the scenario itself")
	}
}
