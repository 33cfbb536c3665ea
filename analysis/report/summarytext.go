package report

import (
	"fmt"
	"io"
	"math"
	"strings"
	"text/tabwriter"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/figure"
	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/si"
)

// textRows is the most segments and steps the text lists (JSON lists them all).
const textRows = 40

// tolText is the settling tolerance of a step, +-volts (else counts).
func tolText(st analysis.StepFigures) string {
	if st.SettleTolV == nil && st.SettleTolCounts == nil {
		return figure.Missing
	}
	return "±" + figure.VoltsOrCounts(st.SettleTolV, st.SettleTolCounts)
}

// WriteFileText writes the human-readable summary of one file, then its advice and gates.
func WriteFileText(w io.Writer, r *FileResult) {
	WriteSummaryText(w, r.Summary)
	if r.Advice != nil {
		fmt.Fprintln(w, "\nadvice")
		var b strings.Builder
		if err := r.Advice.WriteText(&b); err == nil {
			for _, line := range strings.Split(strings.TrimRight(b.String(), "\n"), "\n") {
				if line == "" {
					fmt.Fprintln(w)
					continue
				}
				fmt.Fprintln(w, "  "+line)
			}
		}
	} else if r.AdviceErr != nil {
		fmt.Fprintf(w, "\nadvice: none (%s)\n", telemetry.Sanitize([]byte(r.AdviceErr.Error())))
	}
	if len(r.Gates) > 0 {
		fmt.Fprintln(w, "\ngates")
		tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
		for _, g := range r.Gates {
			fmt.Fprintf(tw, "  %s\t%s\t%s\t%s\n", strings.ToUpper(g.Status), g.Gate, g.Scope, g.Message)
		}
		tw.Flush()
	}
}

