package advice

import (
	"fmt"
	"math"
	"sort"
	"strings"

	"github.com/caploop/caploop/analysis/figure"
	"github.com/caploop/caploop/analysis/loop"
)

// Search limits: the closed forms prune every pair first; at most maxQuick survivors get
// a short closed-loop run, and the best are checked again with a longer run and two seeds.
const (
	maxQuick     = 160
	quickWindow  = 192
	verifyWindow = 2048 // design; FromSummary runs 4x longer (no 200 ms budget there)
	maxSettleLen = 20000
	pruneFactor  = 1.5 // closed-form bound beyond goal*pruneFactor: rejected without a run
)

// pair is one R and C under study.
type pair struct {
	r, c     float64 // marked values
	ci       loop.Circuit
	db       int
	cfSettle float64 // closed-form settling time, s
	cfRipple float64 // closed-form ripple lower bound, V
	pinA     float64
	sag      float64
	fail     []string // closed-form failures
	res      simResult
	simmed   bool
	verified bool
	score    float64           // third key of the ranking (see better)
	meets    bool              // meets every goal in the last run
	broken   []string          // rules of the trade broken (see rules)
	excess   float64           // how far beyond the rules' bounds, decades (see rules)
	window   int               // steady window of the last run, samples
	tv       *ToleranceVerdict // corners and Monte Carlo, shown pairs only
}

// tolFor is the settling band for a loop with deadband db: the output is settled when it
// stays within the larger of the ripple goal, the static-error goal and db + 1 counts.
func (p *plant) tolFor(db int) float64 {
	return math.Max(math.Max(p.g.rippleV, p.g.staticV), float64(db+1)*p.lsb())
}

// closedForm fills the closed-form bounds of a pair and the reasons it cannot meet the goals.
func (p *plant) closedForm(pr *pair, kind loop.Kind, period float64) {
	ci := pr.ci
	var up, down float64
	pr.db, up, down = bandOnly(ci, p, period)
	staticV := float64(pr.db) * p.lsb()
	if kind == loop.TwoState {
		pr.db = 0
	}
	pr.pinA = p.supply / ci.RCharge()
	vinf := ci.VInf(loop.Charge)
	pr.sag = p.supply - vinf
	if math.Abs(pr.sag) < 1e-9 {
		pr.sag = 0
	}
	if pr.pinA > p.g.pinA {
		pr.fail = append(pr.fail, "pin current too high")
	}
	tol := p.tolFor(pr.db)
	top := ci.Sense(vinf)
	if top < p.senseV(p.hi)+0.5*p.lsb() {
		pr.fail = append(pr.fail, "cannot reach the top setpoint")
		pr.cfSettle = math.Inf(1)
	} else {
		pr.cfSettle = p.settleTo(ci, tol)
	}
	if pr.cfSettle > pruneFactor*p.g.settleS {
		pr.fail = append(pr.fail, "too slow")
	}
	var lb float64
	switch {
	case kind == loop.TwoState:
		lb = math.Max(up, down)
	case !math.IsInf(ci.Tau(loop.Hold), 1): // the hold droops: each correction is a charge step
		lb = up
	}
	pr.cfRipple = 0.8 * lb * p.lsb()
	if pr.cfRipple > pruneFactor*p.g.rippleV {
		pr.fail = append(pr.fail, "ripple too high")
	}
	if kind == loop.ThreeState && p.g.staticV > 0 && staticV > p.g.staticV {
		pr.fail = append(pr.fail, "static error too high")
	}
	pr.broken, pr.excess = p.rules(pr)
}

