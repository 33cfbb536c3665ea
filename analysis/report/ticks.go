package report

import (
	"math"
	"strconv"

	"gonum.org/v1/plot"
)

// niceTicks places about five labelled ticks at 1, 2 or 5 times a power of ten, with as
// many decimals as the step needs, so that narrow ranges (a ripple of a few millivolts
// around 1.5 V) still get distinct labels.
type niceTicks struct{}

// Ticks implements plot.Ticker.
func (niceTicks) Ticks(lo, hi float64) []plot.Tick {
	if !(hi > lo) || !finite(lo) || !finite(hi) {
		return plot.DefaultTicks{}.Ticks(lo, hi)
	}
	raw := (hi - lo) / 5
	mag := math.Pow(10, math.Floor(math.Log10(raw)))
	step := mag
	for _, m := range []float64{2, 5, 10} {
		if raw/mag > m*0.75 {
			step = m * mag
		}
	}
	if step <= 0 || !finite(step) {
		return plot.DefaultTicks{}.Ticks(lo, hi)
	}
	prec := max(0, -int(math.Floor(math.Log10(step)+1e-9)))
	big := math.Max(math.Abs(lo), math.Abs(hi))
	useG := big >= 1e6 || big < 1e-4
	var ticks []plot.Tick
	first := math.Ceil(lo/step-1e-9) * step
	for i := 0; ; i++ {
		v := first + float64(i)*step
		if v > hi+step*1e-9 || i > 100 {
			break
		}
		if math.Abs(v) < step*1e-9 {
			v = 0
		}
		label := strconv.FormatFloat(v, 'f', prec, 64)
		if useG {
			label = strconv.FormatFloat(v, 'g', 4, 64)
		}
		ticks = append(ticks, plot.Tick{Value: v, Label: label})
	}
	// Unlabelled minor ticks at a fifth of the step.
	minor := step / 5
	start := math.Ceil(lo/minor-1e-9) * minor
	for i := 0; i < 600; i++ {
		v := start + float64(i)*minor
		if v > hi {
			break
		}
		if r := math.Mod(math.Abs(v)+minor/2, step); r > minor {
			ticks = append(ticks, plot.Tick{Value: v})
		}
	}
	return ticks
}
