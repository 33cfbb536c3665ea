package advice

import (
	"fmt"
	"math"
	"path/filepath"
	"strings"
	"testing"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/loop"
	"github.com/caploop/caploop/telemetry"
)

// summarize runs the analysis engine over one testdata capture.
func summarize(t *testing.T, path string) *analysis.Summary {
	t.Helper()
	src, err := telemetry.OpenFile(path)
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	sc := telemetry.NewScanner(src)
	sc.Name = filepath.Base(path)
	s, err := analysis.Summarize(sc, analysis.Options{})
	if err != nil {
		t.Fatal(err)
	}
	return s
}

func captures(t *testing.T) []string {
	var files []string
	for _, pat := range []string{"*.txt", "*.cap", "*.txt.gz", "*.cap.gz"} {
		m, _ := filepath.Glob(filepath.Join("..", "..", "testdata", pat))
		files = append(files, m...)
	}
	if len(files) == 0 {
		t.Skip("no captures in testdata")
	}
	return files
}

// Acceptance: on each testdata capture, the advice's deadband and R and C table carry
// predicted figures that match a fresh simulation of that design within 10 %: the test's
// own harness, the identified plant, six other seeds, the same steady window length
// (the figure is defined over it: noise-driven wandering in hold grows with the window);
// like the prediction, the mean over the six seeds counts. A difference under half an
// LSB (ripple) or 1.5 periods (settling) counts as a match.
//
// Known limit: with a floating hold (three-state, no load, no leak) the output lands
// somewhere in the band and stays there unless a noise reading kicks it out, which then
// costs one correction step; whether a given run sees a kick is chance. There the check
// accepts a difference up to one correction step (the largest step at the used setpoints).
func TestCapturesPredictedMatchFresh(t *testing.T) {
	for _, f := range captures(t) {
		t.Run(filepath.Base(f), func(t *testing.T) {
			s := summarize(t, f)
			a, err := FromSummary(s, Goals{})
			if err != nil {
				t.Fatal(err)
			}
			if len(a.Candidates) == 0 {
				t.Fatalf("no candidates: %+v", a)
			}
			g := a.Goals
			// Mode-aware: a three-state board gets a band, a two-state one none.
			if three := g.Mode == "three-state"; three != (a.DeadbandCounts != nil) {
				t.Fatalf("mode %s: deadband %v", g.Mode, a.DeadbandCounts)
			}
			lsb := g.VrefV / math.Ldexp(1, g.ADCBits)
			rows := append([]Candidate(nil), a.Candidates...)
			if a.Current != nil {
				rows = append(rows, *a.Current)
			}
			floating := g.Mode == "three-state" && g.LoadOhm == 0 && g.LeakOhm == 0
			for i, c := range rows {
				allow := lsb / 2
				if floating {
					ci := loop.Circuit{Supply: g.SupplyV, R: c.ROhm, C: c.CF * g.CRatio}
					allow = ci.StepMax(g.PeriodS) + lsb/2
				}
				var fr fresh
				for k := uint64(0); k < 6; k++ {
					f := freshRun(t, g, c.WindowSamples, modeOf(g), c.ROhm, c.CF, g.CRatio, c.DeadbandCounts, g.NoiseRMSCounts, 4242+10*uint64(i)+k)
					fr.ripplePP += f.ripplePP / 6
					fr.settleS += f.settleS / 6
				}
				if d := math.Abs(fr.ripplePP - c.PredictedRipplePPV); d > 0.10*c.PredictedRipplePPV && d > allow {
					t.Errorf("%s R=%g C=%g: ripple fresh %.4g V vs predicted %.4g V (%.0f %% off)",
						c.Series, c.ROhm, c.CF, fr.ripplePP, c.PredictedRipplePPV, 100*d/c.PredictedRipplePPV)
				}
				if !c.Settled {
					continue
				}
				if d := math.Abs(fr.settleS - c.PredictedSettleS); d > 0.10*c.PredictedSettleS && d > 1.5*g.PeriodS {
					t.Errorf("%s R=%g C=%g: settle fresh %.4g s vs predicted %.4g s (%.0f %% off)",
						c.Series, c.ROhm, c.CF, fr.settleS, c.PredictedSettleS, 100*d/c.PredictedSettleS)
				}
			}
		})
	}
}

// On each capture, a band one count narrower than the suggested one shows upward band
// jumps at the setpoints where the working says it is jumped again and again (a charge
// step, alone or with the noise margin, on a node that droops in hold).
func TestCapturesNarrowerBand(t *testing.T) {
	checked := 0
	for _, f := range captures(t) {
		t.Run(filepath.Base(f), func(t *testing.T) {
			s := summarize(t, f)
			a, err := FromSummary(s, Goals{})
			if err != nil {
				t.Fatal(err)
			}
			if a.Current == nil || a.DeadbandCounts == nil || *a.DeadbandCounts < 1 {
				t.Skip("no present circuit or no band to narrow")
			}
			db := *a.DeadbandCounts
			g := a.Goals
			up, all := map[int]int64{}, map[int]int64{}
			for _, seed := range []uint64{31, 32} {
				fr := freshRun(t, g, 4000, loop.ThreeState, a.Current.ROhm, a.Current.CF, g.CRatio, db-1, g.NoiseRMSCounts, seed)
				for sp, n := range fr.jumpsUpAt {
					up[sp] += n
				}
				for sp, n := range fr.jumpsAt {
					all[sp] += n
				}
			}
			var said []string
			for _, st := range a.DeadbandWorking.Steps {
				if st.NarrowerJumps != "" {
					said = append(said, fmt.Sprintf("%d:%s recurring=%v (up %.1f, down %.1f)", st.SetpointCounts, st.NarrowerJumps, st.Recurring, st.ChargeCounts, st.DischargeCounts))
				}
				if !st.Recurring {
					continue
				}
				checked++
				if up[st.SetpointCounts] == 0 {
					t.Errorf("band %d: no upward jumps at sp %d; the working says the %s jumps it again and again", db-1, st.SetpointCounts, st.NarrowerJumps)
				}
			}
			t.Logf("db %d, claims %s, jumps at db-1 %v (upward %v)", db, strings.Join(said, ", "), all, up)
		})
	}
	if checked == 0 {
		t.Error("no capture has a setpoint where the working says the narrower band is jumped again and again: the check checked nothing")
	}
}

// On each capture, every suggested pair that the advice says meets the goals still meets
// them in runs with other seeds and at least 1 LSB rms of noise (the measured noise when
// it is larger).
func TestCapturesSuggestionsMeetGoals(t *testing.T) {
	for _, f := range captures(t) {
		t.Run(filepath.Base(f), func(t *testing.T) {
			a, err := FromSummary(summarize(t, f), Goals{})
			if err != nil {
				t.Fatal(err)
			}
			g := a.Goals
			noise := math.Max(g.NoiseRMSCounts, 1)
			for _, c := range a.Candidates {
				if !c.MeetsGoals {
					continue
				}
				for _, seed := range []uint64{501, 502} {
					fr := freshRun(t, g, c.WindowSamples, modeOf(g), c.ROhm, c.CF, g.CRatio, c.DeadbandCounts, noise, seed)
					if fr.ripplePP > g.RipplePPV || fr.settleS > g.SettleS {
						t.Errorf("R=%g C=%g band %d seed %d noise %.2f: ripple %.4g V (goal %.4g), settle %.4g s (goal %.4g)",
							c.ROhm, c.CF, c.DeadbandCounts, seed, noise, fr.ripplePP, g.RipplePPV, fr.settleS, g.SettleS)
					}
				}
			}
		})
	}
}
