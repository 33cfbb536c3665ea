package tune

import (
	"context"
	"errors"
	"fmt"
	"math"
	"time"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/advice"
	"github.com/caploop/caploop/telemetry/si"
)

// Run tunes the board behind c: ask, plan (confirmed by o.Confirm), identify, advise,
// apply and verify, and restore the board's settings whatever happened after the first
// set. The Result holds what was done so far even when the error is not nil; Restored
// and RestoreNote say whether the settings are back.
func Run(ctx context.Context, c Conn, o Options) (*Result, error) {
	o = o.withDefaults()
	s := newSession(c)
	res := &Result{}
	bi, err := s.ask(ctx, o)
	res.Board = bi
	if err != nil {
		res.Stopped = err.Error()
		return res, err
	}
	plan, err := makePlan(bi, o)
	if err != nil {
		res.Stopped = err.Error()
		return res, err
	}
	res.Plan = plan
	if plan.Guided && !o.Guided {
		err := fmt.Errorf("%w (no sp in its accepts= list): run again with --guided to dial each setpoint in by hand", ErrNeedsGuide)
		res.Stopped = err.Error()
		return res, err
	}
	res.Guided = plan.Guided
	if o.Confirm != nil {
		ok, err := o.Confirm(plan.Text(bi))
		if err == nil && !ok {
			err = ErrDeclined
		}
		if err != nil {
			res.Stopped = err.Error()
			return res, err
		}
	}
	r := &runner{s: s, o: o, res: res, b: bi, p: plan, guided: plan.Guided}
	err = r.run(ctx)
	r.restore(err)
	if err != nil {
		res.Stopped = err.Error()
	}
	return res, err
}

// runner is one confirmed run.
type runner struct {
	s      *session
	o      Options
	res    *Result
	b      BoardInfo
	p      *Plan
	guided bool
	sent   bool // a set has been sent: restore on the way out

	ident    *analysis.Accumulator
	tauEst   float64 // samples; 0 until known
	passCmd  string  // the set line of the pass under way (sent again after a re-plug)
	passBand int     // the deadband passCmd sets
	step, of int
}

func (r *runner) progress(format string, a ...any) {
	fmt.Fprintf(r.o.Progress, format+"\n", a...)
}

func (r *runner) send(cmd string) error {
	r.sent = true
	return r.s.send(cmd)
}

func (r *runner) newAcc(name string) *analysis.Accumulator {
	a := analysis.New(analysis.Options{Source: name})
	a.SetMeta(r.s.meta())
	return a
}

