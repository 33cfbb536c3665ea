package advice

import (
	"errors"
	"fmt"
	"math"
	"sort"
	"strings"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/figure"
	"github.com/caploop/caploop/analysis/loop"
	"github.com/caploop/caploop/telemetry/si"
)

// ErrNoBoard is returned (wrapped) by FromSummary when the capture does not say enough
// about the board (vref, adc_bits and the sample period are needed).
var ErrNoBoard = errors.New("advice: capture does not describe the board")

// Design answers a design question without a board: it tries every R and C pair on hand,
// prunes with closed forms, runs the survivors through the loop model, verifies the best
// with longer runs and two more seeds, and returns the ranked table, the deadband, the
// sample period and, when no pair meets the goals, the change of circuit that would.
// Every predicted figure comes from a loop model run.
func Design(req Request) (*Advice, error) {
	p, err := req.resolve()
	if err != nil {
		return nil, err
	}
	return p.advise(nil, false)
}

// FromSummary gives advice for the board a capture came from: the deadband for its present
// circuit (with the identified plant: real tau, load, noise), and standard R and C pairs
// designed with the measured capacitance ratio. Goals fill in as in Design.
func FromSummary(s *analysis.Summary, g Goals) (*Advice, error) {
	if s == nil {
		return nil, fmt.Errorf("advice: nil summary")
	}
	return FromSummaryPlant(s, PlantOf(s), g)
}

// FromSummaryPlant is FromSummary with the plant given: the one the summary identified
// (kind none, load or buffer), which the advice designs for and states.
func FromSummaryPlant(s *analysis.Summary, in PlantInput, g Goals) (*Advice, error) {
	if s == nil {
		return nil, fmt.Errorf("advice: nil summary")
	}
	// The summary's advice runs on every summary (40 ms budget): its Monte Carlo checks
	// the top pair only, with fewer builds, and fewer pairs get a short run, unless the
	// caller asks for builds.
	quick := g.Tol.Builds == 0
	if quick {
		g.Tol.Builds = summaryBuilds
	}
	req, cur, err := requestFromSummary(s, in, g)
	if err != nil {
		return nil, err
	}
	p, err := req.resolve()
	if err != nil {
		return nil, err
	}
	if quick {
		p.mcPairs, p.maxQuick = 1, summaryQuick
	}
	// A capture's advice checks with longer steady windows, so that figures driven by
	// measured noise settle to their long-run values.
	a, err := p.advise(cur, req.noiseMeasured)
	if err != nil {
		return nil, err
	}
	if req.ignoredCRatio != 0 {
		a.Notes = append(a.Notes, fmt.Sprintf("the identified capacitance is %.2f x marked, outside the plausible %.1f..%.0f x: taken as a poor fit, the design uses the marked value",
			req.ignoredCRatio, minCRatio, maxCRatio))
	}
	return a, nil
}

// The plausible range of real over marked capacitance: class-2 ceramics can lose most of
// their value under DC bias, electrolytics run up to +80 % (common practice). An identified
// ratio outside it is more likely a poor fit than a part, and is not designed with.
const (
	minCRatio = 0.2
	maxCRatio = 2.0
)

// present is the board's own R and C (marked), when known, and its deadband.
type present struct {
	r, c float64
	db   int
}