// WriteSummaryText writes the figures of s: header, plant, segments, steps, diagnostics.
func WriteSummaryText(w io.Writer, s *analysis.Summary) {
	fmt.Fprintf(w, "%s\n", telemetry.Sanitize([]byte(s.Source)))
	per := "unknown"
	if s.SamplePeriodS != nil {
		per = fmt.Sprintf("%s (from %s)", si.FormatDigits(*s.SamplePeriodS, "s", 4), s.PeriodFrom)
	}
	fmt.Fprintf(w, "  %d samples, %d rejected lines, %s, sample period %s, jitter %s, %d missing samples\n",
		s.Samples, s.RejectedLines, si.FormatDigits(s.DurationS, "s", 4), per, figure.SI(s.JitterS, "s"), s.Gaps)
	b := s.Board
	var parts []string
	if b.VrefV != nil {
		parts = append(parts, "vref "+figure.SI(b.VrefV, "V"))
	}
	if b.ADCBits != nil {
		parts = append(parts, fmt.Sprintf("%d bits", *b.ADCBits))
	}
	parts = append(parts, b.Mode)
	if b.DeadbandCounts != nil {
		parts = append(parts, fmt.Sprintf("deadband ±%g counts", *b.DeadbandCounts))
	}
	if b.SupplyV != nil {
		parts = append(parts, "supply "+figure.SI(b.SupplyV, "V"))
	}
	if b.ROhm != nil {
		parts = append(parts, "R "+figure.SI(b.ROhm, "Ω"))
	}
	if b.CF != nil {
		parts = append(parts, "C "+figure.SI(b.CF, "F"))
	}
	if b.LoadOhm != nil {
		parts = append(parts, "load "+figure.SI(b.LoadOhm, "Ω"))
	}
	fmt.Fprintf(w, "  board says: %s\n", strings.Join(parts, ", "))
	if s.InferredDrive {
		fmt.Fprintln(w, "  drive u: not on the data lines, inferred from the controller rule")
	}

	p := s.Plant
	fmt.Fprintln(w, "\nplant (identified from the data)")
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "  tau charge\t%s\t%s\t%d pairs\n", figure.SecondsOrSamples(p.TauChargeS, p.TauChargeSamples), orWhy(interval(p.TauChargeCIS, "s"), p.TauChargeSReason), p.ChargePairs)
	fmt.Fprintf(tw, "  tau discharge\t%s\t%s\t%d pairs\n", figure.SecondsOrSamples(p.TauDischargeS, p.TauDischargeSamples), orWhy(interval(p.TauDischargeCIS, "s"), p.TauDischargeSReason), p.DischargePairs)
	fmt.Fprintf(tw, "  tau hold\t%s\t%s\t%d pairs\n", figure.SecondsOrSamples(p.TauHoldS, p.TauHoldSamples), orWhy(interval(p.TauHoldCIS, "s"), p.TauHoldSReason), p.HoldPairs)
	fmt.Fprintf(tw, "  v_high\t%s\t%s\t\n", figure.VoltsOrCounts(p.VHighV, p.VHighCounts), orWhy(interval(p.VHighCIV, "V"), p.VHighVReason))
	fmt.Fprintf(tw, "  v_low\t%s\t%s\t\n", figure.VoltsOrCounts(p.VLowV, p.VLowCounts), orWhy(interval(p.VLowCIV, "V"), p.VLowVReason))
	fmt.Fprintf(tw, "  ADC noise\t%s counts rms\t\t\n", figure.NumP(p.NoiseRMSCounts))
	if p.EffectiveROhm != nil {
		fmt.Fprintf(tw, "  effective R\t%s\t(from tau, C and the load)\t\n", figure.SI(p.EffectiveROhm, "Ω"))
	}
	if p.EffectiveCF != nil {
		fmt.Fprintf(tw, "  effective C\t%s\t(from tau, R and the load)\t\n", figure.SI(p.EffectiveCF, "F"))
	}
	kind := "-"
	if p.Kind != nil {
		kind = *p.Kind
	}
	fmt.Fprintf(tw, "  load or buffer\t%s\t%s\t\n", kind, orWhy("", p.KindReason))
	from := map[string]string{"hold_droop": "(from the hold droop)", "v_high": "(from v_high and the supply)", "v_low": "(from v_low below ground)"}
	fmt.Fprintf(tw, "  load\t%s\t%s\t%s\n", figure.SI(p.LoadOhm, "Ω"), orWhy(interval(p.LoadOhmCI, "Ω"), p.LoadOhmReason), from[p.LoadFrom])
	if p.LoadRatio != nil {
		fmt.Fprintf(tw, "  load / R\t%.3g\t[%.3g .. %.3g]\t\n", *p.LoadRatio, (*p.LoadRatioCI)[0], (*p.LoadRatioCI)[1])
	}
	fmt.Fprintf(tw, "  sense drop\t%s\t%s\t%s\n", figure.SI(p.SenseDropV, "V"), orWhy(interval(p.SenseDropCIV, "V"), p.SenseDropVReason), from[p.SenseDropFrom])
	tw.Flush()
	if len(p.MissingCodes) > 0 {
		fmt.Fprintf(w, "  missing codes: %s\n", figure.List(p.MissingCodes))
	}
	if len(p.StuckCodes) > 0 {
		fmt.Fprintf(w, "  stuck codes: %s\n", figure.List(p.StuckCodes))
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
		sp := levelText(g.SetpointV, g.SetpointCounts)
		if g.Unreachable {
			sp += " !"
		}
		cycle := figure.SecondsOrSamples(g.LimitCyclePeriodS, g.LimitCyclePeriodSamples)
		if g.Rests {
			cycle = "rests"
		}
		fmt.Fprintf(tw, "  %d\t%s\t%s\t%s\t%d\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%d\t%d\t%d\t\n", i+1, sp,
			si.FormatDigits(g.StartS, "s", 4), si.FormatDigits(g.EndS, "s", 4), g.SteadySamples,
			figure.VoltsOrCounts(g.MeanErrorV, g.MeanErrorCounts), figure.VoltsOrCounts(g.RipplePPV, g.RipplePPCounts), figure.VoltsOrCounts(g.RippleNodePPV, g.RippleNodePPCounts),
			figure.SI(g.RippleRobustPPV, "V"), figure.VoltsOrCounts(g.RippleRMSV, g.RippleRMSCounts),
			figure.Pct(g.DutyCharge), figure.Pct(g.DutyHold), figure.Pct(g.DutyDischarge),
			cycle, figure.SI(g.SwitchingHz, "Hz"), g.DeadbandEntries, g.DeadbandExits, g.BandJumps)
	}
	tw.Flush()
	if s.SegmentsOmitted > 0 {
		fmt.Fprintf(w, "  (%d more segments past the bounded list of %d; the plant, tracking and diagnostics still cover them)\n",
			s.SegmentsOmitted, len(s.Segments))
	}
	for i, g := range s.Segments {
		if g.Unreachable {
			rest := ""
			if d := restDrive(g); d != "" && d != "hold" {
				how := "did not cycle"
				if g.SwitchingHz != nil && *g.SwitchingHz == 0 {
					how = "never switched"
				}
				rest = "; the loop rests in " + d + " (the drive " + how + " in its steady part)"
			}
			fmt.Fprintf(w, "  ! segment %d: the setpoint was not reachable; the level sat at %s, %s short%s\n", i+1, figure.SI(g.LevelV, "V"), figure.SI(g.ShortfallV, "V"), rest)
		}
	}
	for i, g := range s.Segments {
		if g.Rests && g.HoldDroopVPerS != nil {
			fmt.Fprintf(w, "  segment %d rests (the drive never switched in its steady part); hold droop %s\n", i+1, figure.SI(g.HoldDroopVPerS, "V/s"))
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
				levelText(st.FromV, st.FromCounts), levelText(st.ToV, st.ToCounts),
				figure.SI(st.RiseS, "s"), figure.SI(st.SettleS, "s"), tolText(st), figure.SI(st.OvershootV, "V"), figure.SI(st.SlewVPerS, "V/s"))
		}
		tw.Flush()
	}

	writeEventsText(w, s)

	fmt.Fprintln(w, "\ndiagnostics")
	if len(s.Diagnostics) == 0 {
		fmt.Fprintln(w, "  none")
	}
	for _, d := range s.Diagnostics {
		fmt.Fprintf(w, "  %-7s %s\n", d.Severity, telemetry.Sanitize([]byte(d.Message)))
	}
}

