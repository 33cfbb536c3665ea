package tui

import (
	"strconv"
	"strings"
	"testing"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/advice"
	"github.com/caploop/caploop/analysis/figure"
	"github.com/caploop/caploop/tui/live"
)

func bandDiag(sp string, segs string, jumps int) analysis.Diagnostic {
	return analysis.Diagnostic{Code: analysis.DiagBandTooNarrow, Severity: "warning",
		Message: "Setpoint " + sp + " (" + segs + "): " + strconv.Itoa(jumps) + " band jumps (a charge followed directly by a discharge or the reverse) with a deadband of ±4 counts (9 counts wide)."}
}

// TestFoldDiagnostics: the same diagnostic at several setpoints (and the analysis'
// "the same at N more setpoints") becomes one line listing the segments.
func TestFoldDiagnostics(t *testing.T) {
	sum := &analysis.Summary{
		Segments: []analysis.Segment{
			{StartS: 0, EndS: 1, BandJumps: 5}, {StartS: 1, EndS: 2, BandJumps: 7},
			{StartS: 2, EndS: 3, BandJumps: 0}, {StartS: 3, EndS: 4, BandJumps: 2},
		},
		Diagnostics: []analysis.Diagnostic{
			bandDiag("1.2 V", "segment 1", 5),
			{Code: analysis.DiagJitter, Severity: "warning", Message: "The sample period jitters by 1 ms rms."},
			bandDiag("2 V", "segments 2, 4", 9),
			{Code: analysis.DiagBandTooNarrow, Severity: "warning", Message: "The same (band too narrow) at 2 more setpoints."},
		},
	}
	now, earlier := splitDiagnostics(sum, nil)
	if len(earlier) != 0 {
		t.Fatalf("without a change of settings every diagnostic is now; earlier = %+v", earlier)
	}
	if len(now) != 2 {
		t.Fatalf("got %d lines, want 2 (band too narrow folded, jitter):\n%+v", len(now), now)
	}
	band := now[0]
	if band.Code != analysis.DiagBandTooNarrow || len(band.Segs) != 3 || band.Segs[0] != 1 || band.Segs[1] != 2 || band.Segs[2] != 4 {
		t.Errorf("folded segments = %v (code %s), want [1 2 4]", band.Segs, band.Code)
	}
	for _, want := range []string{"Setpoints 1.2 V, 2 V (segments 1, 2, 4)", "band too narrow; the newest (2 V, segments 2, 4): 9 band jumps", "the same at 2 more setpoints"} {
		if !strings.Contains(band.Text, want) {
			t.Errorf("folded line %q lacks %q", band.Text, want)
		}
	}
	if strings.Count(band.Text, "band jumps (a charge") != 1 {
		t.Errorf("folded line repeats the finding: %q", band.Text)
	}
	// One diagnostic alone keeps its sentence.
	if l := foldDiags([]parsedDiag{parseDiag(sum.Diagnostics[0])}); l.Text != sum.Diagnostics[0].Message {
		t.Errorf("a single diagnostic became %q", l.Text)
	}
}

// fixedSummary: segment 1 under the old band with band jumps, then one segment under
// the new band lasting after seconds with the given limit cycle and band jumps.
func fixedSummary(after, cycle float64, jumpsAfter int64) *analysis.Summary {
	segs := []analysis.Segment{{StartS: 0, EndS: 3, BandJumps: 40}, {StartS: 3, EndS: 3 + after, BandJumps: jumpsAfter, LimitCyclePeriodS: fp(cycle)}}
	d := []analysis.Diagnostic{bandDiag("1.2 V", "segment 1", 4)}
	if jumpsAfter > 0 {
		d = append(d, analysis.Diagnostic{Code: analysis.DiagBandTooNarrow, Severity: "warning",
			Message: "Setpoint 1.2 V (segment 2): 3 band jumps with a deadband of ±9 counts."})
	}
	return &analysis.Summary{Segments: segs, Diagnostics: d}
}

