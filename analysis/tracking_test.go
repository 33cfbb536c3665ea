package analysis

import (
	"math"
	"strings"
	"testing"

	"github.com/caploop/caploop/analysis/loop"
	"github.com/caploop/caploop/telemetry"
)

// trackingSet marks the tracking samples of a setpoint array by the rule of Tracking,
// worked out over the whole array rather than streamed: sample k is tracking when the
// last setpoint change at or before k, at j, is within trackN samples (k - j < trackN),
// is at most trackStep counts, and came less than trackN samples after the change
// before it (the start of the array counts as a change).
func trackingSet(sp []float64, trackN int, trackStep float64) []bool {
	out := make([]bool, len(sp))
	prev, last := -1, 0 // the change before the last one, the last one (index)
	lastOK := false
	for k := range sp {
		if k > 0 && sp[k] != sp[k-1] {
			prev, last = last, k
			if prev < 0 {
				prev = 0
			}
			lastOK = math.Abs(sp[k]-sp[k-1]) <= trackStep && k-prev < trackN
		}
		out[k] = lastOK && k-last < trackN
	}
	return out
}

// errStats returns the mean, rms and largest |e| of pv - sp over the marked samples.
func errStats(sp, pv []float64, mark []bool) (n int64, mean, rms, maxAbs float64) {
	var s, s2 float64
	for k := range sp {
		if !mark[k] {
			continue
		}
		e := pv[k] - sp[k]
		n++
		s += e
		s2 += e * e
		maxAbs = math.Max(maxAbs, math.Abs(e))
	}
	return n, s / float64(n), math.Sqrt(s2 / float64(n)), maxAbs
}

// feedArrays feeds setpoint and reading arrays (1 ms apart, drive inferred) to a new
// accumulator and returns its Summary.
func feedArrays(sp, pv []float64) *Summary {
	a := New(Options{Source: "arrays"})
	for k := range sp {
		a.Add(telemetry.Sample{Line: int64(k + 1), Index: int64(k), T: int64(k) * 1000, N: int64(k),
			SP: sp[k], PV: pv[k], Flags: telemetry.HasT | telemetry.HasN})
	}
	return a.Summary()
}

// TestTrackingFirstOrderRamp feeds a reading that is an exact discrete first-order lag
// of a ramp setpoint, pv[k+1] = a pv[k] + (1 - a) sp[k], sp[k] = sp0 + s k. Its steady
// state is pv[k] = sp[k] - s/(1 - a) (put pv[k] = sp[k] - s L into the recursion:
// 1 - L = -a L, so L = 1/(1 - a) samples, derived here), so the lag is 1/(1 - a) samples
// and the error -s/(1 - a); the start-up transient, about one lag long, shortens the
// estimate by about L/n (0.1 % here).
func TestTrackingFirstOrderRamp(t *testing.T) {
	cases := []struct {
		name  string
		tau   float64 // samples
		slope float64 // counts per sample
	}{
		{"tau 20, 0.5 count per sample", 20, 0.5},
		{"tau 5, 0.2 count per sample", 5, 0.2},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			const n = 20000
			a := math.Exp(-1 / tc.tau)
			sp := make([]float64, n)
			pv := make([]float64, n)
			pv[0] = 200
			for k := range sp {
				sp[k] = 200 + tc.slope*float64(k)
				if k > 0 {
					pv[k] = a*pv[k-1] + (1-a)*sp[k-1]
				}
			}
			sum := feedArrays(sp, pv)
			tr := sum.Tracking
			if tr == nil {
				t.Fatal("tracking = null, want the ramp's figures")
			}
			wantLag := 1 / (1 - a)
			if got := deref(tr.LagSamples); math.Abs(got-wantLag) > 0.005*wantLag {
				t.Errorf("lag = %.4f samples, want %.4f (1/(1-a)) within 0.5 %%", got, wantLag)
			}
			if got, want := deref(tr.LagS), wantLag*1e-3; math.Abs(got-want) > 0.005*want {
				t.Errorf("lag = %.6g s, want %.6g s within 0.5 %%", got, want)
			}
			if got, want := deref(tr.MeanErrorCounts), -tc.slope*wantLag; math.Abs(got-want) > 0.005*math.Abs(want) {
				t.Errorf("mean error = %.4f counts, want %.4f (-s/(1-a)) within 0.5 %%", got, want)
			}
			// The same samples worked out from the arrays: every sample from the second
			// change (sample 1, the first change is at sample 1 after a one-sample segment).
			mark := trackingSet(sp, 32, 16)
			cnt, mean, rms, maxAbs := errStats(sp, pv, mark)
			if tr.Samples != cnt {
				t.Errorf("samples = %d, want %d", tr.Samples, cnt)
			}
			for _, c := range []struct {
				what      string
				got, want float64
			}{{"mean error", deref(tr.MeanErrorCounts), mean}, {"rms error", deref(tr.RMSErrorCounts), rms}, {"max |error|", deref(tr.MaxAbsCounts), maxAbs}} {
				if math.Abs(c.got-c.want) > 1e-9*math.Max(1, math.Abs(c.want)) {
					t.Errorf("%s = %.12g counts, want %.12g from the arrays", c.what, c.got, c.want)
				}
			}
			if tr.SPMinCounts != sp[1] || tr.SPMaxCounts != sp[n-1] {
				t.Errorf("setpoint range = [%g, %g], want [%g, %g]", tr.SPMinCounts, tr.SPMaxCounts, sp[1], sp[n-1])
			}
		})
	}
}