// plan sizes a run from the closed form: settling to within the band itself (not just
// the settling tolerance), so that the steady window sees no leftover approach steps.
func (p *plant) plan(pr *pair, period float64, window int) runPlan {
	s := 1.3*p.settleTo(pr.ci, math.Max(0.5*float64(pr.db), 1)*p.lsb()) + 20*period
	if window <= quickWindow {
		// Short runs only rank: a pair slower than 1.6 x the goal fails anyway. The
		// checking runs go on until the loop has settled, so that a pair shown as a near
		// miss has true figures.
		s = math.Min(s, 1.6*p.g.settleS)
	}
	n := int(math.Ceil(s/period)) + 10
	n = min(max(n, 20), maxSettleLen)
	// Hold with a load droops: make the window long enough to see a few corrections.
	if tau := pr.ci.Tau(loop.Hold); !math.IsInf(tau, 1) && pr.db > 0 {
		v := math.Max(p.nodeV(p.sps[0]), p.lsb()) // the slowest droop: the lowest setpoint
		cyc := float64(2*pr.db+1) * p.lsb() * tau / (v * period)
		grow := 8 // the checking runs see several corrections; the short runs lean on cfRipple
		if window <= quickWindow {
			grow = 2
		}
		window = max(window, min(int(3*cyc), grow*window))
	}
	return runPlan{settleLen: n, window: window}
}

// settleTo is the closed-form time of the slower full-scale step to within tol (V) of the
// setpoint, +Inf when the top setpoint is out of reach.
func (p *plant) settleTo(ci loop.Circuit, tol float64) float64 {
	vinf := ci.VInf(loop.Charge)
	vlo, vhi := p.nodeV(p.lo), p.nodeV(p.hi)
	if vinf <= vhi-tol {
		return math.Inf(1)
	}
	up := ci.Tau(loop.Charge) * math.Log(math.Max(vinf-vlo, 1e-12)/(vinf-(vhi-tol)))
	vd := ci.VInf(loop.Discharge)
	down := ci.Tau(loop.Discharge) * math.Log(math.Max(vhi-vd, 1e-12)/math.Max(vlo+tol-vd, 1e-12))
	return math.Max(math.Max(up, down), 0)
}

// check runs the loop model on a pair and records the figures and verdict.
func (p *plant) check(pr *pair, kind loop.Kind, period float64, window int, seeds []uint64) error {
	return p.checkPlan(pr, kind, period, p.plan(pr, period, window), seeds)
}

// checkPlan is check with an explicit run plan.
func (p *plant) checkPlan(pr *pair, kind loop.Kind, period float64, plan runPlan, seeds []uint64) error {
	pr.window = plan.window
	tol := p.tolFor(pr.db)
	var agg simResult
	for i, seed := range seeds {
		r, err := p.cachedRun(pr.ci, kind, pr.db, period, seed, tol, plan)
		if err != nil {
			return err
		}
		agg.rippleMean += r.ripplePP / float64(len(seeds))
		agg.settleMean += r.settleS / float64(len(seeds))
		agg.readMean += r.readPP / float64(len(seeds))
		if i == 0 {
			r.rippleMean, r.settleMean, r.readMean = agg.rippleMean, agg.settleMean, agg.readMean
			agg = r
			continue
		}
		agg.ripplePP = math.Max(agg.ripplePP, r.ripplePP)
		agg.readPP = math.Max(agg.readPP, r.readPP)
		agg.settleS = math.Max(agg.settleS, r.settleS)
		agg.settled = agg.settled && r.settled
		agg.staticErr = math.Max(agg.staticErr, r.staticErr)
		agg.jumps += r.jumps
		for k, v := range r.jumpsAt {
			agg.jumpsAt[k] += v
		}
		for k, v := range r.rippleAt {
			agg.rippleAt[k] = math.Max(agg.rippleAt[k], v)
		}
	}
	if len(seeds) == 1 && kind == loop.ThreeState && !math.IsInf(pr.ci.Tau(loop.Hold), 1) {
		// A short run may end before the hold droops out of the band; the correction
		// step that follows is the ripple in the long run. Rank the short runs with it.
		agg.ripplePP = math.Max(agg.ripplePP, pr.cfRipple/0.8)
		agg.rippleMean = agg.ripplePP
	}
	pr.res, pr.simmed = agg, true
	pr.meets = len(p.failures(pr)) == 0
	pr.score = p.score(pr)
	return nil
}

