package main

import (
	"fmt"
	"io"
	"math"
	"strings"
	"text/tabwriter"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/si"
)

// textRows is the most segments and steps the text lists (JSON lists them all).
const textRows = 40

// noFigure is printed where a figure does not apply.
const noFigure = "-"

func fv(p *float64, unit string) string {
	if p == nil {
		return noFigure
	}
	return si.FormatDigits(*p, unit, 3)
}

// fvc shows volts when known, else counts, else noFigure.
func fvc(v, counts *float64) string {
	switch {
	case v != nil:
		return si.FormatDigits(*v, "V", 3)
	case counts != nil:
		return fmt.Sprintf("%.4g counts", *counts)
	}
	return noFigure
}

// tolText is the settling tolerance of a step, +-volts (else counts).
func tolText(st analysis.StepFigures) string {
	if st.SettleTolV == nil && st.SettleTolCounts == nil {
		return noFigure
	}
	return "±" + fvc(st.SettleTolV, st.SettleTolCounts)
}

// fss shows seconds when known, else samples, else noFigure.
func fss(sec, samples *float64) string {
	switch {
	case sec != nil:
		return si.FormatDigits(*sec, "s", 3)
	case samples != nil:
		return fmt.Sprintf("%.3g samples", *samples)
	}
	return noFigure
}

func ff(p *float64, format string) string {
	if p == nil {
		return noFigure
	}
	return fmt.Sprintf(format, *p)
}

func fci(p *[2]float64, unit string) string {
	if p == nil {
		return ""
	}
	return fmt.Sprintf("[%s .. %s]", si.FormatDigits(p[0], unit, 3), si.FormatDigits(p[1], unit, 3))
}

// writeFileText writes the human-readable summary of one file, then its advice and gates.
func writeFileText(w io.Writer, r *fileResult) {
	writeSummaryText(w, r.sum)
	if r.adv != nil {
		fmt.Fprintln(w, "\nadvice")
		var b strings.Builder
		if err := r.adv.WriteText(&b); err == nil {
			for _, line := range strings.Split(strings.TrimRight(b.String(), "\n"), "\n") {
				if line == "" {
					fmt.Fprintln(w)
					continue
				}
				fmt.Fprintln(w, "  "+line)
			}
		}
	} else if r.advErr != nil {
		fmt.Fprintf(w, "\nadvice: none (%s)\n", telemetry.Sanitize([]byte(r.advErr.Error())))
	}
	if len(r.gates) > 0 {
		fmt.Fprintln(w, "\ngates")
		tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
		for _, g := range r.gates {
			fmt.Fprintf(tw, "  %s\t%s\t%s\t%s\n", strings.ToUpper(g.Status), g.Gate, g.Scope, g.Message)
		}
		tw.Flush()
	}
}

