package advice

import (
	"fmt"
	"math"

	"github.com/caploop/caploop/analysis/figure"
	"github.com/caploop/caploop/analysis/loop"
)

// SetpointStep is the single-period step of one used setpoint and whether a band one
// count narrower than the suggestion would be jumped there.
type SetpointStep struct {
	SetpointCounts  int     `json:"setpoint_counts"`
	ChargeCounts    float64 `json:"charge_step_counts"`
	DischargeCounts float64 `json:"discharge_step_counts"`
	// NarrowerJumps says whether and how a band one count narrower than the suggestion
	// (db-1) is jumped here: "charge step alone" or "discharge step alone" when that step is
	// at least 2*(db-1)+1 counts, "charge step with noise" or "discharge step with noise"
	// when only the step plus the noise margin reaches it, "" when the narrower band holds.
	NarrowerJumps string `json:"narrower_band_jumps"`
	// Recurring: the jumps come back again and again, not only on arrival at the
	// setpoint: the jumping step is a charge and the held node droops (load, leak or
	// follower), so it is re-approached from below for ever. Otherwise the band is jumped
	// when the loop arrives from that side after a setpoint change, or by noise.
	Recurring bool `json:"recurring"`
}

// stepsAt returns the charge and discharge steps of one period at a setpoint, in counts.
func stepsAt(ci loop.Circuit, p *plant, sp int, period float64) (up, down float64) {
	v := p.nodeV(sp)
	perCount := math.Ldexp(1, p.bits) / p.vref
	up = (ci.Advance(v, loop.Charge, period) - v) * perCount
	down = (v - ci.Advance(v, loop.Discharge, period)) * perCount
	return math.Max(up, 0), math.Max(down, 0)
}

// bandFor is the smallest deadband half-width db (counts) that a single step of x counts
// cannot jump: x < 2*db + 1, so db = floor((x - 1) / 2) + 1 (0 when x < 1).
func bandFor(x float64) int {
	if x < 1 {
		return 0
	}
	return int(math.Floor((x-1)/2)) + 1
}

// deadband works out the suggested band for circuit ci at the plant's used setpoints.
func deadband(ci loop.Circuit, p *plant, period float64) (int, *DeadbandWorking, []SetpointStep) {
	w := &DeadbandWorking{
		NoiseRMSCounts: p.g.noise,
		SigmaMultiple:  p.g.sigmaK,
		MarginCounts:   p.g.sigmaK * p.g.noise,
	}
	var steps []SetpointStep
	for _, sp := range p.sps {
		up, down := stepsAt(ci, p, sp, period)
		steps = append(steps, SetpointStep{SetpointCounts: sp, ChargeCounts: up, DischargeCounts: down})
		w.StepCounts = math.Max(w.StepCounts, math.Max(up, down))
	}
	db := min(bandFor(w.StepCounts+w.MarginCounts), p.maxBand())
	droop := !math.IsInf(ci.Tau(loop.Hold), 1) && ci.VInf(loop.Hold) < p.nodeV(p.lo)
	for i := range steps {
		edge := float64(2*(db-1) + 1)
		if db < 1 {
			continue
		}
		up, down := steps[i].ChargeCounts, steps[i].DischargeCounts
		dir, st := "charge", up
		if down > up {
			dir, st = "discharge", down
		}
		switch {
		case up >= edge:
			dir, st = "charge", up
			steps[i].NarrowerJumps = "charge step alone"
		case down >= edge:
			steps[i].NarrowerJumps = "discharge step alone"
		case st+w.MarginCounts >= edge:
			steps[i].NarrowerJumps = dir + " step with noise"
		}
		steps[i].Recurring = steps[i].NarrowerJumps != "" && dir == "charge" && droop
	}
	w.StaticErrorV = float64(db) * p.lsb()
	if p.g.rippleSaid {
		// The rule of the trade: a band of dV volts is dV * full-scale counts / Vref counts,
		// rounded up (0.1 V * 1023 / 5 V = 20.46 -> 21, common practice).
		n := int(math.Ceil(p.g.rippleV*p.fullScale()/p.vref - 1e-9))
		w.FromVoltageBand = &n
	}
	w.Rule = fmt.Sprintf("hold settles only if one step cannot jump the band: step + %g sigma noise < 2*db + 1, "+
		"so db = floor((%.2f + %.2f - 1) / 2) + 1 = %s; static error up to db counts = %s",
		p.g.sigmaK, w.StepCounts, w.MarginCounts, figure.Count(db, "count"), fmtV(w.StaticErrorV))
	return db, w, steps
}

// TauForStep is the time constant R*C whose largest single-period step, a charge from the
// bottom rail, is dV (the ripple budget of the trade):
//
//	tau = -T / ln(1 - dV / Vs)     (exact, from dV = Vs (1 - exp(-T / tau)))
//	tau ~ T * Vs / dV               (linear form, T << tau)
//
// T = 1 ms, dV = 0.1 V, Vs = 5 V gives 0.0495 s (linear 0.05 s): about 50 kOhm with 1 uF.
// It returns NaN unless 0 < dV < Vs and T > 0.
func TauForStep(T, dV, Vs float64) float64 {
	if !(T > 0) || !(dV > 0) || !(dV < Vs) {
		return math.NaN()
	}
	return -T / math.Log1p(-dV/Vs)
}

// maxBand is the widest deadband the advice gives: a quarter of full scale (the input
// range table's limit). A circuit that needs more is far too fast for its sample period.
func (p *plant) maxBand() int { return int(math.Ldexp(1, p.bits) / 4) }

// bandOnly is the band of deadband without the working, for the closed-form pruning of
// every pair: the band and the largest charge and discharge steps at the used setpoints.
func bandOnly(ci loop.Circuit, p *plant, period float64) (db int, up, down float64) {
	for _, sp := range p.sps {
		u, d := stepsAt(ci, p, sp, period)
		up, down = math.Max(up, u), math.Max(down, d)
	}
	return min(bandFor(math.Max(up, down)+p.g.sigmaK*p.g.noise), p.maxBand()), up, down
}