func (r *runner) run(ctx context.Context) error {
	s, p := r.s, r.p
	fs := r.b.fullScale()
	lo, hi := r.b.counts(p.Range.Lo), r.b.counts(p.Range.Hi)
	s.guard = guard{on: true, inLo: lo, inHi: hi, lo: lo - float64(p.MarginCounts), hi: math.Min(hi+float64(p.MarginCounts), fs+1)}
	r.of = 3 + 2*2 + 1 + 3 // before, two identify cycles, advise, verify
	sps := []int{p.LoCounts, p.HiCounts, p.LoCounts}

	// 1. before: the board's own band.
	before := r.newAcc("before")
	r.ident = r.newAcc("identify")
	s.accs = []*analysis.Accumulator{before, r.ident}
	s.conn.Annotate("tune: before pass")
	for _, sp := range sps {
		if err := r.hold(ctx, "before", sp); err != nil {
			r.res.Before = before.Summary()
			return err
		}
	}
	r.res.Before = before.Summary()

	// 2. identify: wide band holds until tau is identifiable.
	s.accs = []*analysis.Accumulator{r.ident}
	if w := p.WideBandCounts; w != nil {
		cmd := fmt.Sprintf("set deadband=%d", *w)
		if p.ThreeState {
			cmd += " mode=three-state"
		}
		if err := r.setPass(ctx, "identify", cmd, *w); err != nil {
			return err
		}
	}
	s.conn.Annotate("tune: identify pass")
	var sum *analysis.Summary
	for cyc := 1; ; cyc++ {
		for _, sp := range []int{p.HiCounts, p.LoCounts} {
			if err := r.hold(ctx, "identify", sp); err != nil {
				r.res.Identify = r.ident.Summary()
				return err
			}
		}
		r.res.Cycles = cyc
		sum = r.ident.Summary()
		ok, why := identified(sum, r.b.PeriodS)
		r.progress("identify: cycle %d: %s", cyc, tauText(sum))
		if ok {
			r.progress("identify: tau identifiable after %d cycle(s)", cyc)
			break
		} else if cyc >= r.o.MaxCycles {
			r.progress("identify: %s after %d cycles; going on with what there is", why, cyc)
			break
		}
		r.of += 2
	}
	r.res.Identify = sum
	r.res.Plant = plantInfo(sum)

	// 3. advise.
	r.step++
	r.progress("step %d of %d: advise", r.step, r.of)
	g := r.o.Goals
	g.Setpoints = []float64{float64(p.LoCounts), float64(p.HiCounts)}
	adv, err := advice.FromSummary(sum, g)
	if err != nil {
		r.res.AdviceErr = err.Error()
		return fmt.Errorf("tune: advice: %w", err)
	}
	r.res.Advice = adv
	if adv.DeadbandCounts == nil {
		return fmt.Errorf("tune: the advice gives no deadband")
	}
	if adv.DeadbandWorking != nil {
		j := adv.DeadbandWorking.VerifiedJumps
		r.res.PredictedJumps = &j
	}
	r.progress("advise: deadband %d counts (the loop model shows %s band jumps with it)", *adv.DeadbandCounts, jumpsText(r.res.PredictedJumps))
	if cur := adv.Current; cur != nil && !cur.MeetsGoals && len(adv.Candidates) > 0 {
		c := adv.Candidates[0]
		tol := ""
		if c.Tolerance != nil && c.Tolerance.Text != "" {
			tol = "; over the spread of parts: " + c.Tolerance.Text
		}
		r.progress("advise: these parts do not meet the goals in the loop model (%s); the advice: R %s, C %s, band %d (%s%s)",
			cur.Verdict, si.Format(c.ROhm, "Ω"), si.Format(c.CF, "F"), c.DeadbandCounts, c.Verdict, tol)
	}

	// 4. apply and verify.
	if p.WideBandCounts == nil {
		r.progress("verify: skipped; build deadband %d into the firmware (see the header) and run tune again", *adv.DeadbandCounts)
		return nil
	}
	cmd := fmt.Sprintf("set deadband=%d", *adv.DeadbandCounts)
	d := *adv.DeadbandCounts
	r.res.AppliedDeadband = &d
	if ps := adv.SamplePeriod; ps != nil && r.o.ApplyPeriod && r.b.can("period_us") && math.Abs(ps.SuggestedS-r.b.PeriodS) > 1e-3*r.b.PeriodS {
		us := int(math.Round(ps.SuggestedS * 1e6))
		cmd += fmt.Sprintf(" period_us=%d", us)
		r.res.AppliedPeriodUS = &us
	}
	// The after pass starts when the board's answer shows the new band, so that none of
	// its segments ran under the wide one; an unplug on the way is waited for, and the
	// line sent again when the board is back.
	if err := r.setPass(ctx, "verify", cmd, d); err != nil {
		return err
	}
	after := r.newAcc("after")
	s.accs = []*analysis.Accumulator{after}
	s.conn.Annotate("tune: verify pass")
	for _, sp := range sps {
		if err := r.hold(ctx, "verify", sp); err != nil {
			r.res.After = after.Summary()
			return err
		}
	}
	r.res.After = after.Summary()
	r.res.Compare = Compare(r.res.Before, r.res.After, []int{p.LoCounts, p.HiCounts})
	if r.o.Gates != nil {
		r.res.Gates = r.o.Gates.Check(r.res.After)
		for _, gr := range r.res.Gates {
			if gr.Status == "fail" {
				r.res.GatesFailed = true
			}
		}
	}
	return nil
}

// tauText says tau charge and discharge with their 95 % half-widths.
func tauText(sum *analysis.Summary) string {
	p := &sum.Plant
	f := func(name string, v *float64, ci *[2]float64, why string) string {
		if v == nil || ci == nil {
			return name + " " + why
		}
		return fmt.Sprintf("%s %s ±%.1f %%", name, si.Format(*v, "s"), 100*(ci[1]-ci[0])/2 / *v)
	}
	return f("tau charge", p.TauChargeS, p.TauChargeCIS, p.TauChargeSReason) + ", " + f("tau discharge", p.TauDischargeS, p.TauDischargeCIS, p.TauDischargeSReason)
}

