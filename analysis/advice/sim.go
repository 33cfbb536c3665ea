package advice

import (
	"math"
	"sync"

	"github.com/caploop/caploop/analysis/loop"
)

// runPlan says how long a checking simulation runs.
type runPlan struct {
	settleLen int     // samples allowed for settling after each setpoint change
	window    int     // samples of steady state measured after it
	tau2      float64 // > 0: measure the output of a second RC stage of this time constant
	vScale    float64 // the levels the board regulates to, as a share of nominal (reference error); 0 = 1
}

// simResult is what one checking simulation measured.
type simResult struct {
	ripplePP float64 // largest p-p of the output over the steady windows, V (worst seed)
	settleS  float64 // slower of the up and down full-scale steps, s (worst seed)
	// Over several seeds: the mean of the per-seed figures, the stable figure to show
	// (the worst seed decides the verdict).
	rippleMean, settleMean float64
	settled                bool            // both steps settled inside the run
	staticErr              float64         // largest |mean output - setpoint| over the steady windows, V
	jumps                  int64           // band jumps (three-state) over the whole run
	jumpsAt                map[int]int64   // band jumps per setpoint
	rippleAt               map[int]float64 // ripple p-p per setpoint, V
	// readPP is the ripple as the ADC reads it: max - min of the readings (noise and
	// quantisation included) over the last half of the steady part, the largest over the setpoints, V
	// (worst seed); readMean is its mean over the seeds.
	readPP, readMean float64
}

// simulate runs the loop model through the plant's setpoint sequence: steady at the lowest
// used setpoint, a full-scale step up to the highest, a full-scale step down, then each
// other used setpoint. Settling is timed on the two full-scale steps: the time after the
// change until the output stays within tol of the setpoint. Ripple and static error come
// from the last plan.window samples of every setpoint. Every setpoint, the first too, is
// held for the settling time and the window, so the read ripple (an extreme: it grows with
// the readings counted) is read over the same span at each. Output is the sense voltage.
func simulate(cfg loop.Config, p *plant, tol float64, plan runPlan) (simResult, error) {
	cfg.V0 = p.nodeV(p.lo)
	sim, err := loop.New(cfg)
	if err != nil {
		return simResult{}, err
	}
	db := cfg.Controller.Deadband
	three := cfg.Controller.Kind == loop.ThreeState
	res := simResult{jumpsAt: map[int]int64{}, rippleAt: map[int]float64{}, settled: true}
	seq := []int{p.lo, p.hi, p.lo}
	for _, sp := range p.sps {
		if sp != p.lo && sp != p.hi {
			seq = append(seq, sp)
		}
	}
	prevE := math.NaN()
	sb := simBufs.Get().(*simBuf)
	buf, outside := sb.v[:0], sb.o[:0]
	defer func() { sb.v, sb.o = buf, outside; simBufs.Put(sb) }()
	a2 := 0.0
	if plan.tau2 > 0 {
		a2 = math.Exp(-cfg.Period / plan.tau2)
	}
	v2, prevOut := math.NaN(), math.NaN()
	for i, sp := range seq {
		n := plan.settleLen + plan.window
		if i == 0 {
			n = max(plan.settleLen, plan.window/4) + plan.window
		}
		target := p.senseV(sp)
		if plan.vScale > 0 {
			target *= plan.vScale
		}
		rr := newReadRipple(sp, db)
		outside = outside[:0]
		sum := 0.0
		buf = buf[:0]
		prevE = math.NaN()
		for k := 0; k < n; k++ {
			st := sim.Next(sp)
			out := st.Sense
			if plan.tau2 > 0 {
				// Second stage driven by the first: exact first-order update with the
				// input taken as the mean of the period's end points.
				if math.IsNaN(v2) {
					v2, prevOut = out, out
				}
				m := (prevOut + out) / 2
				v2 = m + (v2-m)*a2
				prevOut = out
				out = v2
			}
			outside = append(outside, math.Abs(out-target) > tol)
			// The readings as a summary measures them (readRipple).
			rr.add(st.PV, st.U)
			if k >= n-plan.window {
				buf = append(buf, out)
				sum += out
			}
			if three {
				e := float64(st.PV - sp)
				if (prevE < float64(-db) && e > float64(db)) || (prevE > float64(db) && e < float64(-db)) {
					res.jumps++
					res.jumpsAt[sp]++
				}
				prevE = e
			}
		}
		pp := spread(buf)
		res.rippleAt[sp] = math.Max(res.rippleAt[sp], pp)
		res.ripplePP = math.Max(res.ripplePP, pp)
		if pp, ok := rr.pp(); ok {
			res.readPP = math.Max(res.readPP, float64(pp)*p.lsb())
		}
		res.staticErr = math.Max(res.staticErr, math.Abs(sum/float64(plan.window)-target))
		if i == 1 || i == 2 {
			k := settleIndex(outside, int(RippleTail*float64(plan.window)))
			if k > n-plan.window {
				res.settled = false
			}
			res.settleS = math.Max(res.settleS, float64(k)*cfg.Period)
		}
	}
	return res, nil
}