// TestFixedRule checks the rule of CONVENTIONS.md: fixed when not recurred for 5 s or
// 5 limit cycles (the longer) after the change of settings that addressed it.
func TestFixedRule(t *testing.T) {
	changes := []settingChange{{At: 12.3, Cut: 0, What: "deadband 9"}}
	for _, c := range []struct {
		name          string
		after, cycle  float64
		jumps         int64
		now           int
		state         diagState
		wantInEarlier string
	}{
		{"too soon", 4.9, 0.03, 0, 0, diagWatching, "watching since deadband 9 at 12.3s"},
		{"5 s clean", 5.1, 0.03, 0, 0, diagFixed, "fixed at 12.3s by deadband 9"},
		{"slow loop: 5 s is under 5 cycles", 6, 2, 0, 0, diagWatching, "watching"},
		{"slow loop: 5 cycles clean", 10.5, 2, 0, 0, diagFixed, "fixed at 12.3s by deadband 9"},
		{"recurred", 8, 0.03, 3, 1, diagEarlier, ""},
	} {
		t.Run(c.name, func(t *testing.T) {
			now, earlier := splitDiagnostics(fixedSummary(c.after, c.cycle, c.jumps), changes)
			if len(now) != c.now {
				t.Fatalf("now = %+v, want %d line(s)", now, c.now)
			}
			if c.now > 0 {
				if now[0].Segs[0] != 2 {
					t.Errorf("the recurrence names segments %v, want 2", now[0].Segs)
				}
				// The old band's diagnostic is still earlier, but no fix is claimed for the problem.
				for _, e := range earlier {
					if e.State == diagFixed {
						t.Errorf("a recurred problem is called fixed: %+v", e)
					}
				}
				return
			}
			if len(earlier) != 1 || earlier[0].State != c.state {
				t.Fatalf("earlier = %+v, want one in state %d", earlier, c.state)
			}
			if got := earlier[0].fixedText(); !strings.Contains(got, c.wantInEarlier) {
				t.Errorf("state text %q lacks %q", got, c.wantInEarlier)
			}
		})
	}
}

// TestSetpointChangeFixesNoBand: a change of the setpoint alone does not make a narrow
// band fixed, however long it has not shown since.
func TestSetpointChangeFixesNoBand(t *testing.T) {
	_, earlier := splitDiagnostics(fixedSummary(8, 0.03, 0), []settingChange{{At: 12.3, Cut: 0, What: "set sp=500"}})
	if len(earlier) != 1 || earlier[0].State != diagEarlier || earlier[0].fixedText() != "none since set sp=500 at 12.3s" {
		t.Errorf("earlier = %+v (%q)", earlier, earlier[0].fixedText())
	}
	// A deadband change after it fixes it.
	_, earlier = splitDiagnostics(fixedSummary(8, 0.03, 0), []settingChange{{At: 12.3, Cut: 0, What: "set sp=500"}, {At: 12.4, Cut: 0, What: "deadband 9"}})
	if len(earlier) != 1 || earlier[0].State != diagFixed || earlier[0].By != "deadband 9" {
		t.Errorf("earlier = %+v", earlier)
	}
}

// TestCounterDiagnostics: a whole-run counter (rejected lines) is now only when it grew
// since the change; state-like whole-run findings stay now.
func TestCounterDiagnostics(t *testing.T) {
	sum := &analysis.Summary{RejectedLines: 2, Diagnostics: []analysis.Diagnostic{
		{Code: analysis.DiagRejectedLines, Severity: "warning", Message: "2 lines could not be read and were skipped."},
		{Code: analysis.DiagNoIdentify, Severity: "info", Message: "No time constant could be identified: no run."},
	}}
	now, earlier := splitDiagnostics(sum, []settingChange{{At: 1, What: "deadband 9", Rejected: 2}})
	if len(now) != 1 || now[0].Code != analysis.DiagNoIdentify || len(earlier) != 1 || earlier[0].Code != analysis.DiagRejectedLines {
		t.Errorf("no new rejects: now %+v earlier %+v", now, earlier)
	}
	sum.RejectedLines = 3
	if now, _ := splitDiagnostics(sum, []settingChange{{At: 1, What: "deadband 9", Rejected: 2}}); len(now) != 2 {
		t.Errorf("a reject after the change is now: %+v", now)
	}
}

func adv(db int, r float64) *advice.Advice {
	return &advice.Advice{DeadbandCounts: &db, Candidates: []advice.Candidate{{ROhm: r, CF: 1e-6}}}
}