// writeSummaryText writes the figures of s: header, plant, segments, steps, diagnostics.
func writeSummaryText(w io.Writer, s *analysis.Summary) {
	fmt.Fprintf(w, "%s\n", telemetry.Sanitize([]byte(s.Source)))
	per := "unknown"
	if s.SamplePeriodS != nil {
		per = fmt.Sprintf("%s (from %s)", si.FormatDigits(*s.SamplePeriodS, "s", 4), s.PeriodFrom)
	}
	fmt.Fprintf(w, "  %d samples, %d rejected lines, %s, sample period %s, jitter %s, %d missing samples\n",
		s.Samples, s.RejectedLines, si.FormatDigits(s.DurationS, "s", 4), per, fv(s.JitterS, "s"), s.Gaps)
	b := s.Board
	var parts []string
	if b.VrefV != nil {
		parts = append(parts, "vref "+fv(b.VrefV, "V"))
	}
	if b.ADCBits != nil {
		parts = append(parts, fmt.Sprintf("%d bits", *b.ADCBits))
	}
	parts = append(parts, b.Mode)
	if b.DeadbandCounts != nil {
		parts = append(parts, fmt.Sprintf("deadband ±%g counts", *b.DeadbandCounts))
	}
	if b.SupplyV != nil {
		parts = append(parts, "supply "+fv(b.SupplyV, "V"))
	}
	if b.ROhm != nil {
		parts = append(parts, "R "+fv(b.ROhm, "Ω"))
	}
	if b.CF != nil {
		parts = append(parts, "C "+fv(b.CF, "F"))
	}
	if b.LoadOhm != nil {
		parts = append(parts, "load "+fv(b.LoadOhm, "Ω"))
	}
	fmt.Fprintf(w, "  board says: %s\n", strings.Join(parts, ", "))
	if s.InferredDrive {
		fmt.Fprintln(w, "  drive u: not on the data lines, inferred from the controller rule")
	}

	p := s.Plant
	fmt.Fprintln(w, "\nplant (identified from the data)")
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "  tau charge\t%s\t%s\t%d pairs\n", fss(p.TauChargeS, p.TauChargeSamples), fci(p.TauChargeCIS, "s"), p.ChargePairs)
	fmt.Fprintf(tw, "  tau discharge\t%s\t%s\t%d pairs\n", fss(p.TauDischargeS, p.TauDischargeSamples), fci(p.TauDischargeCIS, "s"), p.DischargePairs)
	fmt.Fprintf(tw, "  tau hold\t%s\t%s\t%d pairs\n", fss(p.TauHoldS, p.TauHoldSamples), fci(p.TauHoldCIS, "s"), p.HoldPairs)
	fmt.Fprintf(tw, "  v_high\t%s\t%s\t\n", fvc(p.VHighV, p.VHighCounts), fci(p.VHighCIV, "V"))
	fmt.Fprintf(tw, "  v_low\t%s\t%s\t\n", fvc(p.VLowV, p.VLowCounts), fci(p.VLowCIV, "V"))
	fmt.Fprintf(tw, "  ADC noise\t%s counts rms\t\t\n", ff(p.NoiseRMSCounts, "%.2f"))
	if p.EffectiveROhm != nil {
		fmt.Fprintf(tw, "  effective R\t%s\t(from tau, C and the load)\t\n", fv(p.EffectiveROhm, "Ω"))
	}
	if p.EffectiveCF != nil {
		fmt.Fprintf(tw, "  effective C\t%s\t(from tau, R and the load)\t\n", fv(p.EffectiveCF, "F"))
	}
	if p.LoadOhm != nil {
		fmt.Fprintf(tw, "  load\t%s\t\t\n", fv(p.LoadOhm, "Ω"))
	}
	if p.SenseDropV != nil {
		fmt.Fprintf(tw, "  sense drop\t%s\t\t\n", fv(p.SenseDropV, "V"))
	}
	tw.Flush()
	if len(p.MissingCodes) > 0 {
		fmt.Fprintf(w, "  missing codes: %s\n", intList(p.MissingCodes))
	}
	if len(p.StuckCodes) > 0 {
		fmt.Fprintf(w, "  stuck codes: %s\n", intList(p.StuckCodes))
	}

	// The tracking figures whenever the setpoint moved in small steps; the short
	// segments it made fold into one line when they are most of the capture.
	tracking := mostlyTracking(s)
	if s.Tracking != nil {
		writeTrackingText(w, s.Tracking, s.Samples)
	}

	fmt.Fprintf(w, "\nsegments (figures over the steady part)\n")
	others := len(s.Segments)
	if tracking {
		for _, g := range s.Segments {
			if g.Tracking {
				others--
			}
		}
		fmt.Fprintf(w, "  the moving setpoint made %d short segments of a few samples each, too short for segment figures (see tracking above; --json lists them, bounded)\n",
			s.Tracking.Segments)
	}
	tw = tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	if others > 0 {
		fmt.Fprintln(tw, "  #\tsetpoint\tfrom\tto\tsteady\tmean err\tripple p-p\tnode p-p\trobust\trms\tcharge\thold\tdisch\tcycle\tswitch\tin\tout\tjumps\t")
	}
	listed := 0
	for i, g := range s.Segments {
		if tracking && g.Tracking {
			continue
		}
		if listed == textRows && len(s.Segments)-i > 5 {
			tw.Flush()
			fmt.Fprintf(w, "  ... %d more segments (the setpoint changes often; --json lists them all)\n", len(s.Segments)-i)
			break
		}
		listed++
		sp := fmtCountsV(g.SetpointCounts, g.SetpointV)
		if g.Unreachable {
			sp += " !"
		}
		cycle := fss(g.LimitCyclePeriodS, g.LimitCyclePeriodSamples)
		if g.Rests {
			cycle = "rests"
		}
		fmt.Fprintf(tw, "  %d\t%s\t%s\t%s\t%d\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%d\t%d\t%d\t\n", i+1, sp,
			si.FormatDigits(g.StartS, "s", 4), si.FormatDigits(g.EndS, "s", 4), g.SteadySamples,
			fvc(g.MeanErrorV, g.MeanErrorCounts), fvc(g.RipplePPV, g.RipplePPCounts), fvc(g.RippleNodePPV, g.RippleNodePPCounts),
			fv(g.RippleRobustPPV, "V"), fvc(g.RippleRMSV, g.RippleRMSCounts),
			ff(g.DutyCharge, "%.3f"), ff(g.DutyHold, "%.3f"), ff(g.DutyDischarge, "%.3f"),
			cycle, fv(g.SwitchingHz, "Hz"), g.DeadbandEntries, g.DeadbandExits, g.BandJumps)
	}
	tw.Flush()
	if s.SegmentsOmitted > 0 {
		fmt.Fprintf(w, "  (%d more segments past the bounded list of %d; the plant, tracking and diagnostics still cover them)\n",
			s.SegmentsOmitted, len(s.Segments))
	}
	for i, g := range s.Segments {
		if g.Unreachable {
			fmt.Fprintf(w, "  ! segment %d: the setpoint was not reachable; the level sat at %s, %s short\n", i+1, fv(g.LevelV, "V"), fv(g.ShortfallV, "V"))
		}
	}
	for i, g := range s.Segments {
		if g.Rests && g.HoldDroopVPerS != nil {
			fmt.Fprintf(w, "  segment %d rests (the drive never switched in its steady part); hold droop %s\n", i+1, fv(g.HoldDroopVPerS, "V/s"))
		}
	}

	if len(s.Steps) > 0 && tracking {
		fmt.Fprintf(w, "\nsteps\n  %d setpoint changes, nearly all the small moves of the moving setpoint (--json lists them)\n", len(s.Steps)+int(s.StepsOmitted))
	} else if len(s.Steps) > 0 {
		fmt.Fprintln(w, "\nsteps")
		tw = tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
		fmt.Fprintln(tw, "  #\tat\tfrom\tto\trise 10-90 %\tsettle\twithin\tovershoot\tslew\t")
		for i, st := range s.Steps {
			if i == textRows && len(s.Steps) > textRows+5 {
				tw.Flush()
				fmt.Fprintf(w, "  ... %d more steps (--json lists them all)\n", len(s.Steps)-textRows)
				break
			}
			fmt.Fprintf(tw, "  %d\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t\n", i+1, si.FormatDigits(st.AtS, "s", 4),
				fmtCountsV(st.FromCounts, st.FromV), fmtCountsV(st.ToCounts, st.ToV),
				fv(st.RiseS, "s"), fv(st.SettleS, "s"), tolText(st), fv(st.OvershootV, "V"), fv(st.SlewVPerS, "V/s"))
		}
		tw.Flush()
	}

	fmt.Fprintln(w, "\ndiagnostics")
	if len(s.Diagnostics) == 0 {
		fmt.Fprintln(w, "  none")
	}
	for _, d := range s.Diagnostics {
		fmt.Fprintf(w, "  %-7s %s\n", d.Severity, d.Message)
	}
}

