package advice

import (
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"sort"
	"sync"

	"github.com/caploop/caploop/analysis/loop"
	"github.com/caploop/caploop/telemetry/si"
)

// build is one set of real part values, as factors of the nominal ones.
type build struct {
	rf, cf, sf float64 // resistor, capacitor, supply factors
	verr       float64 // reference error, fraction (loop.ADC.VrefError)
	seed       uint64
}

// buildCircuit is the circuit of pair pr as one build made it.
func (p *plant) buildCircuit(pr *pair, b build) loop.Circuit {
	ci := pr.ci
	ci.R *= b.rf
	ci.C *= b.cf
	ci.Supply *= b.sf
	return ci
}

// buildOutcome is what one build did in the loop model.
type buildOutcome struct {
	meets          bool
	ripple, settle float64
}

// runBuild runs one build of a pair through the loop model and judges it against the
// goals: pin current at the build's supply and R, reach of the top setpoint, settling,
// ripple p-p and static error. The reference error moves every level with it (the board
// regulates its own reading); it is not counted against the goals.
func (p *plant) runBuild(pr *pair, kind loop.Kind, b build, plan runPlan) (buildOutcome, error) {
	ci := p.buildCircuit(pr, b)
	plan.vScale = 1 + b.verr
	cfg := p.config(ci, kind, pr.db, p.period, p.g.noise, b.seed)
	cfg.ADC.VrefError = b.verr
	var o buildOutcome
	pin := ci.Supply / ci.RCharge()
	top := ci.Sense(ci.VInf(loop.Charge))
	reach := top >= (p.senseV(p.hi)+0.5*p.lsb())*plan.vScale
	tol := p.tolFor(pr.db)
	r, err := simulate(cfg, p, tol, plan)
	if err != nil {
		return o, err
	}
	o.ripple, o.settle = r.ripplePP, r.settleS
	if !r.settled {
		o.settle = math.Inf(1)
	}
	o.meets = pin <= p.g.pinA*(1+1e-9) && reach && r.settled && r.settleS <= p.g.settleS &&
		r.ripplePP <= p.g.rippleV && (p.g.staticV == 0 || r.staticErr <= p.g.staticV)
	return o, nil
}

// tolPlan is the run plan of the tolerance runs of a pair: the short runs' settling cap
// over the slowest build, and a window of mcWindow samples.
func (p *plant) tolPlan(pr *pair) runPlan {
	q := *pr
	q.ci.R *= 1 + p.tol.rTol
	q.ci.C *= 1 + p.tol.cHi
	return p.plan(&q, p.period, mcWindow)
}

// nCorners is how many extreme combinations corners runs.
const nCorners = 8

// corners runs the extreme combinations of the spread, one seed each: every R and C
// extreme, each with the supply high and the reference low (the largest steps against
// the readings) and with the supply low and the reference high (the least headroom).
// The reference on its own only moves the levels, so it is paired rather than crossed.
func (p *plant) corners(pr *pair, kind loop.Kind) (*ToleranceVerdict, error) {
	t := p.tol
	v := &ToleranceVerdict{}
	plan := p.tolPlan(pr)
	for i := 0; i < nCorners; i++ {
		b := build{rf: 1 - t.rTol, cf: 1 - t.cLo, sf: 1 + t.sTol, verr: -t.vTol, seed: p.g.seed + 7}
		if i&1 != 0 {
			b.rf = 1 + t.rTol
		}
		if i&2 != 0 {
			b.cf = 1 + t.cHi
		}
		if i&4 != 0 {
			b.sf, b.verr = 1-t.sTol, t.vTol
		}
		o, err := p.runBuild(pr, kind, b, plan)
		if err != nil {
			return nil, err
		}
		v.Corners++
		if o.meets {
			v.CornersMeeting++
		}
		v.WorstCornerPPV = math.Max(v.WorstCornerPPV, o.ripple)
	}
	return v, nil
}

