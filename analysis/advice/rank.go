package advice

import (
	"fmt"
	"math"

	"github.com/caploop/caploop/telemetry/si"
)

// The rules of the trade a pair is held to besides the numeric goals (common practice;
// see rules). A pair that breaks one still works, but an experienced designer would pick
// another when one meets the goals as well.
const (
	// ruleLoadRatio: the load should be at least this many times R, or V_inf sags and
	// tau shrinks with it (R_L >= 10 R, common practice).
	ruleLoadRatio = 10
	// rulePinShare: the first-instant pin current Vs / R should stay within this share of
	// the pin limit (well inside the datasheet figure, not at it).
	rulePinShare = 0.5
	// ruleMinR and ruleMaxR bound a moderate resistor: under 1 kOhm the pin spends
	// milliamperes at every switch for no gain; over 100 kOhm the charging current (Vs / R,
	// tens of uA at most) is no longer large beside the ADC input current and the
	// capacitor and board leakage (up to about 1 uA on classic parts, from memory), so the
	// hold droops and the steps change with them, and the high-impedance node picks up noise.
	ruleMinR = 1e3
	ruleMaxR = 100e3
	// ruleMidR is the middle of the moderate range (log scale), the tie-break's choice.
	ruleMidR = 10e3
	// ruleMinC and ruleMaxC bound an ordinary part: over 10 uF is electrolytic size (leaks,
	// -20/+80 % tolerance), where a 1-10 uF film or ceramic usually gives the same tau
	// with a larger R; under 10 nF the board's stray capacitance and the ADC's sampling
	// capacitor take a visible share of the charge.
	ruleMinC = 10e-9
	ruleMaxC = 10e-6
	// relTol keeps a part exactly at a bound (10 uF, 100 kOhm) inside it.
	relTol = 1e-6
)

// The rule names shown after the verdict ("meets goals; load under 10 R").
const (
	RuleLoad   = "load under 10 R"                  // the load is under 10 x R: V_inf sags, tau shrinks
	RulePin    = "pin current over half the limit"  // Vs / R is over half the pin current limit
	RuleLowR   = "R under 1 kΩ wastes current"      // R under 1 kOhm
	RuleHighR  = "R over 100 kΩ"                    // R over 100 kOhm: leakage and ADC input current matter
	RuleBigC   = "C over 10 µF (electrolytic size)" // C over 10 uF
	RuleSmallC = "C under 10 nF"                    // C under 10 nF: stray and ADC sampling capacitance matter
)

// VerdictMeets is the verdict of a pair that meets every goal; rules it breaks follow it
// after a semicolon.
const VerdictMeets = "meets goals"

// rules lists the rules of the trade a pair breaks, in this order: load under 10 R, pin
// current over half the limit, R under 1 kOhm, R over 100 kOhm, C over 10 uF, C under
// 10 nF; and how far beyond their bounds it goes, summed in decades (a 220 kOhm R is
// 0.34 decade over 100 kOhm). The parts are the marked values; the load and pin checks
// use the real R.
func (p *plant) rules(pr *pair) ([]string, float64) {
	var b []string
	var ex float64
	over := func(name string, x, bound float64) {
		b = append(b, name)
		ex += math.Abs(math.Log10(x / bound))
	}
	if p.load > 0 && p.load < ruleLoadRatio*pr.ci.R*(1-relTol) {
		over(RuleLoad, ruleLoadRatio*pr.ci.R, p.load)
	}
	if pr.pinA > rulePinShare*p.g.pinA*(1+relTol) {
		over(RulePin, pr.pinA, rulePinShare*p.g.pinA)
	}
	switch {
	case pr.r < ruleMinR*(1-relTol):
		over(RuleLowR, pr.r, ruleMinR)
	case pr.r > ruleMaxR*(1+relTol):
		over(RuleHighR, pr.r, ruleMaxR)
	}
	switch {
	case pr.c > ruleMaxC*(1+relTol):
		over(RuleBigC, pr.c, ruleMaxC)
	case pr.c < ruleMinC*(1-relTol):
		over(RuleSmallC, pr.c, ruleMinC)
	}
	return b, ex
}

// better reports whether pair a ranks above pair b. The ranking, in this order:
//
//  1. Goals: a pair that meets every numeric goal in the loop model (ripple, settling,
//     static error, pin current, reach) ranks above one that misses any.
//  2. Rules of the trade (see rules), among pairs that meet the goals: fewer rules
//     broken first, then the smaller excess beyond their bounds; so a pair that meets
//     the goals and breaks none heads the table, one with the load under 10 R comes
//     after it whatever its margins, and 330 kOhm + 4.7 uF comes before 18 kOhm +
//     100 uF when each breaks one rule.
//  3. Score (see score): the margin on the goals for a pair that meets them, the
//     nearness for one that misses; among misses this comes before the rules, since
//     how near a miss comes is what the table is for then.
//  4. Ties (pairs with the same R*C and no load run alike): the rules as in 2 (misses),
//     then the R nearer 10 kOhm (log distance; the middle of the moderate range), then
//     the smaller C, so that the order never depends on the order of the search.
func (p *plant) better(a, b *pair) bool {
	ma, mb := a.meets, b.meets
	if ma != mb {
		return ma
	}
	if ma && rulesDiffer(a, b) {
		return rulesBetter(a, b)
	}
	if ma && a.tv != nil && b.tv != nil && a.tv.CornersMeeting != b.tv.CornersMeeting {
		// Key 2b: more tolerance corners meeting the goals first.
		return a.tv.CornersMeeting > b.tv.CornersMeeting
	}
	if a.score != b.score {
		return a.score > b.score
	}
	return tieBetter(a, b)
}