func intList(v []int) string {
	var b strings.Builder
	for i, x := range v {
		if i > 0 {
			b.WriteString(", ")
		}
		if i == 16 {
			fmt.Fprintf(&b, "... (%d in all)", len(v))
			break
		}
		fmt.Fprint(&b, x)
	}
	return b.String()
}

// fileRow is the one-line digest of a file for the comparison table: the worst segment
// and step figures and the plant.
type fileRow struct {
	tau, vHigh, noise, ripple, robust, err, settle, cycle float64
	jumps, samples, rejected                              int64
	fails                                                 int
}

func rowOf(r *fileResult) fileRow {
	nan := math.NaN()
	row := fileRow{tau: nan, vHigh: nan, noise: nan, ripple: nan, robust: nan, err: nan, settle: nan, cycle: nan}
	s := r.sum
	row.samples, row.rejected = s.Samples, s.RejectedLines
	get := func(p *float64) float64 {
		if p == nil {
			return nan
		}
		return *p
	}
	worst := func(cur, v float64) float64 {
		if math.IsNaN(cur) || v > cur {
			return v
		}
		return cur
	}
	row.tau, row.vHigh, row.noise = get(s.Plant.TauChargeS), get(s.Plant.VHighV), get(s.Plant.NoiseRMSCounts)
	for _, g := range s.Segments {
		if g.RipplePPV != nil {
			row.ripple = worst(row.ripple, *g.RipplePPV)
		}
		if g.RippleRobustPPV != nil {
			row.robust = worst(row.robust, *g.RippleRobustPPV)
		}
		if g.MeanErrorV != nil {
			row.err = worst(row.err, math.Abs(*g.MeanErrorV))
		}
		if g.LimitCyclePeriodS != nil {
			row.cycle = worst(row.cycle, *g.LimitCyclePeriodS)
		}
		row.jumps += g.BandJumps
	}
	for _, st := range s.Steps {
		if st.SettleS != nil {
			row.settle = worst(row.settle, *st.SettleS)
		}
	}
	for _, g := range r.gates {
		if g.Status == gateFail {
			row.fails++
		}
	}
	return row
}

func fnum(v float64, unit string) string {
	if math.IsNaN(v) {
		return noFigure
	}
	return si.FormatDigits(v, unit, 3)
}