// failures lists the goals a simulated pair misses, closed-form failures first.
func (p *plant) failures(pr *pair) []string {
	var f []string
	for _, s := range pr.fail {
		if s == "pin current too high" || s == "cannot reach the top setpoint" || s == "static error too high" {
			f = append(f, s)
		}
	}
	if !pr.simmed {
		return pr.fail
	}
	switch {
	case !pr.res.settled && pr.res.rippleMean > 2*p.tolFor(pr.db):
		// It never settles because its ripple is wider than the settling band: the
		// ripple is the failure, not the speed.
	case !pr.res.settled || pr.res.settleS > p.g.settleS:
		f = append(f, "too slow")
	}
	if pr.res.ripplePP > p.g.rippleV {
		f = append(f, "ripple too high")
	}
	if p.g.staticV > 0 && pr.res.staticErr > p.g.staticV && !contains(f, "static error too high") {
		f = append(f, "static error too high")
	}
	return f
}

func contains(s []string, x string) bool {
	for _, v := range s {
		if v == x {
			return true
		}
	}
	return false
}

// searchResult is the outcome of one search over the parts.
type searchResult struct {
	shown   []*pair        // verified, best first
	tried   int            // pairs considered
	simmed  int            // pairs run in closed loop
	meeting int            // pairs meeting the goals in the short run
	best    *pair          // best pair overall (may miss goals)
	reasons map[string]int // closed-form failures by reason, over every pair
}

// search tries every R and C pair on hand.
func (p *plant) search(kind loop.Kind, period float64) (*searchResult, error) {
	rs, err := p.rParts.values(100, 1e6)
	if err != nil {
		return nil, err
	}
	cs, err := p.cParts.values(10e-9, 100e-6)
	if err != nil {
		return nil, err
	}
	out := &searchResult{}
	var pass, nearMiss []*pair
	var scratch pair
	var fails []string
	for _, r := range rs {
		for _, c := range cs {
			// Every pair is judged by closed forms in one scratch pair; only the survivors
			// and the near misses are kept (an E96 search tries tens of thousands).
			scratch = pair{r: r, c: c, ci: p.circuit(r, c), fail: fails[:0]}
			pr := &scratch
			p.closedForm(pr, kind, period)
			fails = pr.fail
			out.tried++
			for _, f := range pr.fail {
				if out.reasons == nil {
					out.reasons = map[string]int{}
				}
				out.reasons[f]++
			}
			if len(pr.fail) == 0 {
				q := *pr
				q.fail = nil
				pass = append(pass, &q)
			} else if !contains(pr.fail, "pin current too high") && !contains(pr.fail, "cannot reach the top setpoint") {
				q := *pr
				q.fail = append([]string(nil), pr.fail...)
				q.broken = append([]string(nil), pr.broken...)
				nearMiss = append(nearMiss, &q)
			}
		}
	}
	// Order the survivors by how well centred they are in closed form, and run the best.
	cfScore := func(pr *pair) float64 {
		rip := math.Max(pr.cfRipple, 0.5*p.lsb())
		m := math.Min(math.Log(p.g.rippleV/rip), math.Log(p.g.settleS/math.Max(pr.cfSettle, p.period)))
		if pr.db > 0 {
			m = math.Min(m, math.Log(p.g.staticV/(float64(pr.db)*p.lsb())))
		}
		return m
	}
	// Pairs that keep the rules of the trade first (they head the table when they meet
	// the goals, see better), each group best centred first.
	cfs := make(map[*pair]float64, len(pass))
	for _, pr := range pass {
		cfs[pr] = cfScore(pr)
	}
	sort.SliceStable(pass, func(i, j int) bool { return p.cfBetter(pass[i], pass[j], cfs[pass[i]], cfs[pass[j]]) })
	// Fine series hold hundreds of pairs with the same R*C; keep at most a few per 2 %
	// band of R*C so that the short runs cover different time constants.
	perTau := map[int]int{}
	kept := pass[:0]
	for _, pr := range pass {
		b := int(math.Floor(math.Log(pr.r*pr.c) / math.Log(1.02)))
		if perTau[b] < 3 {
			perTau[b]++
			kept = append(kept, pr)
		}
	}
	pass = kept
	if nq := p.quickCap(); len(pass) > nq {
		pass = pass[:nq]
	}
	if len(pass) < p.g.top {
		// Nothing (or little) passes the closed forms: run the closest misses too, so
		// the table can show what comes nearest.
		sort.SliceStable(nearMiss, func(i, j int) bool { return cfScore(nearMiss[i]) > cfScore(nearMiss[j]) })
		pass = append(pass, nearMiss[:min(len(nearMiss), 3*p.g.top)]...)
	}
	for _, pr := range pass {
		if err := p.check(pr, kind, period, quickWindow, []uint64{p.g.seed}); err != nil {
			return nil, err
		}
		out.simmed++
		if pr.meets {
			out.meeting++
		}
	}
	sort.SliceStable(pass, func(i, j int) bool { return p.better(pass[i], pass[j]) })
	// Verify the best, one pair per time constant, until Top are shown.
	var products []float64
	for _, pr := range pass {
		if len(out.shown) >= p.g.top || len(products) > 3*p.g.top {
			break
		}
		tau := pr.r * pr.c
		dup := false
		for _, q := range products {
			if math.Abs(tau/q-1) < 0.02 {
				dup = true
				break
			}
		}
		if dup {
			continue
		}
		products = append(products, tau)
		if err := p.check(pr, kind, period, p.verifyWin, p.verifySeeds()); err != nil {
			return nil, err
		}
		pr.verified = true
		if out.meeting > 0 && len(p.failures(pr)) > 0 && len(out.shown) > 0 {
			continue // failed its longer check: keep looking for one that holds
		}
		out.shown = append(out.shown, pr)
	}
	// Rank the shown pairs over the spread of real parts: each runs at the corners.
	for _, pr := range out.shown {
		tv, err := p.corners(pr, kind)
		if err != nil {
			return nil, err
		}
		pr.tv = tv
	}
	sort.SliceStable(out.shown, func(i, j int) bool { return p.better(out.shown[i], out.shown[j]) })
	if len(out.shown) > 0 {
		out.best = out.shown[0]
	}
	return out, nil
}