// settleIndex is the first sample from which the output stays within the settling band
// for good, allowing at most m stray samples outside it afterwards (the same 0.5 % of the
// steady window that the ripple figure leaves out): the earliest entry into the band
// (a sample inside after one outside, or the first sample) followed by at most m samples
// outside. It is len(outside) when there is none.
func settleIndex(outside []bool, m int) int {
	n := len(outside)
	best, after := n, 0 // after = samples outside in [k, n)
	for k := n - 1; k >= 0; k-- {
		if outside[k] {
			after++
			continue
		}
		if (k == 0 || outside[k-1]) && after <= m {
			best = k
		}
	}
	return best
}

// RippleTail is the fraction of samples left out at each end when the ripple p-p is
// measured: ripple is the spread between the 0.5 % and 99.5 % points of the output over
// the steady window, so that the rarest noise-driven excursions (whose size grows with the
// length of the run, Gaussian tails) do not make the figure depend on how long one looks.
const RippleTail = 0.005

// spread returns the RippleTail-trimmed p-p of v: a histogram of 4096 bins over
// [min, max], so O(n); the error is at most (max - min) / 4096.
func spread(v []float64) float64 {
	if len(v) < 2 {
		return 0
	}
	lo, hi := v[0], v[0]
	for _, x := range v {
		lo, hi = math.Min(lo, x), math.Max(hi, x)
	}
	if hi == lo {
		return 0
	}
	cut := int(math.Floor(RippleTail * float64(len(v))))
	if cut == 0 {
		return hi - lo
	}
	if cut <= 8 {
		return smallCutSpread(v, cut)
	}
	const bins = 4096
	var h [bins]int32
	w := (hi - lo) / bins
	for _, x := range v {
		i := int((x - lo) / w)
		if i >= bins {
			i = bins - 1
		}
		h[i]++
	}
	qlo, qhi := lo, hi
	n := 0
	for i := 0; i < bins; i++ {
		n += int(h[i])
		if n > cut {
			qlo = lo + float64(i)*w
			break
		}
	}
	n = 0
	for i := bins - 1; i >= 0; i-- {
		n += int(h[i])
		if n > cut {
			qhi = lo + float64(i+1)*w
			break
		}
	}
	return math.Max(qhi-qlo, 0)
}

// smallCutSpread is the exact trimmed p-p when only a few samples (cut <= 8) are left out
// at each end: the (cut+1)-th smallest to the (cut+1)-th largest, kept in two short
// sorted lists.
func smallCutSpread(v []float64, cut int) float64 {
	var lows, highs [9]float64
	k := cut + 1
	nl, nh := 0, 0
	for _, x := range v {
		// lows ascending: the k smallest so far.
		if nl < k || x < lows[nl-1] {
			i := min(nl, k-1)
			for i > 0 && lows[i-1] > x {
				lows[i] = lows[i-1]
				i--
			}
			lows[i] = x
			nl = min(nl+1, k)
		}
		// highs descending: the k largest so far.
		if nh < k || x > highs[nh-1] {
			i := min(nh, k-1)
			for i > 0 && highs[i-1] < x {
				highs[i] = highs[i-1]
				i--
			}
			highs[i] = x
			nh = min(nh+1, k)
		}
	}
	return math.Max(highs[k-1]-lows[k-1], 0)
}

// simBuf holds the buffers of one simulate call, reused across calls (the tolerance runs
// make thousands).
type simBuf struct {
	v []float64
	o []bool
}

var simBufs = sync.Pool{New: func() any { return new(simBuf) }}

func sgn(x int) int {
	switch {
	case x > 0:
		return 1
	case x < 0:
		return -1
	}
	return 0
}
