package analysis

import (
	"math"
	"sort"
	"strconv"
	"strings"
	"testing"

	"github.com/caploop/caploop/analysis/loop"
)

// droopFollower is a three-state droop-and-recharge loop behind the follower of these
// tests (testFollower): 12 bit, 3.3 V, R 200 kOhm, C 1 uF, deadband 30, noise 1 LSB; a
// setpoint step down gives it one discharge run.
func droopFollower(seed uint64, rDis float64) loop.Config {
	return loop.Config{
		Circuit:    loop.Circuit{Supply: 3.3, R: 200e3, RDischarge: rDis, C: 1e-6, Follower: testFollower},
		ADC:        loop.ADC{Vref: 3.3, Bits: 12, Noise: 1},
		Controller: loop.Controller{Kind: loop.ThreeState, Deadband: 30},
		Period:     1e-3,
		Seed:       seed,
	}
}

// TestDischargeSharedFactor checks the discharge asymptote taken at the charge's factor
// in a droop loop behind a follower: the one discharge run alone leaves it within tens
// of counts; at the charge's factor its interval holds the truth (the node equation of
// DOMAIN.md with the follower's base as a load of (beta+1) R_E, followerLevels) in at
// least 36 of 40 seeds and is at least 4 times narrower; the drop the summary shows is
// then 0.65 V within 5 % (V_BE of the simulated follower).
func TestDischargeSharedFactor(t *testing.T) {
	t.Parallel()
	lsb := 3.3 / 4096
	_, vl := followerLevels(3.3, 200e3)
	truth := vl / lsb // about -673 counts
	inside := 0
	const seeds = 40
	for seed := uint64(1); seed <= seeds; seed++ {
		r := simulate(t, droopFollower(seed, 0), schedule(4000, 2048, 1229), 8000, false)
		pf := r.acc.currentPlant()
		if !pf.ok[0] {
			t.Fatalf("seed %d: no discharge fit", seed)
		}
		own := levelInterval(pf.fit[0])
		got := dischargeSharedFactor(pf)
		if !got.known() {
			t.Fatalf("seed %d: no discharge asymptote at the charge's factor (own %.1f [%.1f, %.1f])", seed, own.v, own.lo, own.hi)
		}
		if got.lo <= truth && truth <= got.hi {
			inside++
		}
		if 4*got.halfWidth() > own.halfWidth() {
			t.Errorf("seed %d: ±%.1f counts at the charge's factor against ±%.1f of the run alone: not 4 times narrower", seed, got.halfWidth(), own.halfWidth())
		}
		p := r.sum.Plant
		if p.SenseDropV == nil || math.Abs(*p.SenseDropV-0.65) > 0.05*0.65 {
			t.Errorf("seed %d: sense drop %v (%s), want 0.65 V within 5 %%", seed, fmtPtr(p.SenseDropV), p.SenseDropVReason)
		}
		t.Logf("seed %d: v_low %.1f [%.1f, %.1f] at the charge's factor, %.1f [%.1f, %.1f] alone, truth %.1f counts; drop %s",
			seed, got.v, got.lo, got.hi, own.v, own.lo, own.hi, truth, fmtPtr(p.SenseDropV))
	}
	if inside < seeds*9/10 {
		t.Errorf("truth inside the 95 %% interval in %d of %d seeds", inside, seeds)
	}
}

// TestDischargeSharedFactorRefuses checks the cases where the charge's factor must not be
// lent to the discharge: a discharge resistor of its own (the two factors disagree) and
// fits that are one joint fit already.
func TestDischargeSharedFactorRefuses(t *testing.T) {
	t.Parallel()
	for _, rDis := range []float64{150e3, 300e3} {
		r := simulate(t, droopFollower(3, rDis), schedule(4000, 2048, 1229), 8000, false)
		pf := r.acc.currentPlant()
		if !pf.ok[0] || !pf.ok[2] {
			t.Fatalf("discharge through %.0f ohm: no charge or discharge fit", rDis)
		}
		if got := dischargeSharedFactor(pf); got.known() {
			t.Errorf("discharge through %.0f ohm, charge through 200 kOhm: v_low %.1f [%.1f, %.1f] at the charge's factor, want none", rDis, got.v, got.lo, got.hi)
		}
	}
	r2 := simulate(t, droopFollower(3, 0), schedule(4000, 2048, 1229), 8000, false)
	pf2 := r2.acc.currentPlant()
	pf2.joint[0], pf2.joint[2] = true, true
	if got := dischargeSharedFactor(pf2); got.known() {
		t.Errorf("one joint fit: v_low %.1f at the charge's factor, want none (the factor is shared already)", got.v)
	}
}