// simArrays returns the setpoint and reading arrays of the simulated run (no drops).
func simArrays(r *simRun) (sp, pv []float64) {
	for _, st := range r.steps {
		sp = append(sp, float64(st.SP))
		pv = append(pv, float64(st.PV))
	}
	return sp, pv
}

// delayFit returns the delay L (samples, on a grid of 0.05) and offset b that best fit
// pv[k] = ref(k - L) + b over the marked samples in least squares: a search over lags,
// independent of the accumulator's slope estimator.
func delayFit(pv []float64, mark []bool, ref func(x float64) float64, maxLag float64) float64 {
	best, bestL := math.Inf(1), math.NaN()
	for L := -maxLag; L <= maxLag; L += 0.05 {
		var s, s2, n float64
		for k := range pv {
			if !mark[k] {
				continue
			}
			d := pv[k] - ref(float64(k)-L)
			s += d
			s2 += d * d
			n++
		}
		if v := s2 - s*s/n; v < best {
			best, bestL = v, L
		}
	}
	return bestL
}

// TestTrackingSimulated runs the loop model on a ramp (up and back down) and a slow
// sine with fixed seeds and checks the tracking figures against the same figures worked
// out from the simulation's own setpoint and reading arrays: the error statistics over
// the tracking samples exactly, and the lag against a least-squares delay fit of the
// readings to the unquantised setpoint curve (a different estimator, so a tolerance).
func TestTrackingSimulated(t *testing.T) {
	tri := func(lo, hi float64, half int64) func(x float64) float64 {
		return func(x float64) float64 {
			p := math.Mod(x, float64(2*half))
			if p < float64(half) {
				return lo + (hi-lo)*p/float64(half)
			}
			return hi - (hi-lo)*(p-float64(half))/float64(half)
		}
	}
	sine := func(mid, amp, period float64) func(x float64) float64 {
		return func(x float64) float64 { return mid + amp*math.Sin(2*math.Pi*x/period) }
	}
	cases := []struct {
		name     string
		cfg      loop.Config
		curve    func(x float64) float64
		n        int64
		minShare float64 // tracking samples, at least this share of all
		lagTol   float64 // samples
		maxRMS   float64 // counts: the loop tracks within about one charge step (two-state) or the band (three-state), plus noise
	}{
		// Two-state, 1 LSB noise: a ramp of 0.4 count per sample up and down, far
		// slower than the charge step (about 10 counts per sample at mid-range).
		{"two-state ramp", benchCfg(loop.TwoState, 0, 1, 21), tri(300, 700, 1000), 4000, 0.99, 0.5, 10},
		// Three-state with a ±6 count band: a sine of ±150 counts over 4000 samples
		// (at most 0.24 count per sample); at its turning points the setpoint dwells.
		{"three-state sine", benchCfg(loop.ThreeState, 6, 1, 22), sine(500, 150, 4000), 8000, 0.85, 0.5, 8},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			// Start at the setpoint's first value, so that the figures are of tracking,
			// not of the start-up charge.
			tc.cfg.V0 = tc.curve(0) * tc.cfg.ADC.Vref / 1024
			r := simulate(t, tc.cfg, func(k int64) int { return int(math.Round(tc.curve(float64(k)))) }, tc.n, false)
			tr := r.sum.Tracking
			if tr == nil {
				t.Fatal("tracking = null, want figures")
			}
			sp, pv := simArrays(r)
			mark := trackingSet(sp, 32, 16)
			cnt, mean, rms, maxAbs := errStats(sp, pv, mark)
			if tr.Samples != cnt {
				t.Errorf("samples = %d, want %d from the arrays", tr.Samples, cnt)
			}
			if share := float64(cnt) / float64(tc.n); share < tc.minShare {
				t.Errorf("tracking share = %.3f, want at least %.2f", share, tc.minShare)
			}
			for _, c := range []struct {
				what      string
				got, want float64
			}{{"mean error", deref(tr.MeanErrorCounts), mean}, {"rms error", deref(tr.RMSErrorCounts), rms}, {"max |error|", deref(tr.MaxAbsCounts), maxAbs}} {
				if math.Abs(c.got-c.want) > 1e-9*math.Max(1, math.Abs(c.want)) {
					t.Errorf("%s = %.12g counts, want %.12g from the arrays", c.what, c.got, c.want)
				}
			}
			if rms > tc.maxRMS {
				t.Errorf("rms error = %.2f counts, want at most %g (the loop should follow)", rms, tc.maxRMS)
			}
			lsb := tc.cfg.ADC.Vref / 1024
			if got := deref(tr.RMSErrorV); math.Abs(got-rms*lsb) > 1e-12 {
				t.Errorf("rms error = %g V, want %g", got, rms*lsb)
			}
			want := delayFit(pv, mark, tc.curve, 20)
			got := deref(tr.LagSamples)
			if math.Abs(got-want) > tc.lagTol {
				t.Errorf("lag = %.2f samples, want %.2f (delay fit) within %g", got, want, tc.lagTol)
			}
			if gotS := deref(tr.LagS); math.Abs(gotS-got*1e-3) > 1e-12 {
				t.Errorf("lag = %g s, want %g s (samples x 1 ms)", gotS, got*1e-3)
			}
			t.Logf("samples %d of %d, rms %.2f counts, mean %.2f, lag %.2f samples (delay fit %.2f), duty %.3f/%.3f/%.3f, jumps %d",
				cnt, tc.n, rms, mean, got, want, deref(tr.DutyCharge), deref(tr.DutyHold), deref(tr.DutyDischarge), tr.BandJumps)
		})
	}
}

