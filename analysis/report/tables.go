package report

import (
	"fmt"
	"math"
	"strconv"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/advice"
	"github.com/caploop/caploop/analysis/figure"
	"github.com/caploop/caploop/telemetry/si"
)

// Table is one table of the report: a caption, a header row and rows of text cells. Cells
// hold plain text; the template escapes it.
type Table struct {
	ID      string // HTML id, unique in the page
	Caption string
	Head    []string
	Rows    []Row
}

// Row is one table row; Class, when set, is a CSS class ("warning", "error", "better",
// "worse") that colours the row.
type Row struct {
	Cells []string
	Class string
}

func (t *Table) add(cells ...string) { t.Rows = append(t.Rows, Row{Cells: cells}) }

// note adds a row that spans the table, for a remark such as rows left out.
func (t *Table) note(text string) { t.Rows = append(t.Rows, Row{Cells: []string{text}, Class: "note"}) }

// maxRows bounds the segment and step tables; a ramp can make thousands of segments,
// which the JSON output lists in full.
const maxRows = 40

// maxCompareSetpoints bounds the setpoint groups of the comparison table.
const maxCompareSetpoints = 12

// DocTables returns the tables of one capture, in page order: capture, board, plant,
// segments, steps, diagnostics, rejected lines and, when the doc has advice, the advice
// tables. prefix makes the table ids unique when the page holds several captures.
func DocTables(d Capture, prefix string) []Table {
	s := d.Summary
	if s == nil {
		return nil
	}
	ts := []Table{
		captureTable(s, prefix),
		boardTable(s, prefix),
		plantTable(s, prefix),
	}
	if s.Tracking != nil {
		ts = append(ts, trackingTable(s, prefix))
	}
	ts = append(ts, segmentsTable(s, prefix))
	if len(s.Steps) > 0 {
		ts = append(ts, stepsTable(s, prefix))
	}
	ts = append(ts, diagnosticsTable(s, prefix))
	if len(s.FirstRejects) > 0 || s.RejectedLines > 0 {
		ts = append(ts, rejectsTable(s, prefix))
	}
	if d.Advice != nil {
		ts = append(ts, AdviceTables(d.Advice, prefix)...)
	}
	return ts
}

func captureTable(s *analysis.Summary, prefix string) Table {
	t := Table{ID: prefix + "capture", Caption: "Capture", Head: []string{"figure", "value"}}
	t.add("source", clean(s.Source))
	t.add("samples", strconv.FormatInt(s.Samples, 10))
	t.add("rejected lines", strconv.FormatInt(s.RejectedLines, 10))
	t.add("duration", si.Format(s.DurationS, "s"))
	from := s.PeriodFrom
	if from == "" {
		from = "unknown"
	}
	t.add("sample period", figure.SI(s.SamplePeriodS, "s")+" (from "+clean(from)+")")
	t.add("jitter", figure.SI(s.JitterS, "s"))
	t.add("gaps (missing samples)", strconv.FormatInt(s.Gaps, 10))
	t.add("drive inferred from the rule", yesNo(s.InferredDrive))
	return t
}

func boardTable(s *analysis.Summary, prefix string) Table {
	b := s.Board
	t := Table{ID: prefix + "board", Caption: "Board (as its meta lines said)", Head: []string{"field", "value"}}
	t.add("ADC reference", figure.SI(b.VrefV, "V"))
	bits := figure.Missing
	if b.ADCBits != nil {
		bits = strconv.Itoa(*b.ADCBits) + " bits"
	}
	t.add("ADC resolution", bits)
	mode := b.Mode
	if mode == "" {
		mode = figure.Missing
	}
	t.add("controller", clean(mode))
	t.add("deadband (half-width)", figure.Counts(b.DeadbandCounts))
	t.add("supply", figure.SI(b.SupplyV, "V"))
	t.add("R", figure.SI(b.ROhm, "Ω"))
	t.add("C", figure.SI(b.CF, "F"))
	t.add("load", figure.SI(b.LoadOhm, "Ω"))
	return t
}

