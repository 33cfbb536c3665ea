package tui

import (
	"fmt"
	"strings"

	tea "github.com/charmbracelet/bubbletea"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/figure"
	"github.com/caploop/caploop/tui/live"
)

// DeadbandChange is one deadband change confirmed by the board, with the figures of the
// steady segment before it and the newest figures after it.
type DeadbandChange struct {
	At       float64 // seconds, when the board confirmed
	From, To float64 // deadband half-width, counts (From < 0: not known)
	Before   *analysis.Segment
	After    *analysis.Segment
	// CutS is the start of the segment that was running at the change, in the analysis
	// clock: only segments that start later ran wholly under the new band.
	CutS float64
}

// FiguresModel shows the analysis figures of the current steady segment and the plant,
// compact under the trace or in full on its own view with a before/after table.
type FiguresModel struct {
	sum     *analysis.Summary
	change  *DeadbandChange
	width   int
	height  int
	compact bool
}

// NewFigures returns an empty figures model.
func NewFigures() FiguresModel { return FiguresModel{} }

// SetSize sets the block size; compact picks the short form.
func (m *FiguresModel) SetSize(width, height int, compact bool) {
	m.width, m.height, m.compact = width, height, compact
}

// Update takes summary snapshots and deadband changes.
func (m FiguresModel) Update(msg tea.Msg) (FiguresModel, tea.Cmd) {
	switch msg := msg.(type) {
	case frameMsg:
		if msg.summary != nil {
			m.sum = msg.summary
		}
		if msg.change != nil {
			c := *msg.change
			m.change = &c
		}
	}
	return m, nil
}

// View renders the block.
func (m FiguresModel) View() string {
	if m.compact {
		return fitBlock(m.compactView(), m.width, m.height)
	}
	return fitBlock(m.fullView(), m.width, m.height)
}

// showTracking says the setpoint is moving (the newest segment was opened by a tracking
// move) or mostly moved: the tracking figures then stand where the segment's would.
func showTracking(s *analysis.Summary) bool {
	if s == nil || s.Tracking == nil {
		return false
	}
	if 2*s.Tracking.Samples > s.Samples {
		return true
	}
	return len(s.Segments) > 0 && s.Segments[len(s.Segments)-1].Tracking
}

// trackingRows lists the tracking figures as label/value rows.
func trackingRows(t *analysis.Tracking) [][2]string {
	lag := figure.SI(t.LagS, "s")
	if t.LagS == nil && t.LagSamples != nil {
		lag = fmt.Sprintf("%.1f samples", *t.LagSamples)
	}
	return [][2]string{
		{"samples", fmt.Sprintf("%d over %s", t.Samples, figure.SI(t.DurationS, "s"))},
		{"setpoint", figure.SI(t.SPMinV, "V") + " to " + figure.SI(t.SPMaxV, "V")},
		{"mean error", figure.SI(t.MeanErrorV, "V") + " (" + figure.CountText(figure.NumP(t.MeanErrorCounts), "count") + ")"},
		{"rms error", figure.SI(t.RMSErrorV, "V") + " (" + figure.CountText(figure.NumP(t.RMSErrorCounts), "count") + ")"},
		{"max |error|", figure.SI(t.MaxAbsErrorV, "V")},
		{"lag", lag},
		{"duty c/h/d", figure.Pct(t.DutyCharge) + " / " + figure.Pct(t.DutyHold) + " / " + figure.Pct(t.DutyDischarge)},
		{"band jumps", fmt.Sprintf("%d", t.BandJumps)},
	}
}

