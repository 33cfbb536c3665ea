package advice

import (
	"math/rand/v2"
	"testing"
)

func TestSmallCutSpreadMatchesSort(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	for n := 200; n < 1800; n += 37 {
		v := make([]float64, n)
		for i := range v {
			v[i] = r.NormFloat64()
		}
		cut := int(RippleTail * float64(n))
		if cut == 0 || cut > 8 {
			continue
		}
		if got, want := smallCutSpread(v, cut), trimmedPP(v); got != want {
			t.Errorf("n=%d: %g, sort gives %g", n, got, want)
		}
	}
}