func plantTable(s *analysis.Summary, prefix string) Table {
	p := s.Plant
	t := Table{ID: prefix + "plant", Caption: "Identified circuit (95 % intervals)", Head: []string{"figure", "value", "interval"}}
	t.add("tau, charging", figure.SI(p.TauChargeS, "s"), figure.Interval(p.TauChargeCIS, "s"))
	t.add("tau, discharging", figure.SI(p.TauDischargeS, "s"), figure.Interval(p.TauDischargeCIS, "s"))
	t.add("tau, holding", figure.SI(p.TauHoldS, "s"), figure.Interval(p.TauHoldCIS, "s"))
	t.add("charge end level (V high)", figure.SI(p.VHighV, "V"), figure.Interval(p.VHighCIV, "V"))
	t.add("discharge end level (V low)", figure.SI(p.VLowV, "V"), figure.Interval(p.VLowCIV, "V"))
	t.add("ADC noise (rms)", figure.Counts(p.NoiseRMSCounts), "")
	t.add("missing codes", figure.List(p.MissingCodes), "")
	t.add("stuck codes", figure.List(p.StuckCodes), "")
	t.add("effective R (from tau and C)", figure.SI(p.EffectiveROhm, "Ω"), "")
	t.add("effective C (from tau and R)", figure.SI(p.EffectiveCF, "F"), "")
	t.add("load (from V high, supply and R)", figure.SI(p.LoadOhm, "Ω"), "")
	t.add("sense drop (supply − V high)", figure.SI(p.SenseDropV, "V"), "")
	return t
}

// setpointText is "512 counts (2.5 V)".
func setpointText(g analysis.Segment) string {
	txt := figure.CountText(figure.Num(g.SetpointCounts), "count")
	if g.SetpointV != nil && finite(*g.SetpointV) {
		txt += " (" + si.Format(*g.SetpointV, "V") + ")"
	}
	return txt
}

// ripplePP is the peak-to-peak ripple in volts when known, else in counts.
func ripplePP(g analysis.Segment) string {
	if g.RipplePPV != nil {
		return figure.SI(g.RipplePPV, "V")
	}
	return figure.Counts(g.RipplePPCounts)
}

func rippleRMS(g analysis.Segment) string {
	if g.RippleRMSV != nil {
		return figure.SI(g.RippleRMSV, "V")
	}
	return figure.Counts(g.RippleRMSCounts)
}

func meanError(g analysis.Segment) string {
	if g.MeanErrorV != nil {
		return figure.SI(g.MeanErrorV, "V")
	}
	return figure.Counts(g.MeanErrorCounts)
}

func segmentsTable(s *analysis.Summary, prefix string) Table {
	t := Table{ID: prefix + "segments", Caption: "Segments (figures over the steady part)", Head: []string{
		"#", "setpoint", "from – to", "steady samples", "mean error", "ripple p-p", "ripple rms",
		"duty charge / hold / discharge", "limit-cycle period", "switching", "deadband", "band entries / exits", "band jumps", "reachable",
	}}
	moving := mostlyTracking(s)
	if moving {
		t.note(fmt.Sprintf("the moving setpoint made %s of a few samples each, too short for segment figures: see the tracking table (caploop summary --json lists them)",
			figure.Count(s.Tracking.Segments, "short segment")))
	}
	shown := 0
	for i, g := range s.Segments {
		if moving && g.Tracking {
			continue
		}
		if shown == maxRows {
			t.note(figure.Count(len(s.Segments)-i, "more segment") + " not shown here (caploop summary --json lists them)")
			break
		}
		shown++
		span := si.Format(g.StartS, "s") + " – " + si.Format(g.EndS, "s")
		duty := figure.Pct(g.DutyCharge) + " / " + figure.Pct(g.DutyHold) + " / " + figure.Pct(g.DutyDischarge)
		r := Row{Cells: []string{
			strconv.Itoa(i + 1), setpointText(g), span, strconv.FormatInt(g.SteadySamples, 10),
			meanError(g), ripplePP(g), rippleRMS(g), duty, figure.SI(g.LimitCyclePeriodS, "s"),
			figure.SI(g.SwitchingHz, "Hz"), figure.Counts(g.DeadbandCounts),
			strconv.FormatInt(g.DeadbandEntries, 10) + " / " + strconv.FormatInt(g.DeadbandExits, 10),
			strconv.FormatInt(g.BandJumps, 10), yesNo(!g.Unreachable),
		}}
		if g.Unreachable {
			r.Class = "error"
		} else if g.BandJumps > 0 {
			r.Class = "warning"
		}
		t.Rows = append(t.Rows, r)
	}
	if len(s.Segments) == 0 {
		t.note("no segment found")
	}
	if s.SegmentsOmitted > 0 {
		t.note(figure.Count(s.SegmentsOmitted, "more segment") + " seen but not kept by the analysis (the list is bounded)")
	}
	return t
}