// fileRow is the one-line digest of a file for the comparison table: the worst segment
// and step figures and the plant.
type fileRow struct {
	tau, vHigh, noise, ripple, robust, err, settle, cycle float64
	jumps, samples, rejected                              int64
	fails                                                 int
}

func rowOf(r *FileResult) fileRow {
	nan := math.NaN()
	row := fileRow{tau: nan, vHigh: nan, noise: nan, ripple: nan, robust: nan, err: nan, settle: nan, cycle: nan}
	s := r.Summary
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
	for _, g := range r.Gates {
		if g.Status == GateFail {
			row.fails++
		}
	}
	return row
}

// WriteComparison writes one row per file (worst segment and step figures) and a
// comparison of every later file with the first (before and after tuning).
func WriteComparison(w io.Writer, results []*FileResult) {
	fmt.Fprintln(w, "files (worst segment and step)")
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "  file\tsamples\trejected\ttau charge\tv_high\tnoise\tripple p-p\trobust\t|mean err|\tsettle\tcycle\tjumps\tgates failed\t")
	rows := make([]fileRow, len(results))
	for i, r := range results {
		name := telemetry.SanitizeN([]byte(r.Name), 40)
		if r.Err != nil {
			fmt.Fprintf(tw, "  %s\tunusable\t\t\t\t\t\t\t\t\t\t\t\t\n", name)
			continue
		}
		row := rowOf(r)
		rows[i] = row
		fmt.Fprintf(tw, "  %s\t%d\t%d\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%d\t%d\t\n", name, row.samples, row.rejected,
			figure.Value(row.tau, "s"), figure.Value(row.vHigh, "V"), figure.Value(row.noise, ""), figure.Value(row.ripple, "V"), figure.Value(row.robust, "V"),
			figure.Value(row.err, "V"), figure.Value(row.settle, "s"), figure.Value(row.cycle, "s"), row.jumps, row.fails)
	}
	tw.Flush()
	writeFailures(w, results)
	if len(results) < 2 || results[0].Err != nil {
		return
	}
	base := rows[0]
	fmt.Fprintf(w, "\ncompared with %s (change, and in %% of the first)\n", telemetry.SanitizeN([]byte(results[0].Name), 40))
	tw = tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "  file\tripple p-p\trobust\t|mean err|\tsettle\tcycle\tjumps\t")
	for i := 1; i < len(results); i++ {
		if results[i].Err != nil {
			continue
		}
		r := rows[i]
		fmt.Fprintf(tw, "  %s\t%s\t%s\t%s\t%s\t%s\t%+d\t\n", telemetry.SanitizeN([]byte(results[i].Name), 40),
			figure.Change(base.ripple, r.ripple, "V"), figure.Change(base.robust, r.robust, "V"), figure.Change(base.err, r.err, "V"),
			figure.Change(base.settle, r.settle, "s"), figure.Change(base.cycle, r.cycle, "s"), r.jumps-base.jumps)
	}
	tw.Flush()
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
	fmt.Fprintf(tw, "  setpoint range\t%s .. %s\t\n", levelText(t.SPMinV, t.SPMinCounts), levelText(t.SPMaxV, t.SPMaxCounts))
	fmt.Fprintf(tw, "  mean error\t%s\t\n", figure.VoltsOrCounts(t.MeanErrorV, t.MeanErrorCounts))
	fmt.Fprintf(tw, "  rms error\t%s\t\n", figure.VoltsOrCounts(t.RMSErrorV, t.RMSErrorCounts))
	fmt.Fprintf(tw, "  max |error|\t%s\t\n", figure.VoltsOrCounts(t.MaxAbsErrorV, t.MaxAbsCounts))
	fmt.Fprintf(tw, "  lag (pv behind sp)\t%s\t\n", figure.SecondsOrSamples(t.LagS, t.LagSamples))
	fmt.Fprintf(tw, "  duty charge/hold/discharge\t%s / %s / %s\t\n", figure.Pct(t.DutyCharge), figure.Pct(t.DutyHold), figure.Pct(t.DutyDischarge))
	fmt.Fprintf(tw, "  band jumps\t%d\t\n", t.BandJumps)
	tw.Flush()
}

