package analysis

import (
	"fmt"
	"math"
	"strings"

	"github.com/caploop/caploop/analysis/figure"
	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/si"
)

// Diagnostic codes.
const (
	DiagUnreachable     = "unreachable_setpoint"
	DiagBandTooNarrow   = "band_too_narrow"
	DiagNoiseChatter    = "noise_chatter"
	DiagDroopTooFast    = "droop_too_fast"
	DiagDroppedSamples  = "dropped_samples"
	DiagJitter          = "jitter"
	DiagRailSaturation  = "rail_saturation"
	DiagPeriodBelowADC  = "period_below_conversion"
	DiagRejectedLines   = "rejected_lines"
	DiagDroppedValues   = "dropped_values"
	DiagNoIdentify      = "plant_not_identified"
	DiagInferredDrive   = "inferred_drive"
	DiagMissingCodes    = "missing_codes"
	DiagStuckCodes      = "stuck_codes"
	DiagSenseDrop       = "sense_drop"
	DiagLoad            = "load"
	DiagPlantMismatch   = "plant_mismatch"
	DiagNoPeriod        = "no_sample_period"
	DiagNotSettled      = "not_settled"
	DiagSegmentsOmitted = "segments_omitted"
)

// volts formats counts as volts when the scale is known, else as counts.
func (c conv) fmtV(counts float64) string {
	if math.IsNaN(c.lsb) {
		return fmt.Sprintf("%.1f counts", counts)
	}
	return si.Format(c.v(counts), "V")
}

func fmtS(s float64) string { return figure.Value(s, "s") }

