package advice

import (
	"fmt"
	"io"
	"math"
	"strings"
	"text/tabwriter"

	"github.com/caploop/caploop/internal/words"
	"github.com/caploop/caploop/telemetry/si"
)

// WriteText writes the advice as plain text for a terminal: the goals, the deadband with
// its arithmetic, the ranked R and C table, the sample period, any change of circuit,
// the cautions and the notes. Every string in it was made by caploop (no device text).
func (a *Advice) WriteText(w io.Writer) error {
	var b strings.Builder
	g := a.Goals
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
	if a.Current != nil {
		c := a.Current
		band := ""
		if g != nil && g.Mode == "three-state" {
			band = fmt.Sprintf(" at band %d", c.DeadbandCounts)
		}
		fmt.Fprintf(&b, "\npresent circuit%s (model with the identified plant): R %s, C %s (effective %s), tau %s: ripple %s p-p, settling %s, %s, %s\n",
			band, si.Format(c.ROhm, "Ω"), si.Format(c.CF, "F"), si.FormatDigits(c.EffectiveCF, "F", 3), si.FormatDigits(c.TauS, "s", 3),
			fmtV(c.PredictedRipplePPV), settleText(c), words.Count(c.BandJumps, "band jump"), c.Verdict)
	}
	if a.DeadbandCounts != nil && a.Deadband != nil && g != nil {
		b.WriteString("\n")
		writeBand(&b, *a.DeadbandCounts, a.Deadband, g)
	}
	b.WriteString("\nR and C, best first (figures from the loop model):\n")
	if len(a.Candidates) == 0 {
		b.WriteString("  no pair on hand comes near the goals\n")
	} else {
		tw := tabwriter.NewWriter(&b, 0, 0, 2, ' ', 0)
		fmt.Fprintln(tw, "  #\tR\tC\ttau\tband\tripple p-p\tsettling\tpin I\tV_inf sag\tverdict")
		for i, c := range a.Candidates {
			fmt.Fprintf(tw, "  %d\t%s\t%s\t%s\t%d\t%s\t%s\t%s\t%s\t%s\n", i+1,
				si.Format(c.ROhm, "Ω"), si.Format(c.CF, "F"), si.FormatDigits(c.TauS, "s", 3), c.DeadbandCounts,
				fmtV(c.PredictedRipplePPV), settleText(&c), fmtA(c.PinCurrentA), fmtV(c.VInfSagV), c.Verdict)
		}
		tw.Flush()
		for i, c := range a.Candidates {
			fmt.Fprintf(&b, "  %d. trades: %s\n", i+1, c.Trades)
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
	fmt.Fprintf(b, "deadband: %s (hold while |pv - sp| <= %d)\n", words.Count(db, "count"), db)
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
	fmt.Fprintf(b, "  cost: static error up to %s = %s\n", words.Count(db, "count"), fmtV(w.StaticErrorV))
	if w.FromVoltageBand != nil {
		fs := math.Ldexp(1, g.ADCBits) - 1
		fmt.Fprintf(b, "  trade rule: a %s band is %s x %.0f / %s = %.2f -> %s\n",
			fmtV(g.RipplePPV), fmtV(g.RipplePPV), fs, fmtV(g.VrefV), g.RipplePPV*fs/g.VrefV, words.Count(*w.FromVoltageBand, "count"))
	}
	fmt.Fprintf(b, "  model check: %s at %d", words.Count(w.VerifiedJumps, "band jump"), db)
	if db >= 1 {
		fmt.Fprintf(b, ", %d at %d", w.NarrowerJumps, w.NarrowerDB)
	}
	b.WriteString("\n")
}