// verifySeeds are the seeds of the longer checking runs: p.nSeeds of them (three for
// design, six for a capture), so that a figure that depends on chance (noise-triggered
// corrections in hold) is a stable mean and the verdict sees a bad seed.
func (p *plant) verifySeeds() []uint64 {
	s := make([]uint64, p.nSeeds)
	for i := range s {
		s[i] = p.g.seed + 1 + uint64(i)
	}
	return s
}

// candidate turns a verified pair into a table row.
func (p *plant) candidate(pr *pair, kind loop.Kind) Candidate {
	series := p.rParts.String() + "/" + p.cParts.String()
	c := Candidate{
		ROhm:               pr.r,
		CF:                 pr.c,
		Series:             series,
		PredictedRipplePPV: pr.res.rippleMean,
		PredictedSettleS:   pr.res.settleMean,
		PinCurrentA:        pr.pinA,
		VInfSagV:           pr.sag,
		TauS:               pr.ci.Tau(loop.Charge),
		EffectiveCF:        pr.ci.C,
		StaticErrorV:       pr.res.staticErr,
		BandJumps:          pr.res.jumps,
		Settled:            pr.res.settled,
		WindowSamples:      pr.window,
		ReadRipplePPV:      pr.res.readMean,
		ReadWindowSamples:  pr.window,
		Tolerance:          pr.tv,
	}
	c.SuggestedGateV, c.SuggestedGate = suggestGate(pr.res.readMean, p.lsb())
	if pr.tv != nil {
		pr.tv.Text = verdictText(pr.tv)
	}
	if kind == loop.ThreeState {
		c.DeadbandCounts = pr.db
	}
	f := p.failures(pr)
	c.MeetsGoals = len(f) == 0
	c.RulesBroken = append([]string{}, pr.broken...)
	if c.MeetsGoals {
		c.Verdict = VerdictMeets
	} else {
		c.Verdict = strings.Join(f, ", ")
	}
	if len(pr.broken) > 0 {
		c.Verdict += "; " + strings.Join(pr.broken, ", ")
	}
	c.Trades = p.trades(pr, kind)
	return c
}