func jumpsText(j *int64) string {
	if j == nil {
		return "unknown"
	}
	return fmt.Sprint(*j)
}

// identified is the stop rule of the identify pass, the rule of CONVENTIONS.md for
// both time constants: a tau of a period or more within 2 % (its 95 % half-width), from
// 0.3 periods within 10 %; below 0.3 periods never (the analysis gives no figure).
func identified(sum *analysis.Summary, T float64) (bool, string) {
	p := &sum.Plant
	for _, f := range []struct {
		name string
		v    *float64
		ci   *[2]float64
		why  string
	}{{"tau charge", p.TauChargeS, p.TauChargeCIS, p.TauChargeSReason}, {"tau discharge", p.TauDischargeS, p.TauDischargeCIS, p.TauDischargeSReason}} {
		if f.v == nil || f.ci == nil {
			if f.why == "" {
				f.why = "not identified"
			}
			return false, f.name + " " + f.why
		}
		hw := (f.ci[1] - f.ci[0]) / 2 / *f.v
		limit := 0.10
		if *f.v >= T {
			limit = 0.02
		}
		if !(hw <= limit) {
			return false, fmt.Sprintf("%s ±%.1f %% (wants %.0f %%)", f.name, 100*hw, 100*limit)
		}
	}
	return true, ""
}

func plantInfo(sum *analysis.Summary) *PlantInfo {
	p := &sum.Plant
	return &PlantInfo{TauChargeS: p.TauChargeS, TauChargeCIS: p.TauChargeCIS, TauDischargeS: p.TauDischargeS,
		TauDischargeCIS: p.TauDischargeCIS, TauHoldS: p.TauHoldS, LoadRatio: p.LoadRatio, LoadRatioReason: p.LoadRatioReason,
		Kind: p.Kind, NoiseRMSCounts: p.NoiseRMSCounts, TauChargeSReason: p.TauChargeSReason}
}

// dwell commands sp (or asks for it in guided mode), waits for the reading to arrive and
// holds about 5 tau from the command.
func (r *runner) dwell(ctx context.Context, pass string, sp int) error {
	s, T := r.s, r.b.PeriodS
	r.step++
	v := r.b.volts(float64(sp))
	left := ""
	if r.tauEst > 0 {
		rest := float64(r.of-r.step+1) * 5 * r.tauEst * T
		left = "; about " + si.Format(rest, "s") + " of board time left"
	}
	r.progress("step %d of %d: %s, setpoint %s (%d counts)%s", r.step, r.of, pass, si.Format(v, "V"), sp, left)
	tol := 0.0
	wait := r.o.TakeTimeout
	if r.guided {
		tol = math.Max(1, 0.005*r.b.fullScale())
		wait = r.o.GuidedWait
		r.progress("guided: dial in %s (sp=%d counts) and leave it there; waiting up to %v", si.Format(v, "V"), sp, wait)
	} else if err := r.send(fmt.Sprintf("set sp=%d", sp)); err != nil {
		return err
	}
	// Only a data line received after the command counts: the lines queued before it
	// still show the old setpoint, or, when it did not change, say nothing new.
	sentAt := time.Now()
	x0, moved0 := s.last.PV, s.spMoved
	took := func() bool { return !s.lastHost.Before(sentAt) && math.Abs(s.last.SP-float64(sp)) <= tol }
	to, err := s.pump(ctx, wait, took)
	if err != nil {
		return err
	}
	if to && !r.guided && r.o.Guided {
		// The board ignored set sp: go on guided, from this step.
		r.guided, r.res.Guided = true, true
		tol, wait = math.Max(1, 0.005*r.b.fullScale()), r.o.GuidedWait
		r.progress("the board did not take set sp=%d within %v: guided mode from here on", sp, r.o.TakeTimeout)
		r.progress("guided: dial in %s (sp=%d counts) and leave it there; waiting up to %v", si.Format(v, "V"), sp, wait)
		sentAt = time.Now()
		if to, err = s.pump(ctx, wait, took); err != nil {
			return err
		}
	}
	if to {
		if r.guided {
			return fmt.Errorf("%w: %s was not dialled in within %v", ErrUnreachable, si.Format(v, "V"), wait)
		}
		return fmt.Errorf("%w: it did not take `set sp=%d` within %v (its data lines kept sp=%g); run again with --guided to dial the setpoints in by hand",
			ErrNeedsGuide, sp, wait, s.last.SP)
	}
	// The step started at the first line with the new setpoint, which may have come
	// a few lines before the one that confirmed it (lines arrive in chunks).
	kStart := s.k - 1
	if s.spMoved > moved0 {
		kStart, x0 = s.spMoved-1, s.pvBefore
	}
	band := 0.0
	if m := s.meta(); m.Deadband > 0 {
		band = m.Deadband
	}
	arrTol := band + math.Max(2, 0.01*r.b.fullScale())
	maxK := int64(math.Max(200, 10/T))
	arrived := func() bool { return math.Abs(s.last.PV-s.last.SP) <= arrTol || s.k-kStart >= maxK }
	if _, err := s.pump(ctx, 0, arrived); err != nil {
		return err
	}
	log := StepLog{Pass: pass, SetpointC: sp, SetpointV: v}
	arrK := s.k - kStart
	if math.Abs(s.last.PV-s.last.SP) <= arrTol {
		a := float64(arrK) * T
		log.ArrivedS = &a
	} else {
		log.Note = "not reached within " + si.Format(float64(maxK)*T, "s")
	}
	if r.tauEst == 0 {
		r.tauEst = r.estimateTau(float64(arrK), x0, s.last.SP)
	}
	need := int64(math.Ceil(5 * r.tauEst))
	need = max(need, arrK+20, 40)
	need = min(need, maxK)
	if _, err := s.pump(ctx, 0, func() bool { return s.k-kStart >= need }); err != nil {
		return err
	}
	log.DwellS = float64(s.k-kStart) * T
	r.res.Steps = append(r.res.Steps, log)
	if r.guided {
		r.progress("guided: hold done")
	}
	return nil
}