// diagnose writes the findings as plain sentences with the numbers behind them.
func (a *Accumulator) diagnose(sum *Summary, figs []segFig, pf plantFit, c conv) []Diagnostic {
	d := []Diagnostic{}
	add := func(code, sev, format string, args ...any) {
		d = append(d, Diagnostic{Code: code, Severity: sev, Message: fmt.Sprintf(format, args...)})
	}
	if sum.RejectedLines > 0 {
		msg := figure.Count(sum.RejectedLines, "line") + " could not be read and " + figure.Pick(sum.RejectedLines, "was", "were") + " skipped"
		if len(sum.FirstRejects) > 0 {
			msg += "; the first: " + sum.FirstRejects[0].Reason
		}
		add(DiagRejectedLines, "warning", "%s.", msg)
	}
	if sum.DroppedValues > 0 {
		msg := fmt.Sprintf("%d values were dropped from lines that were otherwise read", sum.DroppedValues)
		if len(sum.FirstDrops) > 0 {
			msg += "; the first: " + sum.FirstDrops[0].Reason
		}
		add(DiagDroppedValues, "warning", "%s.", msg)
	}
	if sum.SamplePeriodS == nil && a.n > 1 {
		add(DiagNoPeriod, "warning", "The sample period is unknown (no t on the data lines, no period_us meta line, no host times): times and time constants cannot be given.")
	}
	if a.inferred {
		add(DiagInferredDrive, "info", "The data lines carry no drive u: it was inferred from the %s rule with a deadband of %s.", modeName(a.three), figure.Count(a.db, "count"))
	}
	// Segments with the same setpoint and band (a repeating profile) share one sentence each.
	type group struct {
		sp, db, lastPV                   float64
		segs                             []int
		jumps, noiseExits, exits, endRun int64
		unreachable, unsettled, up       bool
		droopChecked                     bool
		meanE                            float64 // lowest steady mean error, counts
		trk                              bool    // every segment opened by a tracking move
	}
	var groups []*group
	bySP := map[[2]float64]*group{}
	for i := range figs {
		f := &figs[i]
		key := [2]float64{f.sp, f.db}
		g := bySP[key]
		if g == nil {
			g = &group{sp: f.sp, db: f.db, meanE: math.Inf(1), trk: true}
			bySP[key] = g
			groups = append(groups, g)
		}
		g.segs = append(g.segs, i+1)
		g.trk = g.trk && f.trk
		g.jumps += f.jumps
		g.noiseExits += f.noiseExits
		g.exits += f.exits
		if sum.Segments[i].Unreachable {
			g.unreachable, g.lastPV, g.endRun, g.up = true, f.lastPV, f.endRun, f.lastPV < f.sp
		} else if !f.settled && i < len(figs)-1 && f.n >= 16 {
			g.unsettled, g.lastPV = true, f.lastPV
		}
		if f.settled {
			g.droopChecked = true
			if !math.IsNaN(f.meanE) && f.meanE < g.meanE {
				g.meanE = f.meanE
			}
		}
	}
	where := func(g *group) string {
		return fmt.Sprintf("Setpoint %s (%s)", c.fmtV(g.sp), segList(g.segs))
	}
	// Per setpoint sentences: at most perCode of each code, then one sentence for the rest
	// (a ramp or a sine setpoint makes hundreds of setpoints).
	const perCode = 3
	seen := map[string]int{}
	more := map[string]int{}
	var order []string
	addG := func(code, sev, format string, args ...any) {
		seen[code]++
		if seen[code] > perCode {
			if more[code] == 0 {
				order = append(order, code+"\x00"+sev)
			}
			more[code]++
			return
		}
		add(code, sev, format, args...)
	}
	// Setpoints passed while the setpoint moved (tracking) share one sentence per code.
	var fold trackFold
	for _, g := range groups {
		if g.trk {
			fold.add(a, g.sp, g.db, g.unreachable, g.unsettled, g.jumps, g.noiseExits, g.exits, g.droopChecked, g.meanE, pf)
			continue
		}
		if g.unreachable {
			what, lim, dd := "v_high", "charge", 2
			if !g.up {
				what, lim, dd = "v_low", "discharge", 0
			}
			if pf.ok[dd] && !math.IsNaN(pf.fit[dd].VInf) {
				addG(DiagUnreachable, "error", "%s: beyond the %s asymptote %s = %s, the loop stays at %s. Lower the load or the buffer drop, or move the setpoint.",
					where(g), lim, what, c.fmtV(pf.fit[dd].VInf), c.fmtV(g.lastPV))
			} else {
				addG(DiagUnreachable, "error", "%s: never reached; the reading stopped at %s after %s of %s.",
					where(g), c.fmtV(g.lastPV), figure.Count(g.endRun, "sample"), lim)
			}
		} else if g.unsettled {
			addG(DiagNotSettled, "warning", "%s: the reading did not reach the setpoint within the segment (last reading %s).",
				where(g), c.fmtV(g.lastPV))
		}
		if g.jumps > 0 {
			step := a.stepNear(g.sp, pf)
			band := 2*g.db + 1
			bandText := fmt.Sprintf("a deadband of ±%s (%s wide)", figure.Count(g.db, "count"), figure.Count(band, "count"))
			if g.db == 0 {
				bandText = "no deadband in force (none reported, so a band of one count)"
			}
			msg := fmt.Sprintf("%s: %s (a charge followed directly by a discharge or the reverse) with %s",
				where(g), figure.Count(g.jumps, "band jump"), bandText)
			if !math.IsNaN(step) {
				msg += fmt.Sprintf("; one charge step near the setpoint is about %.1f counts", step)
				noise := 0.0
				if sum.Plant.NoiseRMSCounts != nil {
					noise = *sum.Plant.NoiseRMSCounts
				}
				need := math.Floor((step+3*noise-1)/2) + 1
				if need > g.db {
					msg += fmt.Sprintf(", so the band needs a deadband of at least %g counts (step plus 3 sigma of noise)", need)
				}
			}
			addG(DiagBandTooNarrow, "warning", "%s.", msg)
		}
		if g.noiseExits > 2 && float64(g.noiseExits) > 0.1*float64(g.exits) {
			noise := "unknown"
			if sum.Plant.NoiseRMSCounts != nil {
				noise = fmt.Sprintf("%.2f counts rms", *sum.Plant.NoiseRMSCounts)
			}
			addG(DiagNoiseChatter, "warning", "%s: %d of %s went upward out of hold, which the droop cannot do: ADC noise (%s) chatters against the ±%g count band; widen it or filter the reading.",
				where(g), g.noiseExits, figure.Count(g.exits, "deadband exit"), noise, g.db)
		}
		if g.db > 0 && pf.ok[1] && g.droopChecked {
			hf := pf.fit[1]
			droop := (1 - hf.A) * (g.sp - hf.VInf)
			band := 2*g.db + 1
			if droop > 0 && (5*droop > band || g.meanE < -g.db) {
				msg := fmt.Sprintf("%s: in hold the level droops about %.1f counts per sample, so it crosses the %g-count band in %.1f samples",
					where(g), droop, band, band/droop)
				if g.meanE < -g.db {
					msg += fmt.Sprintf(", and on average it sits %.1f counts below the setpoint, under the band", -g.meanE)
				}
				addG(DiagDroopTooFast, "warning", "%s: the charges barely keep up. Reduce the load, shorten the sample period or widen the band.", msg)
			}
		}
	}
	for _, k := range order {
		code, sev, _ := strings.Cut(k, "\x00")
		add(code, sev, "The same (%s) at %s.", strings.ReplaceAll(code, "_", " "), figure.Count(more[code], "more setpoint"))
	}
	fold.write(add, sum, c)
	if sum.Gaps > 0 && a.n > 0 {
		add(DiagDroppedSamples, "warning", "%s %s missing (%.2f %% of %d): the link dropped lines or the board skipped periods.",
			figure.Count(sum.Gaps, "sample"), figure.Pick(sum.Gaps, "is", "are"), 100*float64(sum.Gaps)/float64(sum.Gaps+a.n), sum.Gaps+a.n)
	}
	if sum.JitterS != nil && sum.SamplePeriodS != nil && *sum.JitterS > 0.05**sum.SamplePeriodS {
		add(DiagJitter, "warning", "The sample period jitters by %s rms (%.1f %% of %s): the firmware's timing is uneven, which adds ripple.",
			fmtS(*sum.JitterS), 100**sum.JitterS/(*sum.SamplePeriodS), fmtS(*sum.SamplePeriodS))
	}
	if r := a.railLo + a.railHi; r > 0 && float64(r) > 0.001*float64(a.n) {
		add(DiagRailSaturation, "warning", "%s (%.1f %%) %s at an ADC rail (%d at 0, %d at full scale): the level was clipped, and the fit left them out.",
			figure.Count(r, "reading"), 100*float64(r)/float64(a.n), figure.Pick(r, "sits", "sit"), a.railLo, a.railHi)
	}
	if sum.SamplePeriodS != nil && *sum.SamplePeriodS < a.opts.ConversionS {
		add(DiagPeriodBelowADC, "error", "The sample period %s is below the ADC conversion time of about %s (a 10-bit successive-approximation ADC at a 125 kHz ADC clock): the readings cannot be fresh.",
			fmtS(*sum.SamplePeriodS), fmtS(a.opts.ConversionS))
	}
	if a.n > 100 && !pf.ok[2] && !pf.ok[0] {
		add(DiagNoIdentify, "info", "No time constant could be identified: there is no run of charge or discharge far enough from the setpoint (one step plus %.0f counts of noise margin). A setpoint step in the capture gives one.", a.guard)
	}
	a.diagnosePlant(sum.Plant, add)
	if n := len(sum.Plant.MissingCodes); n > 0 {
		add(DiagMissingCodes, "warning", "%d ADC codes never occur although the reading swept across them (first: %d): the converter has missing codes.", n, sum.Plant.MissingCodes[0])
	}
	if n := len(sum.Plant.StuckCodes); n > 0 {
		add(DiagStuckCodes, "warning", "%d ADC codes occur far more often than their neighbours away from any setpoint (first: %d): the converter may stick there.", n, sum.Plant.StuckCodes[0])
	}
	if sum.SegmentsOmitted > 0 {
		add(DiagSegmentsOmitted, "info", "%s past the first %d %s not kept in the segment list (it is bounded); the plant, tracking and these diagnostics still cover %s.", figure.Count(sum.SegmentsOmitted, "segment"), len(sum.Segments), figure.Pick(sum.SegmentsOmitted, "is", "are"), figure.Pick(sum.SegmentsOmitted, "it", "them"))
	}
	return d
}