// mostlyTracking says most samples were taken while the setpoint moved (see
// analysis.Tracking): the segments table then leaves out the short segments it made.
func mostlyTracking(s *analysis.Summary) bool {
	return s.Tracking != nil && 2*s.Tracking.Samples > s.Samples
}

// trackingTable shows how well the reading followed the moving setpoint.
func trackingTable(s *analysis.Summary, prefix string) Table {
	tr := s.Tracking
	t := Table{ID: prefix + "tracking", Caption: "Tracking (while the setpoint moved in small steps)", Head: []string{"figure", "value"}}
	dur := ""
	if tr.DurationS != nil {
		dur = " (" + figure.SI(tr.DurationS, "s") + ")"
	}
	t.add("samples", fmt.Sprintf("%d of %d%s", tr.Samples, s.Samples, dur))
	t.add("setpoint range", levelText(tr.SPMinV, tr.SPMinCounts)+" – "+levelText(tr.SPMaxV, tr.SPMaxCounts))
	pick := func(v, counts *float64) string {
		if v != nil {
			return figure.SI(v, "V")
		}
		return figure.VoltsOrCounts(nil, counts)
	}
	t.add("mean error", pick(tr.MeanErrorV, tr.MeanErrorCounts))
	t.add("rms error", pick(tr.RMSErrorV, tr.RMSErrorCounts))
	t.add("largest error", pick(tr.MaxAbsErrorV, tr.MaxAbsCounts))
	lag := figure.SI(tr.LagS, "s")
	if tr.LagS == nil && tr.LagSamples != nil {
		lag = figure.Num(*tr.LagSamples) + " samples"
	}
	t.add("lag of the reading behind the setpoint", lag)
	t.add("duty charge / hold / discharge", figure.Pct(tr.DutyCharge)+" / "+figure.Pct(tr.DutyHold)+" / "+figure.Pct(tr.DutyDischarge))
	t.add("band jumps", strconv.FormatInt(tr.BandJumps, 10))
	t.add("short segments made by the moving setpoint", strconv.FormatInt(tr.Segments, 10))
	return t
}

func levelText(v *float64, counts float64) string {
	if v != nil && finite(*v) {
		return si.Format(*v, "V")
	}
	return figure.CountText(figure.Num(counts), "count")
}

func stepsTable(s *analysis.Summary, prefix string) Table {
	t := Table{ID: prefix + "steps", Caption: "Steps", Head: []string{"#", "at", "from", "to", "rise (10–90 %)", "settle", "overshoot", "slew"}}
	for i, st := range s.Steps {
		if i == maxRows {
			t.note(figure.Count(len(s.Steps)-i, "more step") + " not shown here (caploop summary --json lists them)")
			break
		}
		t.add(strconv.Itoa(i+1), si.Format(st.AtS, "s"), levelText(st.FromV, st.FromCounts), levelText(st.ToV, st.ToCounts),
			figure.SI(st.RiseS, "s"), figure.SI(st.SettleS, "s"), figure.SI(st.OvershootV, "V"), figure.SI(st.SlewVPerS, "V/s"))
	}
	return t
}

func diagnosticsTable(s *analysis.Summary, prefix string) Table {
	t := Table{ID: prefix + "diagnostics", Caption: "Diagnostics", Head: []string{"severity", "code", "finding"}}
	for _, d := range s.Diagnostics {
		sev := clean(d.Severity)
		r := Row{Cells: []string{sev, clean(d.Code), clean(d.Message)}}
		if d.Severity == "warning" || d.Severity == "error" {
			r.Class = d.Severity
		}
		t.Rows = append(t.Rows, r)
	}
	if len(s.Diagnostics) == 0 {
		t.add("", "", "nothing to report")
	}
	return t
}

func rejectsTable(s *analysis.Summary, prefix string) Table {
	t := Table{ID: prefix + "rejects", Caption: fmt.Sprintf("Rejected lines (%d in all, first ones shown)", s.RejectedLines), Head: []string{"line", "reason"}}
	for _, r := range s.FirstRejects {
		t.add(strconv.FormatInt(r.Line, 10), clean(r.Reason))
	}
	return t
}