// drawBuilds draws n builds: each part uniform over its tolerance band, its own noise seed.
func (p *plant) drawBuilds(n int, seed uint64) []build {
	rng := rand.New(rand.NewPCG(seed, 0x5eed))
	t := p.tol
	out := make([]build, n)
	for i := range out {
		out[i] = build{
			rf:   1 + t.rTol*(2*rng.Float64()-1),
			cf:   1 - t.cLo + (t.cLo+t.cHi)*rng.Float64(),
			sf:   1 + t.sTol*(2*rng.Float64()-1),
			verr: t.vTol * (2*rng.Float64() - 1),
			seed: rng.Uint64(),
		}
	}
	return out
}

// monteCarlo runs n random builds of a pair through the loop model, on every core, and
// fills the verdict's yield and worst figures.
func (p *plant) monteCarlo(pr *pair, kind loop.Kind, n int, seed uint64, v *ToleranceVerdict) error {
	builds := p.drawBuilds(n, seed)
	plan := p.tolPlan(pr)
	outs := make([]buildOutcome, n)
	workers := min(runtime.GOMAXPROCS(0), max(n/64, 1))
	var wg sync.WaitGroup
	errs := make([]error, workers)
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			for i := w; i < n; i += workers {
				o, err := p.runBuild(pr, kind, builds[i], plan)
				if err != nil {
					errs[w] = err
					return
				}
				outs[i] = o
			}
		}(w)
	}
	wg.Wait()
	for _, e := range errs {
		if e != nil {
			return e
		}
	}
	v.Builds, v.BuildsMeeting, v.WorstRipplePPV, v.WorstSettleS = n, 0, 0, 0
	for _, o := range outs {
		if o.meets {
			v.BuildsMeeting++
		}
		v.WorstRipplePPV = math.Max(v.WorstRipplePPV, o.ripple)
		v.WorstSettleS = math.Max(v.WorstSettleS, o.settle)
	}
	v.Yield = float64(v.BuildsMeeting) / float64(n)
	v.YieldSE = math.Sqrt(v.Yield * (1 - v.Yield) / float64(n))
	return nil
}

// verdictText words a tolerance verdict: "meets goals in 99.6 % of 2000 builds; worst
// ripple 31 mV", or the corners alone when no Monte Carlo was run.
func verdictText(v *ToleranceVerdict) string {
	if v.Builds > 0 {
		settle := si.FormatDigits(v.WorstSettleS, "s", 3)
		if math.IsInf(v.WorstSettleS, 1) {
			settle = "some never settle"
		}
		return fmt.Sprintf("meets goals in %s %% of %d builds; worst ripple %s at the node, worst settling %s",
			pctText(v.Yield), v.Builds, fmtV(v.WorstRipplePPV), settle)
	}
	return fmt.Sprintf("meets goals at %d of %d tolerance corners; worst corner ripple %s at the node",
		v.CornersMeeting, v.Corners, fmtV(v.WorstCornerPPV))
}

// pctText prints a yield with one decimal, never rounding a miss up to 100 %.
func pctText(y float64) string {
	s := fmt.Sprintf("%.1f", 100*y)
	if s == "100.0" && y < 1 {
		s = "99.9"
	}
	if y == 1 {
		s = "100"
	}
	return s
}

// tolerance runs the Monte Carlo on the top shown pairs (after the corner ranking), and
// puts a pair that holds its goals over the spread (99 % of builds) ahead of one that does
// not, keeping the order otherwise.
func (p *plant) tolerance(sr *searchResult) error {
	if p.tol.builds <= 0 {
		return nil
	}
	n := min(p.mcPairs, len(sr.shown))
	for i := 0; i < n; i++ {
		pr := sr.shown[i]
		if pr.tv == nil {
			pr.tv = &ToleranceVerdict{}
		}
		if err := p.monteCarlo(pr, p.kind, p.tol.builds, p.g.seed+uint64(1000*(i+1)), pr.tv); err != nil {
			return err
		}
	}
	head := sr.shown[:n]
	holds := func(pr *pair) bool { return pr.meets && pr.tv.Yield >= 0.99 }
	sort.SliceStable(head, func(i, j int) bool { return holds(head[i]) && !holds(head[j]) })
	if n > 0 {
		sr.best = sr.shown[0]
	}
	return nil
}