// rulesDiffer reports whether key 2 of the ranking tells a and b apart.
func rulesDiffer(a, b *pair) bool {
	return len(a.broken) != len(b.broken) || math.Abs(a.excess-b.excess) > 1e-9
}

// rulesBetter is key 2 of the ranking: fewer rules broken, then the smaller excess.
func rulesBetter(a, b *pair) bool {
	if ra, rb := len(a.broken), len(b.broken); ra != rb {
		return ra < rb
	}
	return a.excess < b.excess
}

// tieBetter is the last key of the ranking (see better): the rules as in key 2, then the
// R nearer 10 kOhm, then the smaller C, then the smaller R.
func tieBetter(a, b *pair) bool {
	if rulesDiffer(a, b) {
		return rulesBetter(a, b)
	}
	da, db := math.Abs(math.Log10(a.r/ruleMidR)), math.Abs(math.Log10(b.r/ruleMidR))
	if math.Abs(da-db) > 1e-9 {
		return da < db
	}
	if a.c != b.c {
		return a.c < b.c
	}
	return a.r < b.r
}

// cfBetter orders pairs before any run, by the same keys as better with the closed-form
// margin cf in place of the score: the rules, then the margin less the soft preference,
// then the ties.
func (p *plant) cfBetter(a, b *pair, cfa, cfb float64) bool {
	if rulesDiffer(a, b) {
		return rulesBetter(a, b)
	}
	if sa, sb := cfa-p.soft(a), cfb-p.soft(b); sa != sb {
		return sa > sb
	}
	return tieBetter(a, b)
}

// score is the third key of the ranking (see better). For a pair that meets the goals it
// is the smallest of its margins, each the log of goal over figure: ripple p-p, settling
// time and (three-state) the band's static error, so the pair in the middle of the
// window wins, less a soft preference (see soft). For a pair that misses it is -10 less
// the sum of its log excesses over the ripple and settling goals, less 5 per closed-form
// failure, less the same soft preference.
func (p *plant) score(pr *pair) float64 {
	rip := math.Max(pr.res.ripplePP, 0.5*p.lsb())
	set := math.Max(pr.res.settleS, p.period)
	if !pr.res.settled {
		set = math.Max(set, 2*p.g.settleS)
	}
	mr, ms := math.Log(p.g.rippleV/rip), math.Log(p.g.settleS/set)
	if pr.db > 0 {
		// Three-state: the band is the static error; keep a margin on it too.
		mr = math.Min(mr, math.Log(p.g.staticV/(float64(pr.db)*p.lsb())))
	}
	if pr.meets {
		return math.Min(mr, ms) - p.soft(pr)
	}
	return -10 - math.Max(-mr, 0) - math.Max(-ms, 0) - 5*float64(len(pr.fail)) - p.soft(pr)
}

// soft is a small preference inside the rules, in log-margin units: a capacitor over
// 1 uF (a class-2 ceramic of that size loses much of its value under DC bias, and film
// grows bulky) costs 0.05, about a 5 % margin.
func (p *plant) soft(pr *pair) float64 {
	if pr.c > 1e-6*(1+relTol) {
		return 0.05
	}
	return 0
}

// ruleTrades explains, for the trades column, each rule of the trade a pair breaks.
func (p *plant) ruleTrades(pr *pair) []string {
	var t []string
	for _, r := range pr.broken {
		switch r {
		case RuleLoad:
			t = append(t, fmt.Sprintf("load %s is under 10 R = %s: V_inf sags %s and tau shrinks (R_L >= 10 R is the rule)",
				si.Format(p.load, "Ω"), si.Format(ruleLoadRatio*pr.ci.R, "Ω"), fmtV(pr.sag)))
		case RulePin:
			t = append(t, fmt.Sprintf("pin current %s is over half the %s limit", fmtA(pr.pinA), fmtA(p.g.pinA)))
		case RuleLowR:
			t = append(t, fmt.Sprintf("R under 1 kΩ draws %s at every switch for no gain", fmtA(pr.pinA)))
		case RuleHighR:
			t = append(t, fmt.Sprintf("R over 100 kΩ charges with %s at most, so 1 µA of leakage or ADC input current (a typical figure, common practice) is %.0f %% of it; the node also picks up noise",
				fmtA(pr.pinA), 100*1e-6/pr.pinA))
		case RuleBigC:
			t = append(t, "electrolytic size: leaks and has -20/+80 % tolerance")
		case RuleSmallC:
			t = append(t, "C under 10 nF: stray capacitance and the ADC's sampling capacitor take a visible share of its charge")
		}
	}
	return t
}