// AdviceTables returns the tables of an advice block: the suggested deadband with its
// working, the R and C candidates, the sample period, circuit changes, cautions and
// notes. Empty parts are left out.
func AdviceTables(a *advice.Advice, prefix string) []Table {
	var ts []Table
	if g := a.Goals; g != nil {
		t := Table{ID: prefix + "advice-goals", Caption: "Advice: goals and assumptions", Head: []string{"goal or assumption", "value"}}
		t.add("controller", clean(g.Mode))
		t.add("supply", si.Format(g.SupplyV, "V"))
		t.add("sample period", si.Format(g.PeriodS, "s"))
		if g.LoadOhm > 0 {
			t.add("load", si.Format(g.LoadOhm, "Ω"))
		} else {
			t.add("load", "none")
		}
		t.add("ripple p-p at most", si.Format(g.RipplePPV, "V"))
		t.add("settling at most", si.Format(g.SettleS, "s"))
		if g.StaticErrorV > 0 {
			t.add("static error at most", si.Format(g.StaticErrorV, "V"))
		}
		t.add("pin current at most", si.Format(g.PinCurrentA, "A"))
		noise := figure.CountText(figure.Num(g.NoiseRMSCounts), "count") + " rms"
		if g.NoiseMeasured {
			noise += " (measured)"
		} else {
			noise += " (assumed)"
		}
		t.add("ADC noise", noise)
		t.add("noise margin", figure.Num(g.SigmaMultiple)+" σ")
		if g.CRatio > 0 && g.CRatio != 1 {
			t.add("real / marked capacitance", figure.Num(g.CRatio))
		}
		ts = append(ts, t)
	}
	if a.DeadbandCounts != nil || a.DeadbandWorking != nil {
		t := Table{ID: prefix + "advice-deadband", Caption: "Advice: deadband", Head: []string{"figure", "value"}}
		if a.DeadbandCounts != nil {
			t.add("suggested deadband (half-width)", figure.Count(*a.DeadbandCounts, "count"))
		}
		if w := a.DeadbandWorking; w != nil {
			t.add("largest step near the setpoints", figure.CountText(figure.Num(w.StepCounts), "count"))
			t.add("ADC noise (rms)", figure.CountText(figure.Num(w.NoiseRMSCounts), "count"))
			t.add("noise margin", figure.Num(w.SigmaMultiple)+" σ = "+figure.CountText(figure.Num(w.MarginCounts), "count"))
			t.add("static error it allows", si.Format(w.StaticErrorV, "V"))
			if w.FromVoltageBand != nil {
				t.add("from the ripple goal", strconv.Itoa(*w.FromVoltageBand)+" counts")
			}
			for _, st := range w.Steps {
				t.add("one period's step at "+figure.Count(st.SetpointCounts, "count"),
					"charge "+figure.Num(st.ChargeCounts)+", discharge "+figure.CountText(figure.Num(st.DischargeCounts), "count"))
			}
			t.add("rule", clean(w.Rule))
			t.add("band jumps in the checking simulation", strconv.FormatInt(w.VerifiedJumps, 10))
		}
		ts = append(ts, t)
	}
	if len(a.Candidates) > 0 || a.Current != nil {
		t := Table{ID: prefix + "advice-parts", Caption: "Advice: R and C (each checked by simulating the loop)", Head: []string{
			"", "R", "C", "series", "deadband", "ripple p-p", "settle", "pin current", "V∞ sag", "verdict", "trades"}}
		row := func(kind string, c advice.Candidate) Row {
			return Row{Cells: []string{kind, si.Format(c.ROhm, "Ω"), si.Format(c.CF, "F"), clean(c.Series), figure.Count(c.DeadbandCounts, "count"),
				si.Format(c.PredictedRipplePPV, "V"), si.Format(c.PredictedSettleS, "s"), si.Format(c.PinCurrentA, "A"),
				si.Format(c.VInfSagV, "V"), clean(c.Verdict), clean(c.Trades)}}
		}
		if a.Current != nil {
			r := row("present parts", *a.Current)
			r.Class = "current"
			t.Rows = append(t.Rows, r)
		}
		for i, c := range a.Candidates {
			r := row("#"+strconv.Itoa(i+1), c)
			if c.MeetsGoals && len(c.RulesBroken) == 0 {
				r.Class = "better"
			}
			t.Rows = append(t.Rows, r)
		}
		ts = append(ts, t)
	}
	if p := a.SamplePeriod; p != nil {
		t := Table{ID: prefix + "advice-period", Caption: "Advice: sample period", Head: []string{"current", "suggested", "floor (ADC conversion)", "reason"}}
		t.add(si.Format(p.CurrentS, "s"), si.Format(p.SuggestedS, "s"), si.Format(p.FloorS, "s"), clean(p.Reason))
		ts = append(ts, t)
	}
	if len(a.Topology) > 0 {
		t := Table{ID: prefix + "advice-topology", Caption: "Advice: circuit changes", Head: []string{"change", "ripple p-p", "settle", "reason"}}
		for _, c := range a.Topology {
			t.add(clean(c.Change), si.Format(c.PredictedRipplePPV, "V"), si.Format(c.PredictedSettleS, "s"), clean(c.Reason))
		}
		ts = append(ts, t)
	}
	if len(a.Cautions) > 0 || len(a.Notes) > 0 {
		t := Table{ID: prefix + "advice-notes", Caption: "Advice: cautions and notes", Head: []string{"kind", "text"}}
		for _, c := range a.Cautions {
			t.Rows = append(t.Rows, Row{Cells: []string{"caution", clean(c)}, Class: "warning"})
		}
		for _, n := range a.Notes {
			t.add("note", clean(n))
		}
		ts = append(ts, t)
	}
	return ts
}

