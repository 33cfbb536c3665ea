package advice

import (
	"fmt"
	"io"
	"math"
	"strings"
	"text/tabwriter"

	"github.com/caploop/caploop/analysis/figure"
	"github.com/caploop/caploop/telemetry/si"
)

// WriteText writes the advice as plain text for a terminal: the goals, the deadband with
// its arithmetic, the ranked R and C table, the sample period, any change of circuit,
// the cautions and the notes. Every string in it was made by caploop (no device text).
func (a *Advice) WriteText(w io.Writer) error {
	var b strings.Builder
	g := a.Goals
	for _, pb := range a.Problems {
		fmt.Fprintf(&b, "FIRST: %s\n\n", pb)
	}
	if g != nil {
		fmt.Fprintf(&b, "goals: ripple <= %s p-p, settling <= %s for a full-scale step (%d -> %d counts and back, to within %s)",
			fmtV(g.RipplePPV), si.Format(g.SettleS, "s"), g.StepFromCounts, g.StepToCounts, fmtV(g.SettleTolV))
		if g.StaticErrorV > 0 {
			fmt.Fprintf(&b, ", static error <= %s", fmtV(g.StaticErrorV))
		}
		fmt.Fprintf(&b, ", pin current <= %s\n", fmtA(g.PinCurrentA))
		load := "no load"
		if g.LoadOhm > 0 {
			load = "load " + si.Format(g.LoadOhm, "Ω")
		}
		fmt.Fprintf(&b, "board: %s, supply %s, vref %s, %d bits, period %s, %s; R from %s, C from %s\n",
			g.Mode, fmtV(g.SupplyV), fmtV(g.VrefV), g.ADCBits, si.Format(g.PeriodS, "s"), load, g.RParts, g.CParts)
	}
	if a.Plant != nil {
		fmt.Fprintf(&b, "plant assumed: %s (%s)\n", a.Plant.Text, a.Plant.Source)
	}
	if a.Tolerances != nil {
		fmt.Fprintf(&b, "tolerances: %s\n", a.Tolerances.Text)
	}
	if a.Current != nil {
		c := a.Current
		band := ""
		if g != nil && g.Mode == "three-state" {
			band = fmt.Sprintf(" at band %d", c.DeadbandCounts)
		}
		fmt.Fprintf(&b, "\npresent circuit%s (model with the identified plant): R %s, C %s (effective %s), tau %s: ripple %s p-p, settling %s, %s, %s\n",
			band, si.Format(c.ROhm, "Ω"), si.Format(c.CF, "F"), si.FormatDigits(c.EffectiveCF, "F", 3), si.FormatDigits(c.TauS, "s", 3),
			fmtV(c.PredictedRipplePPV), settleText(c), figure.Count(c.BandJumps, "band jump"), c.Verdict)
	}
	if a.DeadbandCounts != nil && a.DeadbandWorking != nil && g != nil {
		b.WriteString("\n")
		writeBand(&b, *a.DeadbandCounts, a.DeadbandWorking, g)
	}
	b.WriteString("\nR and C, best first (figures from the loop model):\n")
	if len(a.Candidates) == 0 {
		b.WriteString("  no pair on hand comes near the goals\n")
	} else {
		tw := tabwriter.NewWriter(&b, 0, 0, 2, ' ', 0)
		three := g == nil || g.Mode == "three-state"
		band := "band\t"
		if !three {
			band = ""
		}
		fmt.Fprintf(tw, "  #\tR\tC\ttau\t%snode p-p\tADC p-p\tgate\tsettling\tpin I\tV_inf sag\tverdict\n", band)
		for i, c := range a.Candidates {
			band = fmt.Sprintf("%d\t", c.DeadbandCounts)
			if !three {
				band = ""
			}
			fmt.Fprintf(tw, "  %d\t%s\t%s\t%s\t%s%s\t%s\t%s\t%s\t%s\t%s\t%s\n", i+1,
				si.Format(c.ROhm, "Ω"), si.Format(c.CF, "F"), si.FormatDigits(c.TauS, "s", 3), band,
				fmtV(c.PredictedRipplePPV), fmtV(c.ReadRipplePPV), c.SuggestedGate, settleText(&c), fmtA(c.PinCurrentA), fmtV(c.VInfSagV), c.Verdict)
		}
		tw.Flush()
		for i, c := range a.Candidates {
			if c.Tolerance != nil {
				fmt.Fprintf(&b, "  %d over the spread of parts: %s\n", i+1, c.Tolerance.Text)
			}
		}
		for i, c := range a.Candidates {
			fmt.Fprintf(&b, "  %d trades: %s\n", i+1, c.Trades)
		}
		if g != nil && len(a.Candidates) > 0 {
			c := a.Candidates[0]
			fmt.Fprintf(&b, "  ADC p-p is the ripple as the board will read it (max - min over the last half of the steady part of a hold of the settling time plus %d samples, %.2f counts rms noise); gate suggestion for the top pair: --max-ripple %s\n",
				c.ReadWindowSamples, g.NoiseRMSCounts, c.SuggestedGate)
		}
	}
	if p := a.SamplePeriod; p != nil {
		fmt.Fprintf(&b, "\nsample period: %s now, suggested %s (floor %s): %s\n",
			si.Format(p.CurrentS, "s"), si.Format(p.SuggestedS, "s"), si.Format(p.FloorS, "s"), p.Reason)
	}
	if len(a.Topology) > 0 {
		b.WriteString("\nno pair meets the goals as built; changes of circuit (loop model figures):\n")
		for _, t := range a.Topology {
			m := "still misses"
			if t.Meets {
				m = "meets goals"
			}
			fmt.Fprintf(&b, "  - %s: ripple %s p-p, settling %s, %s. %s\n", t.Change,
				fmtV(t.PredictedRipplePPV), si.Format(t.PredictedSettleS, "s"), m, t.Reason)
		}
	}
	if len(a.Cautions) > 0 {
		b.WriteString("\ncautions:\n")
		for _, c := range a.Cautions {
			fmt.Fprintf(&b, "  - %s\n", c)
		}
	}
	if len(a.Notes) > 0 {
		b.WriteString("\nnotes:\n")
		for _, n := range a.Notes {
			fmt.Fprintf(&b, "  - %s\n", n)
		}
	}
	_, err := io.WriteString(w, b.String())
	return err
}