func requestFromSummary(s *analysis.Summary, in PlantInput, g Goals) (Request, *present, error) {
	b, pl := s.Board, s.Plant
	var req Request
	var missing []string
	if b.VrefV == nil {
		missing = append(missing, "vref")
	} else {
		req.VrefV = *b.VrefV
	}
	if b.ADCBits == nil {
		missing = append(missing, "adc_bits")
	} else {
		req.Bits = *b.ADCBits
	}
	if s.SamplePeriodS == nil {
		missing = append(missing, "sample period")
	} else {
		req.PeriodS = *s.SamplePeriodS
	}
	if len(missing) > 0 {
		return req, nil, fmt.Errorf("%w: no %s (send them in a meta line, e.g. # vref=5 adc_bits=10 period_us=1000)", ErrNoBoard, strings.Join(missing, ", "))
	}
	// One plant: a load or a buffer, never a buffer drop stacked on a load.
	req.Plant = &in
	req.VBE = in.SenseDropV
	if in.Kind == PlantNone {
		req.VBE = 0
	}
	switch {
	case b.SupplyV != nil:
		req.SupplyV = *b.SupplyV
	case pl.VHighV != nil:
		req.SupplyV = *pl.VHighV + req.VBE
	default:
		req.SupplyV = req.VrefV
	}
	if in.Kind == PlantLoad {
		req.LoadOhm = in.LoadOhm
	}
	switch b.Mode {
	case "three-state":
		req.Mode = loop.ThreeState
	case "two-state":
		req.Mode = loop.TwoState
	default:
		req.Mode = loop.TwoState
		if b.DeadbandCounts != nil {
			req.Mode = loop.ThreeState
		}
	}
	var cur *present
	if b.ROhm != nil && b.CF != nil && *b.ROhm > 0 && *b.CF > 0 {
		cur = &present{r: *b.ROhm, c: *b.CF, db: -1}
		// The real C from the identified charge tau: tau = C * (R || load). The summary's
		// own effective C comes from tau and R alone, which blames the load on the part.
		var ceff float64
		switch {
		case pl.TauChargeS != nil && *pl.TauChargeS > 0:
			rp := *b.ROhm
			if req.LoadOhm > 0 {
				rp = rp * req.LoadOhm / (rp + req.LoadOhm)
			}
			ceff = *pl.TauChargeS / rp
		case pl.EffectiveCF != nil && *pl.EffectiveCF > 0:
			ceff = *pl.EffectiveCF
		}
		if ceff > 0 {
			req.CRatio = ceff / *b.CF
			if req.CRatio < minCRatio || req.CRatio > maxCRatio {
				req.ignoredCRatio, req.CRatio = req.CRatio, 0
			}
		}
	} else if pl.TauChargeS != nil && *pl.TauChargeS > 0 {
		// Parts unknown: any R and C with the identified tau behave the same; take 10 kOhm.
		r := 10e3
		rp := r
		if req.LoadOhm > 0 {
			rp = r * req.LoadOhm / (r + req.LoadOhm)
		}
		cur = &present{r: r, c: *pl.TauChargeS / rp, db: -1}
	}
	if cur != nil && b.DeadbandCounts != nil && req.Mode == loop.ThreeState {
		cur.db = int(math.Round(*b.DeadbandCounts))
	}
	if cur != nil && pl.TauHoldS != nil && *pl.TauHoldS > 0 && req.LoadOhm == 0 {
		ceff := cur.c
		if req.CRatio > 0 {
			ceff *= req.CRatio
		}
		req.LeakOhm = *pl.TauHoldS / ceff
	}
	if pl.NoiseRMSCounts != nil && *pl.NoiseRMSCounts > 0 && g.NoiseRMSCount == 0 {
		g.NoiseRMSCount = *pl.NoiseRMSCounts
		req.noiseMeasured = true
	}
	if len(g.Setpoints) == 0 {
		for _, seg := range s.Segments {
			if !seg.Unreachable {
				g.Setpoints = append(g.Setpoints, math.Round(seg.SetpointCounts))
			}
		}
	}
	req.Goals = g
	return req, cur, nil
}

// advise runs the whole engine. cur is the board's present pair (summary) or nil (design).
func (p *plant) advise(cur *present, noiseMeasured bool) (*Advice, error) {
	a := &Advice{Candidates: []Candidate{}, Topology: []TopologyAdvice{}}
	sr, err := p.search(p.kind, p.period)
	if err != nil {
		return nil, err
	}
	a.Search = &SearchStats{PairsTried: sr.tried, PairsSimulated: sr.simmed, PairsMeeting: sr.meeting}
	if err := p.tolerance(sr); err != nil {
		return nil, err
	}
	a.Plant, a.Tolerances = p.used(), p.tolUsed()
	for _, pr := range sr.shown {
		a.Candidates = append(a.Candidates, p.candidate(pr, p.kind))
	}

	// The deadband: for the present circuit when there is one, else for the top pair.
	ref := sr.best
	if cur != nil {
		ref = &pair{r: cur.r, c: cur.c, ci: p.circuit(cur.r, cur.c)}
		p.closedForm(ref, p.kind, p.period)
		// The present circuit as it runs: at the board's own band when it said one.
		now := *ref
		if cur.db >= 0 {
			now.db = cur.db
		}
		if err := p.check(&now, p.kind, p.period, p.verifyWin, p.verifySeeds()); err != nil {
			return nil, err
		}
		c := p.candidate(&now, p.kind)
		c.Series = "present"
		a.Current = &c
	}
	if ref != nil {
		var top *Candidate
		if len(a.Candidates) > 0 {
			top = &a.Candidates[0]
		}
		if msg := p.fastProblem(ref, cur != nil, top); msg != "" {
			a.Problems = append(a.Problems, msg)
		}
	}
	if ref != nil && p.kind == loop.ThreeState {
		db, w, steps := deadband(ref.ci, p, p.period)
		w.Steps = steps
		// The band as run: the checking simulation of this very circuit at this band.
		if err := p.bandCheck(ref, db, w); err != nil {
			return nil, err
		}
		a.DeadbandCounts, a.DeadbandWorking = &db, w
	}
	p.fillGoals(a, noiseMeasured)
	a.Goals.SettleTolV = p.tolFor(0)
	if ref != nil {
		a.Goals.SettleTolV = p.tolFor(ref.db)
		pa, err := p.periodAdvice(ref)
		if err != nil {
			return nil, err
		}
		a.SamplePeriod = pa
	}
	if sr.meeting == 0 || len(a.Candidates) == 0 || !a.Candidates[0].MeetsGoals {
		t, err := p.topology(sr)
		if err != nil {
			return nil, err
		}
		a.Topology = t
	}
	a.Cautions = p.cautions(a)
	a.Notes = p.notes(a, sr)
	return a, nil
}

