package advice

import (
	"math"

	"github.com/caploop/caploop/analysis/loop"
)

// runPlan says how long a checking simulation runs.
type runPlan struct {
	settleLen int     // samples allowed for settling after each setpoint change
	window    int     // samples of steady state measured after it
	tau2      float64 // > 0: measure the output of a second RC stage of this time constant
}

// simResult is what one checking simulation measured.
type simResult struct {
	ripplePP  float64         // largest p-p of the output over the steady windows, V
	settleS   float64         // slower of the up and down full-scale steps, s
	settled   bool            // both steps settled inside the run
	staticErr float64         // largest |mean output - setpoint| over the steady windows, V
	jumps     int64           // band jumps (three-state) over the whole run
	jumpsAt   map[int]int64   // band jumps per setpoint
	rippleAt  map[int]float64 // ripple p-p per setpoint, V
}

// simulate runs the loop model through the plant's setpoint sequence: steady at the lowest
// used setpoint, a full-scale step up to the highest, a full-scale step down, then each
// other used setpoint. Settling is timed on the two full-scale steps: the time after the
// change until the output stays within tol of the setpoint. Ripple and static error come
// from the last plan.window samples of every setpoint. Output is the sense voltage.
func simulate(cfg loop.Config, p *plant, tol float64, plan runPlan) (simResult, error) {
	cfg.V0 = p.nodeV(p.lo)
	sim, err := loop.New(cfg)
	if err != nil {
		return simResult{}, err
	}
	db := cfg.Controller.Deadband
	three := cfg.Controller.Kind == loop.ThreeState
	res := simResult{jumpsAt: map[int]int64{}, rippleAt: map[int]float64{}, settled: true}
	seq := []int{p.lo, p.hi, p.lo}
	for _, sp := range p.sps {
		if sp != p.lo && sp != p.hi {
			seq = append(seq, sp)
		}
	}
	prevE := math.NaN()
	a2 := 0.0
	if plan.tau2 > 0 {
		a2 = math.Exp(-cfg.Period / plan.tau2)
	}
	v2, prevOut := math.NaN(), math.NaN()
	for i, sp := range seq {
		n := plan.settleLen + plan.window
		if i == 0 {
			n = plan.window + plan.window/4
		}
		target := p.senseV(sp)
		lastOut := -1 // last sample index outside tol
		lo, hi, sum := math.Inf(1), math.Inf(-1), 0.0
		prevE = math.NaN()
		for k := 0; k < n; k++ {
			st := sim.Next(sp)
			out := st.Sense
			if plan.tau2 > 0 {
				// Second stage driven by the first: exact first-order update with the
				// input taken as the mean of the period's end points.
				if math.IsNaN(v2) {
					v2, prevOut = out, out
				}
				m := (prevOut + out) / 2
				v2 = m + (v2-m)*a2
				prevOut = out
				out = v2
			}
			if math.Abs(out-target) > tol {
				lastOut = k
			}
			if k >= n-plan.window {
				lo, hi = math.Min(lo, out), math.Max(hi, out)
				sum += out
			}
			if three {
				e := float64(st.PV - sp)
				if (prevE < float64(-db) && e > float64(db)) || (prevE > float64(db) && e < float64(-db)) {
					res.jumps++
					res.jumpsAt[sp]++
				}
				prevE = e
			}
		}
		pp := hi - lo
		res.rippleAt[sp] = math.Max(res.rippleAt[sp], pp)
		res.ripplePP = math.Max(res.ripplePP, pp)
		res.staticErr = math.Max(res.staticErr, math.Abs(sum/float64(plan.window)-target))
		if i == 1 || i == 2 {
			s := float64(lastOut+1) * cfg.Period
			if lastOut >= n-plan.window {
				res.settled = false
			}
			res.settleS = math.Max(res.settleS, s)
		}
	}
	return res, nil
}