func settleText(c *Candidate) string {
	if !c.Settled && strings.Contains(c.Verdict, "ripple") && !strings.Contains(c.Verdict, "slow") {
		return "never (ripple)"
	}
	if !c.Settled {
		return "> " + si.FormatDigits(c.PredictedSettleS, "s", 3)
	}
	return si.FormatDigits(c.PredictedSettleS, "s", 3)
}

// writeBand shows the deadband arithmetic.
func writeBand(b *strings.Builder, db int, w *DeadbandWorking, g *GoalsUsed) {
	fmt.Fprintf(b, "deadband: %s (hold while |pv - sp| <= %d)\n", figure.Count(db, "count"), db)
	for _, s := range w.Steps {
		mark := ""
		if s.NarrowerJumps != "" {
			when := "on arrival"
			if s.Recurring {
				when = "again and again as the hold droops"
			}
			mark = fmt.Sprintf("  <- a band of %d is jumped here (%s, %s)", db-1, s.NarrowerJumps, when)
		}
		fmt.Fprintf(b, "  sp %4d: charge step %.2f, discharge step %.2f counts%s\n",
			s.SetpointCounts, s.ChargeCounts, s.DischargeCounts, mark)
	}
	fmt.Fprintf(b, "  rule: one step must not jump the band, step + %g sigma < 2 db + 1\n", w.SigmaMultiple)
	fmt.Fprintf(b, "  largest step %.2f + noise margin %g x %.2f counts rms = %.2f < 2 x %d + 1 = %d\n",
		w.StepCounts, w.SigmaMultiple, w.NoiseRMSCounts, w.StepCounts+w.MarginCounts, db, 2*db+1)
	fmt.Fprintf(b, "  cost: static error up to %s = %s\n", figure.Count(db, "count"), fmtV(w.StaticErrorV))
	if w.FromVoltageBand != nil {
		fs := math.Ldexp(1, g.ADCBits) - 1
		rb := *w.FromVoltageBand
		fmt.Fprintf(b, "  trade rule: a %s band is %s x %.0f / %s = %.2f -> %d counts", fmtV(g.RipplePPV),
			fmtV(g.RipplePPV), fs, fmtV(g.VrefV), g.RipplePPV*fs/g.VrefV, rb)
		switch {
		case db < rb:
			fmt.Fprintf(b, "; the band above (%d) is narrower: it is the smallest band one step plus noise cannot jump, so the level rests within %s rather than anywhere in the %s budget\n",
				db, fmtV(w.StaticErrorV), fmtV(g.RipplePPV))
		case db > rb:
			fmt.Fprintf(b, "; the band above (%d) is wider: one step of these parts plus noise would jump the rule's band, so the static error (%s) exceeds the ripple budget; a larger R*C or a shorter period narrows it\n",
				db, fmtV(w.StaticErrorV))
		default:
			b.WriteString("; the same as the band above\n")
		}
	}
	fmt.Fprintf(b, "  model check: %s at %d", figure.Count(w.VerifiedJumps, "band jump"), db)
	if db >= 1 {
		fmt.Fprintf(b, ", %d at %d", w.NarrowerJumps, w.NarrowerDB)
	}
	b.WriteString("\n")
}