// TestAdviceHysteresis: a new suggestion replaces the shown one only when it differs
// for three updates in a row.
func TestAdviceHysteresis(t *testing.T) {
	var tr adviceTrack
	shown := func() int { return *tr.shown.DeadbandCounts }
	tr.offer(adv(9, 15e3))
	if shown() != 9 {
		t.Fatalf("first advice not shown")
	}
	for i, db := range []int{8, 9, 8, 8} {
		tr.offer(adv(db, 15e3))
		if shown() != 9 {
			t.Fatalf("update %d (%d) replaced the shown 9 before three differing updates in a row", i, db)
		}
	}
	tr.offer(adv(8, 15e3))
	if shown() != 8 {
		t.Errorf("three updates in a row with 8: shown %d, want 8", shown())
	}
	// The R/C pair counts as the suggestion too.
	tr.offer(adv(8, 82e3))
	tr.offer(adv(8, 82e3))
	if tr.shown.Candidates[0].ROhm != 15e3 {
		t.Errorf("the pair changed after two updates")
	}
	tr.offer(adv(8, 82e3))
	if tr.shown.Candidates[0].ROhm != 82e3 {
		t.Errorf("the pair did not change after three updates")
	}
}

// TestAdvicePreliminary: preliminary until tau's interval is within 10 % and the
// advised deadband is the same over the last three updates.
func TestAdvicePreliminary(t *testing.T) {
	plant := func(half float64) *analysis.Summary {
		tau := 0.05
		return &analysis.Summary{Plant: analysis.Plant{TauChargeS: &tau, TauChargeCIS: &[2]float64{tau * (1 - half), tau * (1 + half)}}}
	}
	var tr adviceTrack
	for _, db := range []int{7, 9, 9} {
		tr.offer(adv(db, 15e3))
	}
	if p, text := tr.confidence(plant(0.05)); !p || !strings.Contains(text, "2 of 3") {
		t.Errorf("deadband moved within the last three updates: preliminary %v %q", p, text)
	}
	tr.offer(adv(9, 15e3))
	if p, text := tr.confidence(plant(0.05)); p || !strings.HasPrefix(text, "firm") {
		t.Errorf("tau ±5 %% and 3 same updates: preliminary %v %q, want firm", p, text)
	}
	if p, text := tr.confidence(plant(0.12)); !p || !strings.Contains(text, "tau ±12 %") {
		t.Errorf("tau ±12 %%: preliminary %v %q", p, text)
	}
	if p, _ := tr.confidence(&analysis.Summary{}); !p {
		t.Errorf("no tau: not preliminary")
	}
}

// TestTradeLine: the before/after panel says what the change was meant to move and the
// trade made, in one line.
func TestTradeLine(t *testing.T) {
	wide := tradeLine(&DeadbandChange{From: 4, To: 9})
	if wide != "deadband 4 → 9: meant to cut band jumps and switching; trade: ripple, rms and mean error grow within the band" {
		t.Errorf("widening: %q", wide)
	}
	if n := tradeLine(&DeadbandChange{From: 9, To: 4}); !strings.Contains(n, "meant to cut ripple and mean error") || !strings.Contains(n, "trade: more switching") {
		t.Errorf("narrowing: %q", n)
	}
	c := &DeadbandChange{From: 4, To: 9,
		Before: &analysis.Segment{BandJumps: 37, SwitchingHz: fp(165), RippleRMSV: fp(6.8e-3), MeanErrorV: fp(-0.9e-3)},
		After:  &analysis.Segment{BandJumps: 0, SwitchingHz: fp(12.5), RippleRMSV: fp(10.2e-3), MeanErrorV: fp(1.2e-3)}}
	if s := soFarLine(c); !strings.Contains(s, "band jumps 37 → 0") || !strings.Contains(s, "mean error 900 µV → 1.2 mV") {
		t.Errorf("so far: %q", s)
	}
}

