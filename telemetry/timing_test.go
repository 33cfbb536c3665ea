package telemetry

import (
	"fmt"
	"math"
	"strings"
	"testing"
)

func TestTiming(t *testing.T) {
	// tSeq builds samples with board times t0 + cumulative diffs.
	tSeq := func(diffs ...int64) []Sample {
		s := []Sample{{T: 1000, Flags: HasT}}
		for _, d := range diffs {
			s = append(s, Sample{T: s[len(s)-1].T + d, Flags: HasT})
		}
		return s
	}
	repeat := func(n int, d ...int64) []int64 {
		var out []int64
		for range n {
			out = append(out, d...)
		}
		return out
	}
	var coarse []int64
	for d := int64(2000); d < 4500; d++ {
		coarse = append(coarse, d)
	}
	tests := []struct {
		name    string
		samples []Sample
		meta    Meta
		want    TimingResult
		tol     float64 // absolute, seconds, on PeriodS and JitterS
	}{
		{
			name:    "steady t",
			samples: tSeq(repeat(99, 1000)...),
			want:    TimingResult{PeriodS: 1e-3, From: "t", Intervals: 99},
		},
		{
			// 50 diffs of 990 µs and 50 of 1010 µs: median (990+1010)/2, population
			// standard deviation 10 µs, peak to peak 20 µs (closed form).
			name:    "alternating jitter",
			samples: tSeq(repeat(50, 990, 1010)...),
			want:    TimingResult{PeriodS: 1e-3, From: "t", JitterS: 10e-6, JitterPPS: 20e-6, Intervals: 100},
			tol:     1e-12,
		},
		{
			name:    "gap of two samples from t",
			samples: tSeq(append(repeat(10, 1000), append([]int64{3000}, repeat(10, 1000)...)...)...),
			want:    TimingResult{PeriodS: 1e-3, From: "t", Gaps: 2, GapEvents: 1, Intervals: 21},
		},
		{
			name:    "backstep after reset is left out",
			samples: append(tSeq(repeat(10, 500)...), tSeq(repeat(10, 500)...)...),
			want:    TimingResult{PeriodS: 500e-6, From: "t", Intervals: 20, Backsteps: 1},
		},
		{
			name: "gaps from n win over t",
			samples: []Sample{
				{T: 0, N: 0, Flags: HasT | HasN}, {T: 1000, N: 1, Flags: HasT | HasN},
				{T: 2000, N: 5, Flags: HasT | HasN}, {T: 3000, N: 6, Flags: HasT | HasN},
			},
			want: TimingResult{PeriodS: 1e-3, From: "t", Gaps: 3, GapEvents: 1, Intervals: 3},
		},
		{
			name:    "period from meta",
			samples: []Sample{{SP: 1}, {SP: 2}},
			meta:    Meta{Period: 2e-3, Set: FieldPeriod},
			want:    TimingResult{PeriodS: 2e-3, From: "period_us"},
		},
		{
			name:    "period from host times",
			samples: []Sample{{Host: 0, Flags: HasHost}, {Host: 1e6, Flags: HasHost}, {Host: 4e6, Flags: HasHost}},
			want:    TimingResult{PeriodS: 2e-3, From: "host"},
			tol:     1e-15,
		},
		{
			name:    "nothing known",
			samples: []Sample{{SP: 1}},
			want:    TimingResult{},
		},
		{
			// 2500 distinct differences 2000..4499 µs overflow the histogram, which merges
			// bins to 2 µs. Exact figures of the discrete uniform distribution: median
			// 3249.5 µs, standard deviation sqrt((2500^2-1)/12) = 721.69 µs, peak to peak 2499 µs.
			name:    "coarsened histogram",
			samples: tSeq(coarse...),
			want:    TimingResult{PeriodS: 3249.5e-6, From: "t", Intervals: 2500, JitterS: 721.69e-6, JitterPPS: 2499e-6},
			tol:     2e-6,
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			var tm Timing
			tm.SetMeta(tc.meta)
			for _, s := range tc.samples {
				tm.Add(s)
			}
			got := tm.Result()
			if math.Abs(got.PeriodS-tc.want.PeriodS) > tc.tol || got.From != tc.want.From {
				t.Errorf("period = %g s from %q, want %g s from %q", got.PeriodS, got.From, tc.want.PeriodS, tc.want.From)
			}
			if math.Abs(got.JitterS-tc.want.JitterS) > tc.tol || math.Abs(got.JitterPPS-tc.want.JitterPPS) > tc.tol {
				t.Errorf("jitter = %g s (pp %g s), want %g s (pp %g s)", got.JitterS, got.JitterPPS, tc.want.JitterS, tc.want.JitterPPS)
			}
			if got.Gaps != tc.want.Gaps || got.GapEvents != tc.want.GapEvents {
				t.Errorf("gaps = %d in %d places, want %d in %d", got.Gaps, got.GapEvents, tc.want.Gaps, tc.want.GapEvents)
			}
			if got.Intervals != tc.want.Intervals || got.Backsteps != tc.want.Backsteps {
				t.Errorf("intervals = %d, backsteps = %d, want %d, %d", got.Intervals, got.Backsteps, tc.want.Intervals, tc.want.Backsteps)
			}
			if len(tm.hist) > timingBins {
				t.Errorf("histogram holds %d bins, want at most %d", len(tm.hist), timingBins)
			}
		})
	}
}

func TestTimingResultRepeatable(t *testing.T) {
	var tm Timing
	for k := range 10 {
		tm.Add(Sample{T: int64(k) * 1000, Flags: HasT})
	}
	a := tm.Result()
	b := tm.Result()
	if a != b {
		t.Errorf("second Result = %+v, first %+v", b, a)
	}
	for k := 10; k < 20; k++ {
		tm.Add(Sample{T: int64(k) * 1000, Flags: HasT})
	}
	if got := tm.Result(); got.Intervals != 19 || got.PeriodS != 1e-3 {
		t.Errorf("after more samples: %+v, want 19 intervals of 1 ms", got)
	}
}

func ExampleTiming() {
	// A board that samples about every 1000 µs with some jitter and loses two lines:
	// differences 1005, 990, 1005, 3000, 1005 µs. Median 1005 µs; without the gap the
	// differences have a population standard deviation of sqrt(168.75/4) = 6.5 µs.
	in := "t=0 sp=512 pv=500\nt=1005 sp=512 pv=501\nt=1995 sp=512 pv=502\n" +
		"t=3000 sp=512 pv=503\nt=6000 sp=512 pv=504\nt=7005 sp=512 pv=505\n"
	sc := NewScanner(strings.NewReader(in))
	var tm Timing
	for sc.Scan() {
		if sc.Kind() == RecSample {
			tm.Add(sc.Sample())
		}
	}
	r := tm.Result()
	fmt.Printf("period %.0f µs from %s, jitter %.1f µs rms, %.0f µs peak to peak, %d samples missing\n",
		r.PeriodS*1e6, r.From, r.JitterS*1e6, r.JitterPPS*1e6, r.Gaps)
	// Output:
	// period 1005 µs from t, jitter 6.5 µs rms, 15 µs peak to peak, 2 samples missing
}