// TestTrackingNullOnSteps checks that step profiles give no tracking block: simulated
// setpoint schedules and the step captures in testdata.
func TestTrackingNullOnSteps(t *testing.T) {
	r := simulate(t, benchCfg(loop.ThreeState, 6, 1, 5), schedule(3000, 300, 600, 800), 9000, false)
	if r.sum.Tracking != nil {
		t.Errorf("stepped setpoints: tracking = %+v, want null", *r.sum.Tracking)
	}
	for _, name := range []string{"three-state-good.txt", "three-state-chatter.txt", "loaded-droop.txt", "follower-limit.txt", "dirty-stream.txt", "tuned.cap"} {
		t.Run(name, func(t *testing.T) {
			sum, _ := summarizeTestdata(t, name)
			if sum.Tracking != nil {
				t.Errorf("tracking = %+v, want null", *sum.Tracking)
			}
		})
	}
	for _, name := range []string{"two-state-ramp.txt", "noisy-sine.txt"} {
		t.Run(name, func(t *testing.T) {
			sum, _ := summarizeTestdata(t, name)
			if sum.Tracking == nil || 2*sum.Tracking.Samples < sum.Samples {
				t.Errorf("tracking = %+v, want most of the %d samples", sum.Tracking, sum.Samples)
			}
		})
	}
}