// orWhy returns the interval text, or the reason when the figure is null.
// interval is a confidence interval in the text: nothing when there is none.
func interval(p *[2]float64, unit string) string {
	if p == nil {
		return ""
	}
	return figure.Interval(p, unit)
}

func orWhy(interval, reason string) string {
	if reason != "" {
		return reason
	}
	return interval
}

// writeEventsText writes the events, glitches and suspect lines, when there are any.
func writeEventsText(w io.Writer, s *analysis.Summary) {
	if len(s.Events) > 0 {
		fmt.Fprintln(w, "\nevents (each but a note starts a new segment)")
		tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
		for _, e := range s.Events {
			at := "-"
			if e.AtS != nil {
				at = si.FormatDigits(*e.AtS, "s", 4)
			}
			fmt.Fprintf(tw, "  %s\tline %d\t%s\t%s\n", at, e.Line, e.Kind, telemetry.SanitizeN([]byte(e.Text), 200))
		}
		tw.Flush()
		if s.EventsOmitted > 0 {
			fmt.Fprintf(w, "  ... %d more events (the list is bounded)\n", s.EventsOmitted)
		}
	}
	lines := func(l analysis.LineList) string {
		var b strings.Builder
		for i, n := range l.Lines {
			if i > 0 {
				b.WriteString(", ")
			}
			fmt.Fprint(&b, n)
		}
		if l.Count > int64(len(l.Lines)) {
			b.WriteString(", ...")
		}
		return b.String()
	}
	if g := s.Glitches; g.Count > 0 {
		fmt.Fprintf(w, "\nglitches: %d readings the plant cannot reach in one period, left out of the level figures (lines %s)\n", g.Count, lines(g))
	}
	if l := s.SuspectLines; l.Count > 0 {
		fmt.Fprintf(w, "\nsuspect lines: %d data lines lack a field the other lines carry (lines %s)\n", l.Count, lines(l))
	}
}

// writeFailures names every failing gate with its file, under the comparison table.
func writeFailures(w io.Writer, results []*FileResult) {
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	head := false
	for _, r := range results {
		for _, g := range r.Failed() {
			if !head {
				fmt.Fprintln(w, "\nfailed gates")
				head = true
			}
			fmt.Fprintf(tw, "  %s\t%s\t%s\t%s\n", telemetry.SanitizeN([]byte(r.Name), 60), g.Gate, g.Scope, g.Message)
		}
	}
	tw.Flush()
}

// restDrive names the drive a resting segment rests in (the one with the largest duty
// over its steady part), "" when it does not rest or the duties are null.
func restDrive(g analysis.Segment) string {
	if !g.Rests || g.DutyCharge == nil || g.DutyHold == nil || g.DutyDischarge == nil {
		return ""
	}
	switch {
	case *g.DutyCharge >= *g.DutyHold && *g.DutyCharge >= *g.DutyDischarge:
		return "charge"
	case *g.DutyDischarge > *g.DutyHold:
		return "discharge"
	}
	return "hold"
}