func modeName(three bool) string {
	if three {
		return telemetry.ThreeState.String()
	}
	return telemetry.TwoState.String()
}

// stepNear returns the size of one charge step at a setpoint, in counts:
// (1 - a) (v_high - sp), NaN without a charge fit.
func (a *Accumulator) stepNear(sp float64, pf plantFit) float64 {
	if !pf.ok[2] {
		return math.NaN()
	}
	f := pf.fit[2]
	return (1 - f.A) * (f.VInf - sp)
}

// segList writes segment numbers as "segment 3" or "segments 1, 4, 7".
func segList(v []int) string {
	if len(v) == 1 {
		return fmt.Sprintf("segment %d", v[0])
	}
	return "segments " + figure.List(v)
}

// trackFold gathers the per-setpoint findings of the setpoints passed while the setpoint
// moved (see Tracking): a ramp or a sine passes hundreds of them, each in a short
// segment, and the same finding at each says one thing.
type trackFold struct {
	unreachable, unsettled int     // setpoints
	jumpSPs                int     // setpoints with band jumps
	jumps                  int64   // band jumps at them
	db                     float64 // the widest band among them, counts
	maxStep                float64 // the largest charge step near them, counts (NaN: unknown)
	chatterSPs             int
	noiseExits, exits      int64
	droopSPs               int
	maxDroop               float64    // counts per sample
	lo, hi                 [5]float64 // setpoint range of each finding (unreachable, unsettled, jumps, chatter, droop)
}

// note widens the setpoint range of finding i.
func (f *trackFold) note(i int, n int, sp float64) {
	if n == 1 || sp < f.lo[i] {
		f.lo[i] = sp
	}
	if n == 1 || sp > f.hi[i] {
		f.hi[i] = sp
	}
}