// TestTrackingDiagnosticsFold checks that the per-setpoint findings at the setpoints a
// moving setpoint passed come as one sentence per code, with the numbers: the sine
// capture (testdata/noisy-sine.txt, deadband 12 against a charge step of about 14
// counts near the top, from its truth file) makes band jumps at dozens of setpoints.
func TestTrackingDiagnosticsFold(t *testing.T) {
	sum, _ := summarizeTestdata(t, "noisy-sine.txt")
	count := map[string]int{}
	for _, d := range sum.Diagnostics {
		count[d.Code]++
		if d.Code == DiagBandTooNarrow && !strings.HasPrefix(d.Message, "While the setpoint moved") {
			t.Errorf("band_too_narrow not folded: %s", d.Message)
		}
	}
	for code, n := range count {
		if n > 1 {
			t.Errorf("%d diagnostics with code %s, want one sentence", n, code)
		}
	}
	if count[DiagBandTooNarrow] != 1 {
		t.Errorf("band_too_narrow: %d sentences, want 1 (diagnostics %+v)", count[DiagBandTooNarrow], sum.Diagnostics)
	}
}

// TestTrackingRuleEdges checks which samples count as tracking on a profile with every
// edge of the rule: a ramp, a large step (tracking ends at once), a long dwell, a
// ramp down in moves of 2 counts every 3 samples, a dwell after it (tracking ends
// TrackSamples samples after the last move), and a ramp in moves too large to count.
// The streamed figures must match the rule worked out over the whole arrays.
func TestTrackingRuleEdges(t *testing.T) {
	var sp []float64
	add := func(n int, f func(i int) float64) {
		for i := 0; i < n; i++ {
			sp = append(sp, f(i))
		}
	}
	add(300, func(i int) float64 { return 400 + float64(i/2) })     // ramp up
	add(500, func(int) float64 { return 800 })                      // large step, dwell
	add(600, func(i int) float64 { return 800 - 2*float64(i/3) })   // ramp down
	add(400, func(int) float64 { return 400 })                      // dwell
	add(300, func(i int) float64 { return 400 + 20*float64(i/10) }) // moves too large
	pv := make([]float64, len(sp))
	for k := range sp {
		// A reading a few samples behind with a deterministic wobble.
		j := max(0, k-3)
		pv[k] = sp[j] + float64((k*7)%5-2)
	}
	tr := feedArrays(sp, pv).Tracking
	if tr == nil {
		t.Fatal("tracking = null, want figures")
	}
	mark := trackingSet(sp, 32, 16)
	cnt, mean, rms, _ := errStats(sp, pv, mark)
	if tr.Samples != cnt {
		t.Errorf("samples = %d, want %d by the rule", tr.Samples, cnt)
	}
	if math.Abs(deref(tr.MeanErrorCounts)-mean) > 1e-9 || math.Abs(deref(tr.RMSErrorCounts)-rms) > 1e-9 {
		t.Errorf("mean, rms = %g, %g counts, want %g, %g", deref(tr.MeanErrorCounts), deref(tr.RMSErrorCounts), mean, rms)
	}
	for _, c := range []struct {
		k    int
		want bool
	}{
		{1, false}, {2, true}, {299, true}, // the array's start counts as a change
		{300, false}, {310, false}, // the large step ends tracking at once
		{803, false}, {805, false}, {806, true}, {1399, true}, // the first move after the dwell is not tracking, the next is
		{1400 + 31, true}, {1400 + 32, false}, // the last move, at 1400, counts for 32 samples
		{1800 + 50, false}, // moves of 20 counts
	} {
		if mark[c.k] != c.want {
			t.Errorf("sample %d tracking = %v by the rule, want %v", c.k, mark[c.k], c.want)
		}
	}
	// The highest tracking setpoint is 796, at the second move down (800 is a dwell).
	if tr.SPMinCounts != 400 || tr.SPMaxCounts != 796 {
		t.Errorf("setpoint range = [%g, %g] counts, want [400, 796]", tr.SPMinCounts, tr.SPMaxCounts)
	}
}