// compareRow is one row of the comparison table: how to read it from a summary.
type compareRow struct {
	label string
	unit  string // SI unit for si.Format; "" for plain numbers, "%" for fractions
	get   func(s *analysis.Summary) *float64
}

func i64(v int64) *float64 { f := float64(v); return &f }

var captureFigures = []compareRow{
	{"samples", "", func(s *analysis.Summary) *float64 { return i64(s.Samples) }},
	{"rejected lines", "", func(s *analysis.Summary) *float64 { return i64(s.RejectedLines) }},
	{"duration", "s", func(s *analysis.Summary) *float64 { return &s.DurationS }},
	{"sample period", "s", func(s *analysis.Summary) *float64 { return s.SamplePeriodS }},
	{"deadband (meta)", "counts", func(s *analysis.Summary) *float64 { return s.Board.DeadbandCounts }},
	{"R (meta)", "Ω", func(s *analysis.Summary) *float64 { return s.Board.ROhm }},
	{"C (meta)", "F", func(s *analysis.Summary) *float64 { return s.Board.CF }},
	{"tau, charging", "s", func(s *analysis.Summary) *float64 { return s.Plant.TauChargeS }},
	{"tau, discharging", "s", func(s *analysis.Summary) *float64 { return s.Plant.TauDischargeS }},
	{"tau, holding", "s", func(s *analysis.Summary) *float64 { return s.Plant.TauHoldS }},
	{"V high", "V", func(s *analysis.Summary) *float64 { return s.Plant.VHighV }},
	{"ADC noise (rms)", "counts", func(s *analysis.Summary) *float64 { return s.Plant.NoiseRMSCounts }},
}

// segFigure is one per-segment row of the comparison table. When volts are not known
// for every capture, the row falls back to counts (counts is then set).
type segFigure struct {
	label  string
	unit   string
	get    func(g *analysis.Segment) *float64
	counts func(g *analysis.Segment) *float64
}

var segmentFigures = []segFigure{
	{"mean error", "V", func(g *analysis.Segment) *float64 { return g.MeanErrorV }, func(g *analysis.Segment) *float64 { return g.MeanErrorCounts }},
	{"ripple p-p", "V", func(g *analysis.Segment) *float64 { return g.RipplePPV }, func(g *analysis.Segment) *float64 { return g.RipplePPCounts }},
	{"ripple rms", "V", func(g *analysis.Segment) *float64 { return g.RippleRMSV }, func(g *analysis.Segment) *float64 { return g.RippleRMSCounts }},
	{"duty charge", "%", func(g *analysis.Segment) *float64 { return g.DutyCharge }, nil},
	{"duty hold", "%", func(g *analysis.Segment) *float64 { return g.DutyHold }, nil},
	{"limit-cycle period", "s", func(g *analysis.Segment) *float64 { return g.LimitCyclePeriodS }, nil},
	{"switching", "Hz", func(g *analysis.Segment) *float64 { return g.SwitchingHz }, nil},
	{"deadband", "counts", func(g *analysis.Segment) *float64 { return g.DeadbandCounts }, nil},
	{"band entries", "", func(g *analysis.Segment) *float64 { return i64(g.DeadbandEntries) }, nil},
	{"band jumps", "", func(g *analysis.Segment) *float64 { return i64(g.BandJumps) }, nil},
}