// add folds in the findings of one setpoint (the same tests as the per-setpoint sentences).
func (f *trackFold) add(a *Accumulator, sp, db float64, unreachable, unsettled bool, jumps, noiseExits, exits int64,
	droopChecked bool, meanE float64, pf plantFit) {
	if unreachable {
		f.unreachable++
		f.note(0, f.unreachable, sp)
	} else if unsettled {
		f.unsettled++
		f.note(1, f.unsettled, sp)
	}
	if jumps > 0 {
		f.jumpSPs++
		f.note(2, f.jumpSPs, sp)
		f.jumps += jumps
		f.db = math.Max(f.db, db)
		if step := a.stepNear(sp, pf); f.jumpSPs == 1 || math.IsNaN(f.maxStep) || step > f.maxStep {
			f.maxStep = step
		}
	}
	if noiseExits > 2 && float64(noiseExits) > 0.1*float64(exits) {
		f.chatterSPs++
		f.note(3, f.chatterSPs, sp)
		f.noiseExits += noiseExits
		f.exits += exits
		f.db = math.Max(f.db, db)
	}
	if db > 0 && pf.ok[1] && droopChecked {
		hf := pf.fit[1]
		droop := (1 - hf.A) * (sp - hf.VInf)
		if droop > 0 && (5*droop > 2*db+1 || meanE < -db) {
			f.droopSPs++
			f.note(4, f.droopSPs, sp)
			f.maxDroop = math.Max(f.maxDroop, droop)
		}
	}
}

// write adds one sentence per finding.
func (f *trackFold) write(add func(code, sev, format string, args ...any), sum *Summary, c conv) {
	span := func(i int) string {
		if f.lo[i] == f.hi[i] {
			return c.fmtV(f.lo[i])
		}
		return c.fmtV(f.lo[i]) + " to " + c.fmtV(f.hi[i])
	}
	const while = "While the setpoint moved (tracking)"
	if f.unreachable > 0 {
		add(DiagUnreachable, "error", "%s, %s (%s) %s beyond what the loop can reach.", while, figure.Count(f.unreachable, "setpoint"), span(0), figure.Pick(f.unreachable, "was", "were"))
	}
	if f.unsettled > 0 {
		msg := fmt.Sprintf("%s, the reading did not reach %s (%s) before the next one came", while, figure.Count(f.unsettled, "setpoint"), span(1))
		if t := sum.Tracking; t != nil && t.RMSErrorCounts != nil {
			msg += fmt.Sprintf("; it trailed by %s rms", c.fmtV(*t.RMSErrorCounts))
			if t.LagSamples != nil {
				if t.LagS != nil {
					msg += fmt.Sprintf(", a lag of %s", fmtS(*t.LagS))
				} else {
					msg += fmt.Sprintf(", a lag of %.1f samples", *t.LagSamples)
				}
			}
		}
		add(DiagNotSettled, "info", "%s.", msg)
	}
	if f.jumpSPs > 0 {
		msg := fmt.Sprintf("%s, %s (a charge followed directly by a discharge or the reverse) at %s (%s) with a deadband of ±%s",
			while, figure.Count(f.jumps, "band jump"), figure.Count(f.jumpSPs, "setpoint"), span(2), figure.Count(f.db, "count"))
		if !math.IsNaN(f.maxStep) {
			msg += fmt.Sprintf("; one charge step there is up to %.1f counts", f.maxStep)
			noise := 0.0
			if sum.Plant.NoiseRMSCounts != nil {
				noise = *sum.Plant.NoiseRMSCounts
			}
			if need := math.Floor((f.maxStep+3*noise-1)/2) + 1; need > f.db {
				msg += fmt.Sprintf(", so the band needs a deadband of at least %g counts (step plus 3 sigma of noise)", need)
			}
		}
		add(DiagBandTooNarrow, "warning", "%s.", msg)
	}
	if f.chatterSPs > 0 {
		noise := "unknown"
		if sum.Plant.NoiseRMSCounts != nil {
			noise = fmt.Sprintf("%.2f counts rms", *sum.Plant.NoiseRMSCounts)
		}
		add(DiagNoiseChatter, "warning", "%s, %d of %s at %s (%s) went upward out of hold, which the droop cannot do: ADC noise (%s) chatters against the ±%g count band; widen it or filter the reading.",
			while, f.noiseExits, figure.Count(f.exits, "deadband exit"), figure.Count(f.chatterSPs, "setpoint"), span(3), noise, f.db)
	}
	if f.droopSPs > 0 {
		add(DiagDroopTooFast, "warning", "%s, at %s (%s) the level droops in hold by up to %.1f counts per sample, fast against the band: the charges barely keep up. Reduce the load, shorten the sample period or widen the band.",
			while, figure.Count(f.droopSPs, "setpoint"), span(4), f.maxDroop)
	}
}