// TestDischargeSharedFactorPlainLoad checks that a plain load's discharge, at the charge's
// factor, stays at ground (its interval reaches ground; a 1 MOhm load on a 47 kOhm,
// 10 bit droop loop, setpoint step down).
func TestDischargeSharedFactorPlainLoad(t *testing.T) {
	t.Parallel()
	for seed := uint64(1); seed <= 5; seed++ {
		r := simulate(t, greenhouse(loop.ThreeState, 1e6, seed), schedule(4000, 700, 300), 8000, false)
		got := dischargeSharedFactor(r.acc.currentPlant())
		if got.known() && (got.hi < -2 || got.lo > 2) {
			t.Errorf("seed %d: v_low %.1f [%.1f, %.1f] counts, want ground within its interval", seed, got.v, got.lo, got.hi)
		}
		if k := r.sum.Plant.Kind; k != nil && *k == KindBuffer {
			t.Errorf("seed %d: a plain load taken for a buffer", seed)
		}
		t.Logf("seed %d: v_low %.1f [%.1f, %.1f] counts", seed, got.v, got.lo, got.hi)
	}
}

// TestDischargeFromBalanceWidth checks the balance's interval in a two-state follower
// loop (12 bit, 3.3 V, R 100 kOhm, noise 2 LSB): the charge's mean step is that of its
// own pairs, so its variance is over their count, not over the readings of the run fit
// that gives the factor. Its interval holds the truth in at least 36 of 40 seeds and its
// median half-width is under 5 % of the asymptote (3-4 %; the run fit's count of
// readings put it at 9-10 %).
func TestDischargeFromBalanceWidth(t *testing.T) {
	t.Parallel()
	lsb := 3.3 / 4096
	_, vl := followerLevels(3.3, 100e3)
	truth := vl / lsb // about -734 counts
	inside := 0
	const seeds = 40
	var widths []float64
	for seed := uint64(1); seed <= seeds; seed++ {
		cfg := loop.Config{
			Circuit:    loop.Circuit{Supply: 3.3, R: 100e3, C: 1e-6, Follower: testFollower},
			ADC:        loop.ADC{Vref: 3.3, Bits: 12, Noise: 2},
			Controller: loop.Controller{Kind: loop.TwoState},
			Period:     1e-3,
			Seed:       seed,
		}
		r := simulate(t, cfg, schedule(4000, 2048, 1433), 8000, false)
		got := r.acc.dischargeFromBalance(r.acc.currentPlant())
		if !got.known() {
			t.Fatalf("seed %d: no discharge asymptote from the balance", seed)
		}
		if got.lo <= truth && truth <= got.hi {
			inside++
		}
		widths = append(widths, got.halfWidth()/math.Abs(truth))
		t.Logf("seed %d: v_low %.1f [%.1f, %.1f], truth %.1f counts", seed, got.v, got.lo, got.hi, truth)
	}
	sort.Float64s(widths)
	if med := widths[len(widths)/2]; med > 0.05 {
		t.Errorf("median half-width %.1f %% of the asymptote, more than 5 %%", 100*med)
	}
	if inside < seeds*9/10 {
		t.Errorf("truth inside the 95 %% interval in %d of %d seeds", inside, seeds)
	}
}

func fmtPtr(p *float64) string {
	if p == nil {
		return "null"
	}
	return strconv.FormatFloat(*p, 'g', 4, 64)
}

// TestDecidePlantTwoStateDropNote checks that a two-state follower's drop from v_low is
// not called into doubt by the gap between v_high and the supply: without a hold the
// base's load is unknown and lowers v_high too, so Vs - v_high (0.89 V here) only bounds
// the drop (0.65 V) from above; a drop beyond the whole gap is noted.
func TestDecidePlantTwoStateDropNote(t *testing.T) {
	t.Parallel()
	lsb := 3.3 / 4096
	vh, vl := followerLevels(3.3, 100e3) // 2.411 V, -0.591 V
	ev := plantEvidence{tauC: interval{91, 90.5, 91.5}, tauH: unknown(), supply: 3.3, supplyTol: 0.05, r: 100e3, lsb: lsb,
		vHigh: interval{vh, vh - 5*lsb, vh + 5*lsb}, vLow: interval{vl, vl - 20*lsb, vl + 20*lsb}}
	got := decidePlant(ev)
	if got.kind != KindBuffer || !got.drop.known() || math.Abs(got.drop.v-0.65) > 1e-9 {
		t.Fatalf("kind %q, drop %+v (%s), want a buffer's 0.65 V", got.kind, got.drop, got.dropReason)
	}
	if len(got.notes) != 0 {
		t.Errorf("notes %q, want none", got.notes)
	}
	// A discharge far below ground: the drop from v_low (1.32 V) exceeds Vs - v_high (0.89 V).
	ev.vLow = interval{-1.6, -1.6 - 20*lsb, -1.6 + 20*lsb}
	if got := decidePlant(ev); len(got.notes) != 1 || !strings.Contains(got.notes[0], "exceeds the whole gap") {
		t.Errorf("notes %q, want the drop beyond the gap noted", got.notes)
	}
}