// TestFoldAfterChange: after a change, the old band's diagnostics at one setpoint under
// two bands, and the analysis' "the same at N more setpoints", fold into one earlier
// line; a band jump in an unnamed segment after the change makes that part now.
func TestFoldAfterChange(t *testing.T) {
	sum := &analysis.Summary{
		Segments: []analysis.Segment{
			{StartS: 0, EndS: 1, BandJumps: 5}, {StartS: 1, EndS: 2, BandJumps: 7},
			{StartS: 2, EndS: 3, BandJumps: 3}, {StartS: 3, EndS: 4, BandJumps: 2},
			{StartS: 4, EndS: 10, BandJumps: 0, LimitCyclePeriodS: fp(0.02)}, {StartS: 10, EndS: 10.5},
		},
		Diagnostics: []analysis.Diagnostic{
			bandDiag("1.2 V", "segment 1", 5), bandDiag("1.2 V", "segment 2", 7), bandDiag("2 V", "segment 3", 3),
			{Code: analysis.DiagBandTooNarrow, Severity: "warning", Message: "The same (band too narrow) at 1 more setpoint."},
		},
	}
	changes := []settingChange{{At: 4.2, Cut: 3, What: "deadband 9"}}
	now, earlier := splitDiagnostics(sum, changes)
	if len(now) != 0 || len(earlier) != 1 {
		t.Fatalf("now %+v earlier %+v, want one earlier line", now, earlier)
	}
	e := earlier[0]
	if e.State != diagFixed || !strings.HasPrefix(e.Text, "Setpoints 1.2 V, 2 V (segments 1, 2, 3)") || !strings.HasSuffix(e.Text, "the same at 1 more setpoint.") {
		t.Errorf("folded earlier line: state %d %q", e.State, e.Text)
	}
	// A band jump in segment 5 (after the change, named by no diagnostic): the unnamed
	// setpoint is a problem of now.
	sum.Segments[4].BandJumps = 2
	now, _ = splitDiagnostics(sum, changes)
	if len(now) != 1 || !strings.Contains(now[0].Text, "1 more setpoint") {
		t.Errorf("an unnamed recurrence after the change is not now: %+v", now)
	}
}

// TestChangesFromEvents: a `set` line sent and then reported by the board counts as one
// change, named by the board's report; another setting reported by a meta line is a
// change too; a reset forgets them.
func TestChangesFromEvents(t *testing.T) {
	m := liveFixture(t)
	m.takeFrame(live.Snapshot{Events: []live.Event{
		{T: 3, Kind: live.EventSent, Text: "set deadband=9", SegStartS: 2},
		{T: 3.1, Kind: live.EventDeadband, Text: "deadband 2→9", Value: 9, SegStartS: 2},
		{T: 5, Kind: live.EventMeta, Text: "period_us 1000→500", SegStartS: 3.1},
	}})
	if len(m.changes) != 2 || m.changes[0].What != "deadband 9" || m.changes[0].At != 3.1 || m.changes[1].What != "period_us 1000→500" {
		t.Fatalf("changes = %+v", m.changes)
	}
	if m.changes[0].Rejected != m.sum.RejectedLines {
		t.Errorf("the counters at the change were not kept")
	}
	if !strings.Contains(strings.Join(m.advice.diagLines(), "\n"), "diagnostics now (since period_us 1000→500 at 5.00s)") {
		t.Errorf("view 2 does not split at the newest change:\n%s", strings.Join(m.advice.diagLines(), "\n"))
	}
	m.takeFrame(live.Snapshot{Reset: true})
	if len(m.changes) != 0 || len(m.advice.changes) != 0 {
		t.Errorf("a reset kept the changes: %+v", m.changes)
	}
}

// TestParseSegmentList reads the segment lists the analysis writes (figure.List, which
// ends a long list with "... (N in all)").
func TestParseSegmentList(t *testing.T) {
	segs := make([]int, 30)
	for i := range segs {
		segs[i] = 2 * (i + 1)
	}
	msg := "Setpoint 1.2 V (segments " + figure.List(segs) + "): 9 band jumps with a deadband of ±4 counts."
	p := parseDiag(analysis.Diagnostic{Code: analysis.DiagBandTooNarrow, Message: msg})
	if p.subject != "Setpoint 1.2 V" || len(p.segs) == 0 || p.segs[0] != 2 || p.segs[1] != 4 {
		t.Errorf("parsed %q: subject %q segments %v", msg, p.subject, p.segs)
	}
	if p.rest != "9 band jumps with a deadband of ±4 counts." {
		t.Errorf("rest %q", p.rest)
	}
}

// TestRunningSegmentNotUnsettled: the running segment, still on its way to the setpoint,
// is no recurrence of "not settled".
func TestRunningSegmentNotUnsettled(t *testing.T) {
	sum := &analysis.Summary{
		Segments: []analysis.Segment{{StartS: 0, EndS: 3}, {StartS: 3, EndS: 3.2}},
		Diagnostics: []analysis.Diagnostic{{Code: analysis.DiagNotSettled, Severity: "warning",
			Message: "Setpoint 4.9 V (segments 1, 2): the reading did not reach the setpoint within the segment (last reading 4.7 V)."}},
	}
	now, earlier := splitDiagnostics(sum, []settingChange{{At: 3, Cut: 0, What: "supply 5→6"}})
	if len(now) != 0 || len(earlier) != 1 || earlier[0].State != diagWatching {
		t.Errorf("now %+v earlier %+v, want it earlier and watched", now, earlier)
	}
}