// trades says what a pair gives up.
func (p *plant) trades(pr *pair, kind loop.Kind) string {
	var t []string
	rr := pr.res.ripplePP / p.g.rippleV
	sr := pr.res.settleS / p.g.settleS
	switch {
	case rr > 0.7 && sr < 0.5:
		t = append(t, fmt.Sprintf("fast (%.0f %% of the settling budget) but ripple uses %.0f %% of its budget", 100*sr, 100*rr))
	case sr > 0.7 && rr < 0.5:
		t = append(t, fmt.Sprintf("quiet (ripple %.0f %% of budget) but slow: %.0f %% of the settling budget", 100*rr, 100*sr))
	default:
		t = append(t, fmt.Sprintf("ripple %.0f %% and settling %.0f %% of budget", 100*rr, 100*sr))
	}
	if kind == loop.ThreeState && pr.db > 0 {
		t = append(t, fmt.Sprintf("static error up to %s (%s)", figure.Count(pr.db, "count"), fmtV(float64(pr.db)*p.lsb())))
	}
	t = append(t, p.ruleTrades(pr)...)
	switch {
	case p.tol.kind == CKindX7R && !p.cMeasured:
		t = append(t, fmt.Sprintf("designed with the X7R DC-bias loss (%.0f %% of marked left at %s, common practice): measure yours", 100*p.tol.bias, fmtV(p.tol.biasAt)))
	case p.tol.kind == CKindC0G && pr.c > 100e-9*(1+relTol):
		t = append(t, "C0G is rare above 0.1 µF: film, or X7R with its DC-bias loss")
	case p.tol.kind == CKindFilm && pr.c >= 1e-6*(1-relTol) && pr.c <= ruleMaxC*(1+relTol):
		t = append(t, "film at this size; a class-2 ceramic instead loses capacitance under DC bias (--c-kind x7r)")
	}
	return strings.Join(t, "; ")
}

// runKey names one loop model run. Without a load, leak, follower or pin resistance the
// run depends on R and C only through tau = R C, so pairs with the same product (10 kΩ
// with 1 µF, 100 kΩ with 100 nF) share one run.
type runKey struct {
	a, b, supply, load, leak float64
	kind                     loop.Kind
	db                       int
	period, tol              float64
	plan                     runPlan
	seed                     uint64
}

// cachedRun is simulate with a cache of model runs keyed by runKey.
func (p *plant) cachedRun(ci loop.Circuit, kind loop.Kind, db int, period float64, seed uint64, tol float64, plan runPlan) (simResult, error) {
	k := runKey{a: ci.R, b: ci.C, supply: ci.Supply, load: ci.Load, leak: ci.Leak, kind: kind, db: db,
		period: period, tol: tol, plan: plan, seed: seed}
	cacheable := !ci.HasFollower() && ci.RPin == 0 && (ci.RDischarge == 0 || ci.RDischarge == ci.R)
	if cacheable && ci.Load == 0 && ci.Leak == 0 {
		k.a, k.b = roundSig(ci.R*ci.C, 12), 1
	}
	if cacheable {
		if r, ok := p.cache[k]; ok {
			return r.clone(), nil
		}
	}
	r, err := simulate(p.config(ci, kind, db, period, p.g.noise, seed), p, tol, plan)
	if err != nil || !cacheable {
		return r, err
	}
	if p.cache == nil {
		p.cache = map[runKey]simResult{}
	}
	p.cache[k] = r.clone()
	return r, nil
}

// clone copies a result with its own maps.
func (r simResult) clone() simResult {
	c := r
	c.jumpsAt = make(map[int]int64, len(r.jumpsAt))
	for k, v := range r.jumpsAt {
		c.jumpsAt[k] = v
	}
	c.rippleAt = make(map[int]float64, len(r.rippleAt))
	for k, v := range r.rippleAt {
		c.rippleAt[k] = v
	}
	return c
}

// quickCap is how many closed-form survivors get a short run: maxQuick, or fewer for a
// summary's advice (see FromSummaryPlant).
func (p *plant) quickCap() int {
	if p.maxQuick > 0 {
		return p.maxQuick
	}
	return maxQuick
}