// writeComparison writes one row per file (worst segment and step figures) and a
// comparison of every later file with the first (before and after tuning).
func writeComparison(w io.Writer, results []*fileResult) {
	fmt.Fprintln(w, "files (worst segment and step)")
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "  file\tsamples\trejected\ttau charge\tv_high\tnoise\tripple p-p\trobust\t|mean err|\tsettle\tcycle\tjumps\tgates failed\t")
	rows := make([]fileRow, len(results))
	for i, r := range results {
		name := telemetry.SanitizeN([]byte(r.name), 40)
		if r.err != nil {
			fmt.Fprintf(tw, "  %s\tunusable\t\t\t\t\t\t\t\t\t\t\t\t\n", name)
			continue
		}
		row := rowOf(r)
		rows[i] = row
		fmt.Fprintf(tw, "  %s\t%d\t%d\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%d\t%d\t\n", name, row.samples, row.rejected,
			fnum(row.tau, "s"), fnum(row.vHigh, "V"), ff(nanPtr(row.noise), "%.2f"), fnum(row.ripple, "V"), fnum(row.robust, "V"),
			fnum(row.err, "V"), fnum(row.settle, "s"), fnum(row.cycle, "s"), row.jumps, row.fails)
	}
	tw.Flush()
	if len(results) < 2 || results[0].err != nil {
		return
	}
	base := rows[0]
	fmt.Fprintf(w, "\ncompared with %s (change, and in %% of the first)\n", telemetry.SanitizeN([]byte(results[0].name), 40))
	tw = tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "  file\tripple p-p\trobust\t|mean err|\tsettle\tcycle\tjumps\t")
	for i := 1; i < len(results); i++ {
		if results[i].err != nil {
			continue
		}
		r := rows[i]
		fmt.Fprintf(tw, "  %s\t%s\t%s\t%s\t%s\t%s\t%+d\t\n", telemetry.SanitizeN([]byte(results[i].name), 40),
			change(base.ripple, r.ripple, "V"), change(base.robust, r.robust, "V"), change(base.err, r.err, "V"),
			change(base.settle, r.settle, "s"), change(base.cycle, r.cycle, "s"), r.jumps-base.jumps)
	}
	tw.Flush()
}

func nanPtr(v float64) *float64 {
	if math.IsNaN(v) {
		return nil
	}
	return &v
}

// change shows after - before with its sign and the relative change.
func change(before, after float64, unit string) string {
	if math.IsNaN(before) || math.IsNaN(after) {
		return noFigure
	}
	d := after - before
	sign := "+"
	if d < 0 {
		sign = "-"
	}
	s := sign + si.FormatDigits(math.Abs(d), unit, 3)
	if before != 0 {
		s += fmt.Sprintf(" (%+.0f %%)", 100*d/before)
	}
	return s
}

// mostlyTracking says most samples of s were taken while the setpoint moved (see
// analysis.Tracking): the text then shows the tracking figures and folds the short
// segments into one line.
func mostlyTracking(s *analysis.Summary) bool {
	return s.Tracking != nil && 2*s.Tracking.Samples > s.Samples
}

// writeTrackingText writes the tracking block: how well the reading followed the
// moving setpoint.
func writeTrackingText(w io.Writer, t *analysis.Tracking, total int64) {
	fmt.Fprintf(w, "\ntracking (the setpoint moved in small steps: %d of %d samples", t.Samples, total)
	if t.DurationS != nil {
		fmt.Fprintf(w, ", %s", si.FormatDigits(*t.DurationS, "s", 4))
	}
	fmt.Fprintln(w, ")")
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "  setpoint range\t%s .. %s\t\n", fmtCountsV(t.SPMinCounts, t.SPMinV), fmtCountsV(t.SPMaxCounts, t.SPMaxV))
	fmt.Fprintf(tw, "  mean error\t%s\t\n", fvc(t.MeanErrorV, t.MeanErrorCounts))
	fmt.Fprintf(tw, "  rms error\t%s\t\n", fvc(t.RMSErrorV, t.RMSErrorCounts))
	fmt.Fprintf(tw, "  max |error|\t%s\t\n", fvc(t.MaxAbsErrorV, t.MaxAbsCounts))
	fmt.Fprintf(tw, "  lag (pv behind sp)\t%s\t\n", fss(t.LagS, t.LagSamples))
	fmt.Fprintf(tw, "  duty charge/hold/discharge\t%s / %s / %s\t\n", ff(t.DutyCharge, "%.3f"), ff(t.DutyHold, "%.3f"), ff(t.DutyDischarge, "%.3f"))
	fmt.Fprintf(tw, "  band jumps\t%d\t\n", t.BandJumps)
	tw.Flush()
}