func (m FiguresModel) compactView() string {
	if showTracking(m.sum) {
		t := m.sum.Tracking
		rows := trackingRows(t)
		var b strings.Builder
		fmt.Fprintf(&b, "tracking %s  rms error %s  mean error %s  lag %s\n", rows[1][1], figure.SI(t.RMSErrorV, "V"), figure.SI(t.MeanErrorV, "V"), rows[5][1])
		fmt.Fprintf(&b, "duty charge %s hold %s discharge %s  max |error| %s  band jumps %d\n",
			figure.Pct(t.DutyCharge), figure.Pct(t.DutyHold), figure.Pct(t.DutyDischarge), figure.SI(t.MaxAbsErrorV, "V"), t.BandJumps)
		p := m.sum.Plant
		fmt.Fprintf(&b, "tau charge %s discharge %s  v_high %s  noise %s rms",
			figure.SIHalfWidth(p.TauChargeS, p.TauChargeCIS, "s"), figure.SI(p.TauDischargeS, "s"),
			figure.SI(p.VHighV, "V"), figure.CountText(figure.NumP(p.NoiseRMSCounts), "count"))
		return b.String()
	}
	seg := live.CurrentSegment(m.sum)
	if seg == nil {
		return "figures: waiting for a steady segment…"
	}
	var b strings.Builder
	fmt.Fprintf(&b, "sp %s  ripple %s p-p, %s rms  mean error %s\n",
		fmtSPV(seg), figure.SI(seg.RipplePPV, "V"), figure.SI(seg.RippleRMSV, "V"), figure.SI(seg.MeanErrorV, "V"))
	fmt.Fprintf(&b, "duty charge %s hold %s discharge %s  cycle %s  switching %s\n",
		figure.Pct(seg.DutyCharge), figure.Pct(seg.DutyHold), figure.Pct(seg.DutyDischarge),
		cycleText(seg), figure.SI(seg.SwitchingHz, "Hz"))
	fmt.Fprintf(&b, "band %s  entries %d  exits %d  band jumps %d%s\n",
		fmtBand(seg.DeadbandCounts), seg.DeadbandEntries, seg.DeadbandExits, seg.BandJumps, unreachable(seg))
	p := m.sum.Plant
	fmt.Fprintf(&b, "tau charge %s discharge %s  v_high %s  noise %s rms",
		figure.SIHalfWidth(p.TauChargeS, p.TauChargeCIS, "s"), figure.SI(p.TauDischargeS, "s"),
		figure.SI(p.VHighV, "V"), figure.CountText(figure.NumP(p.NoiseRMSCounts), "count"))
	return b.String()
}

func fmtSPV(seg *analysis.Segment) string {
	if seg.SetpointV != nil {
		return figure.SI(seg.SetpointV, "V")
	}
	return figure.CountText(fmt.Sprintf("%.0f", seg.SetpointCounts), "count")
}

// fmtBand writes a deadband half-width: "±4 counts", or "– (not reported)".
func fmtBand(p *float64) string {
	if p == nil {
		return figure.Missing + " (not reported)"
	}
	return figure.CountText("±"+figure.NumP(p), "count")
}

func unreachable(seg *analysis.Segment) string {
	if seg.Unreachable {
		return "  UNREACHABLE"
	}
	return ""
}

// segmentRows lists the figures of one segment as label/value rows.
func segmentRows(seg *analysis.Segment) [][2]string {
	if seg == nil {
		return [][2]string{{"segment", "none yet"}}
	}
	return [][2]string{
		{"setpoint", fmtSPV(seg)},
		{"steady", figure.Count(seg.SteadySamples, "sample") + " from " + figure.SI(seg.SteadyStartS, "s")},
		{"ripple p-p", figure.SI(seg.RipplePPV, "V") + " (" + figure.CountText(figure.NumP(seg.RipplePPCounts), "count") + ")"},
		{"ripple rms", figure.SI(seg.RippleRMSV, "V")},
		{"mean error", figure.SI(seg.MeanErrorV, "V") + " (" + figure.CountText(figure.NumP(seg.MeanErrorCounts), "count") + ")"},
		{"duty c/h/d", figure.Pct(seg.DutyCharge) + " / " + figure.Pct(seg.DutyHold) + " / " + figure.Pct(seg.DutyDischarge)},
		{"limit cycle", cycleText(seg)},
		{"switching", figure.SI(seg.SwitchingHz, "Hz")},
		{"node p-p", nodeText(seg)},
		{"band", fmtBand(seg.DeadbandCounts)},
		{"entries/exits", fmt.Sprintf("%d / %d", seg.DeadbandEntries, seg.DeadbandExits)},
		{"band jumps", fmt.Sprintf("%d", seg.BandJumps)},
	}
}

