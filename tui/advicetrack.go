package tui

import (
	"fmt"
	"math"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/advice"
)

// Rules of CONVENTIONS.md for advice that changes as data comes in.
const (
	adviceAgree    = 3    // updates a suggestion must hold (preliminary) or differ (to replace the shown one)
	tauFirmHalfRel = 0.10 // tau's 95 % half-width at most this share of tau
)

// adviceKey is what a suggestion says: the deadband and the best R/C pair.
type adviceKey struct {
	db    int
	hasDB bool
	r, c  float64
}

func keyOf(a *advice.Advice) adviceKey {
	var k adviceKey
	if a.DeadbandCounts != nil {
		k.db, k.hasDB = *a.DeadbandCounts, true
	}
	if len(a.Candidates) > 0 {
		k.r, k.c = a.Candidates[0].ROhm, a.Candidates[0].CF
	}
	return k
}

// adviceTrack holds the advice shown and decides when a new one replaces it: only when
// the new suggestion differs from the shown one for three updates in a row (early
// advice moves as data comes in; a change just applied must not be re-advised at once).
type adviceTrack struct {
	shown   *advice.Advice
	differ  int         // updates in a row that differed from the shown one
	history []adviceKey // the newest updates, up to adviceAgree
}

// offer takes one advice update and reports whether the shown advice changed its suggestion.
func (t *adviceTrack) offer(a *advice.Advice) bool {
	if a == nil {
		return false
	}
	k := keyOf(a)
	t.history = append(t.history, k)
	if len(t.history) > adviceAgree {
		t.history = t.history[len(t.history)-adviceAgree:]
	}
	switch {
	case t.shown == nil:
		t.shown, t.differ = a, 0
		return true
	case k == keyOf(t.shown):
		t.shown, t.differ = a, 0 // the same suggestion with fresher figures
		return false
	}
	t.differ++
	if t.differ >= adviceAgree {
		t.shown, t.differ = a, 0
		return true
	}
	return false
}

// reset forgets the advice (the source restarted).
func (t *adviceTrack) reset() { *t = adviceTrack{} }

// tauSpread returns tau's 95 % half-width as a share of tau (charge fit, else
// discharge), NaN when there is none.
func tauSpread(p analysis.Plant) float64 {
	type fit struct {
		v  *float64
		ci *[2]float64
	}
	for _, f := range []fit{{p.TauChargeS, p.TauChargeCIS}, {p.TauDischargeS, p.TauDischargeCIS}} {
		if f.v != nil && f.ci != nil && *f.v > 0 {
			return (f.ci[1] - f.ci[0]) / 2 / *f.v
		}
	}
	// Samples-only fits carry no interval in seconds: without one tau is not known to 10 %.
	return math.NaN()
}

// confidence says whether the shown advice is preliminary and why, or firm: firm when
// tau's interval is within 10 % and the advised deadband has not changed over the last
// three updates.
func (t *adviceTrack) confidence(sum *analysis.Summary) (preliminary bool, text string) {
	spread := math.NaN()
	if sum != nil {
		spread = tauSpread(sum.Plant)
	}
	same := len(t.history) == adviceAgree
	for _, k := range t.history {
		if k.db != t.history[0].db || k.hasDB != t.history[0].hasDB {
			same = false
		}
	}
	tau := "tau not yet known"
	if !math.IsNaN(spread) {
		tau = fmt.Sprintf("tau ±%.0f %%", 100*spread)
	}
	switch {
	case !math.IsNaN(spread) && spread <= tauFirmHalfRel && same:
		return false, "firm: " + tau + ", same deadband 3 updates running"
	case math.IsNaN(spread) || spread > tauFirmHalfRel:
		return true, "preliminary: " + tau
	}
	agree := 0
	for i := len(t.history) - 1; i >= 0 && t.history[i].db == t.history[len(t.history)-1].db; i-- {
		agree++
	}
	return true, fmt.Sprintf("preliminary: same deadband %d of 3 updates", agree)
}