// estimateTau is tau in samples from the identify fit so far, or, before the fit has
// one, from the samples the reading took to go from x0 to sp: an exponential towards
// the supply (charge) or ground (discharge).
func (r *runner) estimateTau(arrival, x0, sp float64) float64 {
	sum := r.ident.Summary()
	p := &sum.Plant
	t := 0.0
	for _, v := range []*float64{p.TauChargeS, p.TauDischargeS} {
		if v != nil && *v/r.b.PeriodS > t {
			t = *v / r.b.PeriodS // identifiable (its interval within 10 %)
		}
	}
	if t > 0 {
		return t
	}
	top := r.b.fullScale() + 1
	if r.b.SupplyV != nil {
		top = r.b.counts(*r.b.SupplyV)
	}
	var ratio float64
	if sp > x0 {
		ratio = (top - x0) / (top - sp)
	} else {
		ratio = x0 / sp
	}
	if l := math.Log(ratio); l > 0.05 && sp > 0 && top > sp {
		return math.Max(arrival/l, 4)
	}
	return math.Max(arrival, 4)
}

// restore puts the board's settings back after the first set: at once when the board
// is there; after the re-plug when it was unplugged; or says it could not.
func (r *runner) restore(cause error) {
	s := r.s
	s.guard.on = false
	s.accs = nil
	line := r.p.Restore
	if !r.sent || line == "" {
		r.res.Restored = true
		r.res.RestoreNote = "nothing to restore: tune sent no set"
		return
	}
	ctx := context.Background()
	if errors.Is(cause, ErrUnplugged) || s.unplugged {
		r.progress("the board was unplugged; plug it in again within %v to have its settings restored", r.o.ReplugWait)
		to, err := s.pump(ctx, r.o.ReplugWait, func() bool { return s.connected && s.k > 0 && s.haveLast })
		if to || err != nil {
			r.res.RestoreNote = fmt.Sprintf("could not restore: the board did not come back within %v; check its settings (%s)", r.o.ReplugWait, line)
			return
		}
	}
	if err := s.send(line); err != nil {
		r.res.RestoreNote = "could not restore: " + err.Error()
		return
	}
	if !r.b.can("sp") {
		r.res.Restored = true
		r.res.RestoreNote = "restored: " + line
		return
	}
	k0 := s.k
	want := float64(r.b.SetpointCounts)
	to, err := s.pump(ctx, 2*time.Second, func() bool { return s.k > k0 && s.last.SP == want })
	if to || err != nil {
		r.res.RestoreNote = "sent " + line + " but the board's data lines did not show the setpoint back within 2 s"
		return
	}
	r.res.Restored = true
	r.res.RestoreNote = "restored: " + line
}