// allPresent reports whether every capture that has the segment has the value.
func allPresent(segs []*analysis.Segment, vals []*float64) bool {
	for i, g := range segs {
		if g != nil && vals[i] == nil {
			return false
		}
	}
	return true
}

func fmtUnit(p *float64, unit string) string {
	switch unit {
	case "":
		return figure.NumP(p)
	case "%":
		return figure.Pct(p)
	case "counts":
		return figure.Counts(p)
	}
	return figure.SI(p, unit)
}

// fmtDiff formats b - a with its sign and, when a is not zero, the relative change.
func fmtDiff(a, b *float64, unit string) string {
	if a == nil || b == nil || !finite(*a) || !finite(*b) {
		return figure.Missing
	}
	d := *b - *a
	if d == 0 {
		return "no change"
	}
	var txt string
	switch unit {
	case "":
		txt = strconv.FormatFloat(d, 'g', 4, 64)
	case "%":
		txt = strconv.FormatFloat(d*100, 'f', 1, 64) + " points"
	case "counts":
		txt = figure.CountText(strconv.FormatFloat(d, 'g', 4, 64), "count")
	default:
		txt = si.Format(d, unit)
	}
	if d > 0 {
		txt = "+" + txt
	}
	if *a != 0 && unit != "%" {
		txt += fmt.Sprintf(" (%+.0f %%)", 100*d/math.Abs(*a))
	}
	return txt
}

// CompareTable puts the figures of several captures side by side, with the difference of
// each later capture from the first. Segments are matched by setpoint (in counts): the
// first segment of each capture at that setpoint.
func CompareTable(docs []Capture) Table {
	t := Table{ID: "compare", Caption: "Side by side (differences from the first capture)", Head: []string{"figure"}}
	for _, d := range docs {
		t.Head = append(t.Head, clean(d.Name))
	}
	for _, d := range docs[1:] {
		t.Head = append(t.Head, clean(d.Name)+" − "+clean(docs[0].Name))
	}
	row := func(label, unit string, vals []*float64) {
		cells := []string{label}
		present := false
		for _, v := range vals {
			cells = append(cells, fmtUnit(v, unit))
			present = present || v != nil
		}
		if !present {
			return
		}
		for _, v := range vals[1:] {
			cells = append(cells, fmtDiff(vals[0], v, unit))
		}
		t.Rows = append(t.Rows, Row{Cells: cells})
	}
	for _, f := range captureFigures {
		vals := make([]*float64, len(docs))
		for i, d := range docs {
			if d.Summary != nil {
				vals[i] = f.get(d.Summary)
			}
		}
		row(f.label, f.unit, vals)
	}
	// Setpoints in the order they first appear in any capture.
	var sps []float64
	seen := map[float64]bool{}
	for _, d := range docs {
		if d.Summary == nil {
			continue
		}
		for _, g := range d.Summary.Segments {
			if !seen[g.SetpointCounts] {
				seen[g.SetpointCounts] = true
				sps = append(sps, g.SetpointCounts)
			}
		}
	}
	more := ""
	if len(sps) > maxCompareSetpoints {
		more = figure.Count(len(sps)-maxCompareSetpoints, "more setpoint") + " not compared here"
		sps = sps[:maxCompareSetpoints]
	}
	for _, sp := range sps {
		segs := make([]*analysis.Segment, len(docs))
		var label string
		for i, d := range docs {
			if d.Summary == nil {
				continue
			}
			for j := range d.Summary.Segments {
				if g := &d.Summary.Segments[j]; g.SetpointCounts == sp {
					segs[i] = g
					if label == "" {
						label = setpointText(*g)
					}
					break
				}
			}
		}
		head := Row{Cells: []string{"at setpoint " + label}, Class: "group"}
		t.Rows = append(t.Rows, head)
		for _, f := range segmentFigures {
			vals := make([]*float64, len(docs))
			unit := f.unit
			for i, g := range segs {
				if g != nil {
					vals[i] = f.get(g)
				}
			}
			if f.counts != nil && !allPresent(segs, vals) {
				unit = "counts"
				for i, g := range segs {
					if g != nil {
						vals[i] = f.counts(g)
					}
				}
			}
			row(f.label, unit, vals)
		}
	}
	if more != "" {
		t.note(more)
	}
	return t
}
