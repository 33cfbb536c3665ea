package telemetry

import (
	"math"
	"slices"
)

// timingBins bounds the histogram of t differences. Past it, bins are merged two by two
// (resolution halves), so memory stays bounded whatever the input.
const timingBins = 2048

// Timing derives the sample period, its jitter and the missing samples from a stream of
// samples, in bounded memory. Feed it every sample with Add (and meta with SetMeta), then
// call Result as often as needed. The zero value is ready to use.
//
// The differences of the board time t go into a histogram of whole microseconds (exact
// while there are at most 2048 distinct differences, then coarser by powers of two).
// A difference of zero or less (a board reset or a reordered line) is counted as a
// backstep and left out.
type Timing struct {
	meta    Meta
	prevT   int64
	hasT    bool
	hist    map[int64]int64
	shift   uint
	run     int64 // the last difference, pending with its count, saves map work
	runN    int64
	diffs   int64
	backT   int64
	prevN   int64
	hasN    bool
	nGaps   int64
	nEvents int64
	hostN   int64
	host0   int64
	host1   int64
}

// TimingResult holds the timing figures of a stream.
type TimingResult struct {
	// PeriodS is the sample period in seconds: the median difference of t when the
	// samples carry t, else period_us from the meta lines, else the mean interval of host
	// receive times ((last - first) / (count - 1)), else 0.
	PeriodS float64
	// From says where PeriodS came from: "t", "period_us", "host" or "" (unknown).
	From string
	// JitterS is the population standard deviation, in seconds, of the t differences
	// that lie within 0.5 to 1.5 times the median (gaps and backsteps left out); 0 without t.
	JitterS float64
	// JitterPPS is the peak-to-peak spread of the same differences, in seconds.
	JitterPPS float64
	// Gaps is the number of missing samples: from the sequence number n when the samples
	// carry it (sum of n[k] - n[k-1] - 1 over forward jumps), else from t (a difference d
	// of 1.5 median or more counts round(d / median) - 1).
	Gaps int64
	// GapEvents is the number of places where samples were missing.
	GapEvents int64
	// Intervals is the number of t differences used (backsteps left out).
	Intervals int64
	// Backsteps counts t differences of zero or less.
	Backsteps int64
}

// SetMeta gives the meta lines' period to fall back on when samples carry no t.
func (tm *Timing) SetMeta(m Meta) { tm.meta = tm.meta.Merge(m) }

// Add takes one sample in stream order.
func (tm *Timing) Add(s Sample) {
	if s.Has(HasT) {
		if tm.hasT {
			d := s.T - tm.prevT
			switch {
			case d <= 0:
				tm.backT++
			case d == tm.run:
				tm.runN++
			default:
				tm.flush()
				tm.run, tm.runN = d, 1
			}
		}
		tm.prevT, tm.hasT = s.T, true
	}
	if s.Has(HasN) {
		if tm.hasN {
			if d := s.N - tm.prevN; d > 1 {
				tm.nGaps += d - 1
				tm.nEvents++
			}
		}
		tm.prevN, tm.hasN = s.N, true
	}
	if s.Has(HasHost) {
		if tm.hostN == 0 {
			tm.host0 = s.Host
		}
		tm.host1 = s.Host
		tm.hostN++
	}
}

// flush moves the pending run of equal differences into the histogram.
func (tm *Timing) flush() {
	if tm.runN == 0 {
		return
	}
	if tm.hist == nil {
		tm.hist = make(map[int64]int64)
	}
	tm.hist[tm.run>>tm.shift] += tm.runN
	tm.diffs += tm.runN
	tm.runN = 0
	for len(tm.hist) > timingBins {
		tm.shift++
		merged := make(map[int64]int64, len(tm.hist)/2+1)
		for k, c := range tm.hist {
			merged[k>>1] += c
		}
		tm.hist = merged
	}
}

// Result returns the figures for the samples added so far. Its cost depends on the
// number of histogram bins, not on the number of samples.
func (tm *Timing) Result() TimingResult {
	tm.flush() // tm.run stays, so the next equal difference starts a new run of it
	r := TimingResult{Backsteps: tm.backT, Intervals: tm.diffs}
	if tm.diffs > 0 {
		type bin struct {
			v float64 // µs, bin centre
			c int64
		}
		bins := make([]bin, 0, len(tm.hist))
		for k, c := range tm.hist {
			v := float64(k << tm.shift)
			if tm.shift > 0 {
				v += float64(int64(1)<<tm.shift) / 2
			}
			bins = append(bins, bin{v, c})
		}
		slices.SortFunc(bins, func(a, b bin) int {
			if a.v < b.v {
				return -1
			}
			if a.v > b.v {
				return 1
			}
			return 0
		})
		// Median: the middle value, or the mean of the two middle values.
		at := func(rank int64) float64 {
			for _, b := range bins {
				if rank < b.c {
					return b.v
				}
				rank -= b.c
			}
			return bins[len(bins)-1].v
		}
		med := at((tm.diffs - 1) / 2)
		if tm.diffs%2 == 0 {
			med = (med + at(tm.diffs/2)) / 2
		}
		var n, sum, sum2 float64
		lo, hi := math.Inf(1), math.Inf(-1)
		for _, b := range bins {
			switch {
			case b.v > 0.5*med && b.v < 1.5*med:
				c, x := float64(b.c), b.v-med // shifted by the median for precision
				n += c
				sum += c * x
				sum2 += c * x * x
				lo, hi = min(lo, b.v), max(hi, b.v)
			case b.v >= 1.5*med:
				r.Gaps += b.c * (int64(math.Round(b.v/med)) - 1)
				r.GapEvents += b.c
			}
		}
		if n > 0 {
			mean := sum / n
			r.JitterS = math.Sqrt(max(0, sum2/n-mean*mean)) * 1e-6
			r.JitterPPS = (hi - lo) * 1e-6
		}
		r.PeriodS, r.From = med*1e-6, "t"
	} else if tm.meta.Has(FieldPeriod) && tm.meta.Period > 0 {
		r.PeriodS, r.From = tm.meta.Period, "period_us"
	} else if tm.hostN >= 2 && tm.host1 > tm.host0 {
		r.PeriodS, r.From = float64(tm.host1-tm.host0)/float64(tm.hostN-1)*1e-9, "host"
	}
	if tm.hasN {
		r.Gaps, r.GapEvents = tm.nGaps, tm.nEvents
	}
	return r
}