// bandCheck runs the three-state loop on the reference circuit at the suggested band and
// one count narrower, and records the band jumps the model shows in each.
func (p *plant) bandCheck(ref *pair, db int, w *DeadbandWorking) error {
	q := *ref
	q.db = db
	plan := p.plan(&q, p.period, p.verifyWin)
	seeds := []uint64{p.g.seed + 100}
	r, err := simulate(p.config(q.ci, loop.ThreeState, db, p.period, p.g.noise, seeds[0]), p, p.tolFor(db), plan)
	if err != nil {
		return err
	}
	w.VerifiedJumps = r.jumps
	w.NarrowerDB = db - 1
	if db >= 1 {
		q.db = db - 1
		r, err := simulate(p.config(q.ci, loop.ThreeState, db-1, p.period, p.g.noise, seeds[0]), p, p.tolFor(db-1), plan)
		if err != nil {
			return err
		}
		w.NarrowerJumps = r.jumps
	}
	return nil
}

func (p *plant) fillGoals(a *Advice, noiseMeasured bool) {
	a.Goals = &GoalsUsed{
		Mode: p.kind.String(), SupplyV: p.supply, VrefV: p.vref, ADCBits: p.bits, PeriodS: p.period,
		LoadOhm: p.load, RipplePPV: p.g.rippleV, SettleS: p.g.settleS, StaticErrorV: p.g.staticV,
		PinCurrentA: p.g.pinA, MinPeriodS: p.g.minPeriod, NoiseRMSCounts: p.g.noise,
		NoiseMeasured: noiseMeasured, SigmaMultiple: p.g.sigmaK,
		SetpointCounts: append([]int(nil), p.sps...), StepFromCounts: p.lo, StepToCounts: p.hi,
		PinCurrentWhy: p.g.pinWhy,
		CRatio:        p.cRatio, RRatio: p.rRatio, LeakOhm: p.leak, FollowerVBEV: p.vbe, RParts: p.partsText(p.rParts, "Ω", 100, 1e6), CParts: p.partsText(p.cParts, "F", 10e-9, 100e-6),
	}
}

func (p *plant) partsText(pp Parts, unit string, lo, hi float64) string {
	if len(pp.List) > 0 {
		s := ""
		for i, v := range pp.List {
			if i > 0 {
				s += " "
			}
			s += si.Format(v, unit)
		}
		return s
	}
	if pp.Min > 0 {
		lo = pp.Min
	}
	if pp.Max > 0 {
		hi = pp.Max
	}
	return fmt.Sprintf("%s %s to %s", pp.String(), si.Format(lo, unit), si.Format(hi, unit))
}

