package analysis

import (
	"math"

	"github.com/caploop/caploop/telemetry"
)

// Tracking holds the figures of the samples taken while the setpoint moved in small,
// frequent steps (a ramp, a slow sine): there every sample or few start a segment of
// their own, too short for segment figures, and the loop is judged by how well the
// reading follows the moving setpoint instead.
//
// The rule (see Options.TrackSamples and Options.TrackStepCounts): a setpoint change is
// a tracking move when it is small (at most TrackStepCounts) and came less than
// TrackSamples samples after the previous change (the segment it closes was short).
// A sample is a tracking sample when the last tracking move was at most TrackSamples-1
// samples before it (counting the move's own sample) and no other setpoint change came
// since. So the first short segment of a ramp is not tracking, and tracking ends
// TrackSamples samples after the last move, or at once on a large step or a change
// after a long dwell (the turning point of a slow sine, where the setpoint dwells).
//
// The error is e = pv - sp of each tracking sample. LagS is the delay of pv behind sp
// from the error and the setpoint's slope: for pv(t) = sp(t - L), e = -L dsp/dt to first
// order, and the least-squares L over the tracking samples, without an offset, is
//
//	L = -sum(e s) / sum(s^2)   (samples)
//
// where s is the slope at each sample: the setpoint change over the samples since the
// earliest of the last 8 changes (cleared at a large step or a long dwell). A constant
// offset of the loop also counts as lag on a one-way ramp; on a ramp up and down, or a
// sine, it averages out.
type Tracking struct {
	Samples         int64    `json:"samples"`
	DurationS       *float64 `json:"duration_s"`
	Segments        int64    `json:"segments"` // segments opened by tracking moves
	MeanErrorV      *float64 `json:"mean_error_v"`
	MeanErrorCounts *float64 `json:"mean_error_counts"`
	RMSErrorV       *float64 `json:"rms_error_v"`
	RMSErrorCounts  *float64 `json:"rms_error_counts"`
	MaxAbsErrorV    *float64 `json:"max_abs_error_v"`
	MaxAbsCounts    *float64 `json:"max_abs_error_counts"`
	LagS            *float64 `json:"lag_s"`
	LagSamples      *float64 `json:"lag_samples"`
	DutyCharge      *float64 `json:"duty_charge"`
	DutyHold        *float64 `json:"duty_hold"`
	DutyDischarge   *float64 `json:"duty_discharge"`
	BandJumps       int64    `json:"band_jumps"`
	SPMinV          *float64 `json:"sp_min_v"`
	SPMaxV          *float64 `json:"sp_max_v"`
	SPMinCounts     float64  `json:"sp_min_counts"`
	SPMaxCounts     float64  `json:"sp_max_counts"`
}

// slopeMoves is the number of past setpoint changes the slope is taken over.
const slopeMoves = 8

// tracker is the streaming state of the tracking figures. Its per-sample work runs only
// on tracking samples; other samples cost the accumulator one comparison (n <= end).
type tracker struct {
	end      int64 // the last sample number (1-based) that is a tracking sample
	lastMove int64 // samples seen before the last setpoint change
	moves    int64 // tracking moves

	// the last setpoint changes (sample count before each, setpoint), for the slope
	ringN  [slopeMoves]int64
	ringSP [slopeMoves]float64
	rpos   int
	rlen   int
	slope  float64 // counts per sample

	n            int64
	sumE, sumE2  float64
	maxAbs       float64
	duty         [3]int64
	jumps        int64
	prevU        telemetry.Drive
	sawHold      bool
	spMin, spMax float64
	sumES, sumSS float64
	lastN        int64 // sample number of the previous tracking sample
}

// move records a setpoint change from -> sp at the sample after the first n samples,
// and reports whether it is a tracking move.
func (t *tracker) move(n int64, from, sp float64, o *Options) bool {
	gap := n - t.lastMove
	t.lastMove = n
	small := math.Abs(sp-from) <= o.TrackStepCounts
	if !small || gap >= int64(o.TrackSamples) {
		t.end = 0
		t.rlen, t.rpos = 0, 0
		if small {
			// A change after a long dwell starts a new run of moves.
			t.push(n, sp)
		}
		return false
	}
	if t.rlen == 0 {
		t.push(n-gap, from)
	}
	t.push(n, sp)
	old := (t.rpos - t.rlen + slopeMoves) % slopeMoves
	t.slope = (sp - t.ringSP[old]) / float64(n-t.ringN[old])
	t.end = n + int64(o.TrackSamples)
	t.moves++
	return true
}

func (t *tracker) push(n int64, sp float64) {
	t.ringN[t.rpos], t.ringSP[t.rpos] = n, sp
	t.rpos = (t.rpos + 1) % slopeMoves
	t.rlen = min(t.rlen+1, slopeMoves)
}

// add counts tracking sample number k (1-based) with error e, setpoint sp and drive u.
func (t *tracker) add(k int64, e, sp float64, u telemetry.Drive, three bool) {
	if t.n == 0 || k != t.lastN+1 {
		t.prevU = 2 // no previous tracking sample
	}
	if t.n == 0 {
		t.spMin, t.spMax = sp, sp
	}
	t.n++
	t.lastN = k
	t.sumE += e
	t.sumE2 += e * e
	if a := math.Abs(e); a > t.maxAbs {
		t.maxAbs = a
	}
	t.duty[u+1]++
	t.sawHold = t.sawHold || u == telemetry.Hold
	if t.prevU != 2 && (three || t.sawHold) && u != 0 && u == -t.prevU {
		t.jumps++
	}
	t.prevU = u
	t.spMin = min(t.spMin, sp)
	t.spMax = max(t.spMax, sp)
	t.sumES += e * t.slope
	t.sumSS += t.slope * t.slope
}

// figures converts the tracking sums, nil when no sample was a tracking sample.
func (t *tracker) figures(c conv) *Tracking {
	if t.n == 0 {
		return nil
	}
	n := float64(t.n)
	mean := t.sumE / n
	rms := math.Sqrt(t.sumE2 / n)
	tr := &Tracking{
		Samples:         t.n,
		DurationS:       ptr(n * c.period),
		Segments:        t.moves,
		MeanErrorV:      ptr(c.v(mean)),
		MeanErrorCounts: ptr(mean),
		RMSErrorV:       ptr(c.v(rms)),
		RMSErrorCounts:  ptr(rms),
		MaxAbsErrorV:    ptr(c.v(t.maxAbs)),
		MaxAbsCounts:    ptr(t.maxAbs),
		DutyCharge:      ptr(float64(t.duty[2]) / n),
		DutyHold:        ptr(float64(t.duty[1]) / n),
		DutyDischarge:   ptr(float64(t.duty[0]) / n),
		BandJumps:       t.jumps,
		SPMinV:          ptr(c.v(t.spMin)),
		SPMaxV:          ptr(c.v(t.spMax)),
		SPMinCounts:     t.spMin,
		SPMaxCounts:     t.spMax,
	}
	if t.sumSS > 0 {
		lag := -t.sumES / t.sumSS
		tr.LagSamples = ptr(lag)
		tr.LagS = ptr(lag * c.period)
	}
	return tr
}