func plantRows(p analysis.Plant) [][2]string {
	return [][2]string{
		{"tau charge", figure.SIHalfWidth(p.TauChargeS, p.TauChargeCIS, "s")},
		{"tau discharge", figure.SIHalfWidth(p.TauDischargeS, p.TauDischargeCIS, "s")},
		{"tau hold", figure.SIHalfWidth(p.TauHoldS, p.TauHoldCIS, "s")},
		{"v_high", figure.SIHalfWidth(p.VHighV, p.VHighCIV, "V")},
		{"v_low", figure.SI(p.VLowV, "V")},
		{"noise", figure.CountText(figure.NumP(p.NoiseRMSCounts), "count") + " rms"},
		{"effective R", figure.SI(p.EffectiveROhm, "Ω")},
		{"effective C", figure.SI(p.EffectiveCF, "F")},
		{"load", figure.SI(p.LoadOhm, "Ω")},
	}
}

func rowsBlock(title string, rows [][2]string) string {
	var b strings.Builder
	b.WriteString(title)
	for _, r := range rows {
		fmt.Fprintf(&b, "\n %-13s %s", r[0], r[1])
	}
	return b.String()
}

// compareBlock puts two segments' figures side by side with a title.
func compareBlock(c *DeadbandChange) string {
	before, after := segmentRows(c.Before), segmentRows(c.After)
	var b strings.Builder
	from := "?"
	if c.From >= 0 {
		from = fmt.Sprintf("%.0f", c.From)
	}
	fmt.Fprintf(&b, "deadband %s → %s, confirmed at %s", from, figure.CountText(fmt.Sprintf("%.0f", c.To), "count"), formatSeconds(c.At))
	if c.After == nil {
		b.WriteString(" (after: waiting for a segment that starts under the new band)")
	}
	fmt.Fprintf(&b, "\n %-13s %-24s %s", "", "before", "after")
	for i := range before {
		a := figure.Missing
		if i < len(after) {
			a = after[i][1]
		}
		fmt.Fprintf(&b, "\n %-13s %-24s %s", before[i][0], before[i][1], a)
	}
	return b.String()
}

func (m FiguresModel) fullView() string {
	var plant string
	if m.sum != nil {
		plant = rowsBlock("plant (identified)", plantRows(m.sum.Plant))
	}
	if m.change != nil {
		// What the change bought, side by side; the plant beside it when there is room.
		head := changeHead(m.change, m.width)
		cmp := compareBlock(m.change)
		return head + "\n" + besideOrBelow(cmp, plant, 3, m.width)
	}
	left := rowsBlock("current segment", segmentRows(live.CurrentSegment(m.sum)))
	if showTracking(m.sum) {
		left = rowsBlock("tracking (moving setpoint)", trackingRows(m.sum.Tracking))
	}
	return besideOrBelow(left, plant, 3, m.width)
}

// cycleText is the limit cycle as the README defines it (the mean interval between
// charge onsets) with its frequency, or "rests" when the drive never switched.
func cycleText(seg *analysis.Segment) string {
	if seg.Rests {
		return "rests"
	}
	if seg.LimitCyclePeriodS == nil {
		return figure.SI(nil, "s")
	}
	return figure.SI(seg.LimitCyclePeriodS, "s") + " = " + figure.SI(seg.RippleFreqHz, "Hz")
}

// nodeText is the node ripple without ADC noise (from the identified plant and the
// drives), beside the measured p-p.
func nodeText(seg *analysis.Segment) string {
	if seg.RippleNodePPV == nil {
		return figure.SI(nil, "V")
	}
	return figure.SI(seg.RippleNodePPV, "V") + " (no noise)"
}