// periodAdvice runs the reference pair at other sample periods (never below the ADC
// conversion time) and suggests the one with the best margin on the goals.
func (p *plant) periodAdvice(ref *pair) (*PeriodAdvice, error) {
	pa := &PeriodAdvice{CurrentS: p.period, SuggestedS: p.period, FloorS: p.g.minPeriod}
	type try struct {
		t     float64
		pr    *pair
		meets bool
	}
	var tries []try
	seen := map[float64]bool{}
	for _, f := range []float64{0.25, 0.5, 1, 2, 4} {
		t := math.Max(p.period*f, p.g.minPeriod)
		t = roundSig(t, 3)
		if f == 1 {
			t = p.period
		}
		if seen[t] {
			continue
		}
		seen[t] = true
		q := &pair{r: ref.r, c: ref.c, ci: ref.ci}
		p.closedForm(q, p.kind, t)
		if err := p.check(q, p.kind, t, 2*quickWindow, []uint64{p.g.seed + 4}); err != nil {
			return nil, err
		}
		tries = append(tries, try{t, q, len(p.failures(q)) == 0})
	}
	best := -1
	cur := -1
	for i, tr := range tries {
		if tr.t == p.period {
			cur = i
		}
		if best < 0 || tr.pr.score > tries[best].pr.score {
			best = i
		}
	}
	// Change the period only for a clear gain: margins better by a quarter (log units).
	if cur >= 0 && best >= 0 && tries[best].pr.score <= tries[cur].pr.score+0.25 {
		best = cur
	}
	b := tries[best]
	pa.SuggestedS = b.t
	atFloor := ""
	if b.t <= p.g.minPeriod*1.0001 {
		atFloor = " (the ADC conversion time floor)"
	}
	switch {
	case b.t == p.period && b.meets:
		pa.Reason = fmt.Sprintf("keep %s: it meets the goals and no other period in 1/4..4x does clearly better", si.Format(p.period, "s"))
	case b.t == p.period:
		pa.Reason = fmt.Sprintf("no period from %s to %s meets the goals with these parts; the period is not the limit",
			si.Format(tries[0].t, "s"), si.Format(tries[len(tries)-1].t, "s"))
	case b.t < p.period:
		pa.Reason = fmt.Sprintf("a shorter period %s%s makes each step smaller: ripple %s, settling %s, band %d (the firmware reads the ADC more often)",
			si.Format(b.t, "s"), atFloor, fmtV(b.pr.res.rippleMean), si.Format(b.pr.res.settleMean, "s"), b.pr.db)
	default:
		pa.Reason = fmt.Sprintf("a longer period %s still meets the goals with more margin: ripple %s, settling %s (fewer conversions for the firmware)",
			si.Format(b.t, "s"), fmtV(b.pr.res.rippleMean), si.Format(b.pr.res.settleMean, "s"))
	}
	return pa, nil
}

// topology tries the changes of circuit when no pair meets the goals.
func (p *plant) topology(sr *searchResult) ([]TopologyAdvice, error) {
	var out []TopologyAdvice
	add := func(change, reason string, pr *pair) {
		out = append(out, TopologyAdvice{
			Change: change, Reason: reason, Meets: len(p.failures(pr)) == 0,
			PredictedRipplePPV: pr.res.rippleMean, PredictedSettleS: pr.res.settleMean,
		})
	}
	if p.kind == loop.TwoState {
		r, err := p.search(loop.ThreeState, p.period)
		if err != nil {
			return nil, err
		}
		if r.best != nil {
			add(fmt.Sprintf("three-state with hold: R %s, C %s, deadband %d",
				si.Format(r.best.r, "Ω"), si.Format(r.best.c, "F"), r.best.db),
				"hold stops the limit cycle once the output is in the band; needs a pin that can float or two switches, each with its own series resistor", r.best)
		}
	}
	if p.load > 0 {
		q := *p
		q.load = 0
		r, err := q.search(p.kind, p.period)
		if err != nil {
			return nil, err
		}
		if r.best != nil {
			add(fmt.Sprintf("op-amp follower buffer between the capacitor and the %s load: R %s, C %s",
				si.Format(p.load, "Ω"), si.Format(r.best.r, "Ω"), si.Format(r.best.c, "F")),
				"the load no longer sags V_inf or shortens tau; the buffer's supply must reach the top setpoint", r.best)
		}
	}
	// A second RC stage after the best pair that misses on ripple only.
	var base *pair
	for _, pr := range sr.shown {
		f := p.failures(pr)
		if contains(f, "ripple too high") && !contains(f, "too slow") && !contains(f, "pin current too high") &&
			!contains(f, "cannot reach the top setpoint") {
			base = pr
			break
		}
	}
	if base != nil {
		r2 := Snap(10*base.r, "E12")
		for _, k := range []float64{0.05, 0.1, 0.2, 0.3, 0.5} {
			c2 := Snap(k*base.ci.Tau(loop.Charge)/r2, "E12")
			q := *base
			plan := p.plan(&q, p.period, p.verifyWin)
			plan.tau2 = r2 * c2
			plan.settleLen = min(plan.settleLen+int(math.Ceil(5*plan.tau2/p.period)), maxSettleLen)
			if err := p.checkPlan(&q, p.kind, p.period, plan, []uint64{p.g.seed + 5}); err != nil {
				return nil, err
			}
			if len(p.failures(&q)) == 0 || k == 0.5 {
				add(fmt.Sprintf("second RC stage after R %s, C %s: R2 %s, C2 %s",
					si.Format(base.r, "Ω"), si.Format(base.c, "F"), si.Format(r2, "Ω"), si.Format(c2, "F")),
					"the second stage filters the limit-cycle ripple outside the loop (the ADC still reads the first capacitor); R2 = 10 R so it barely loads the first, and the load must be >= 10 R2", &q)
				break
			}
		}
	}
	sort.SliceStable(out, func(i, j int) bool { return out[i].Meets && !out[j].Meets })
	return out, nil
}

func fmtV(v float64) string { return figure.Value(v, "V") }
func fmtA(v float64) string { return figure.Value(v, "A") }
