package analysis

import (
	"math"
	"slices"

	"github.com/caploop/caploop/telemetry"
)

// Time sources of the accumulator's clock, chosen from the first sample.
const (
	clockT     = 't' // board time t, ticks are microseconds
	clockN     = 'n' // sequence number n, ticks are samples
	clockIndex = 'i' // sample index, ticks are samples
)

// clock turns samples into ticks (a monotonic time axis), measures the sample period
// and its jitter, and counts gaps. Bounded memory: the period comes from the median of the
// first 31 intervals, the jitter from running sums.
type clock struct {
	src      byte
	started  bool
	base     float64 // tick of the current time origin (after a board reset)
	t0, n0   int64
	i0       int64
	prevT    int64
	prevN    int64
	lastTick float64

	dts   [31]float64
	ndt   int
	perUS float64 // median interval of t, µs (clockT)

	jn, js, jss float64 // intervals within ±50 % of the period
	gaps        int64
	resets      int64
	nSeen       bool // clockT: the previous sample carried n (in prevN)

	// fast is set once the period is fixed (board time, the first intervals seen): an
	// interval within [lo, hi] (±50 % of the period) is then an interval of the jitter
	// sums, neither a reset nor a gap, and addRun takes that case without calling tick.
	fast   bool
	lo, hi float64

	h0, h1 int64 // first and last host time, ns
	hn     int64
	hasH   bool
}

// tick returns the tick of s and whether s follows the previous sample without a gap.
// Accumulator.addRun takes its common case (fast) itself and calls it for the rest.
func (c *clock) tick(s *telemetry.Sample) (float64, bool) {
	if s.Has(telemetry.HasHost) {
		if !c.hasH {
			c.h0, c.hasH = s.Host, true
		}
		c.h1 = s.Host
		c.hn++
	}
	if !c.started {
		c.started = true
		switch {
		case s.Has(telemetry.HasT):
			c.src, c.t0, c.prevT = clockT, s.T, s.T
			c.prevN, c.nSeen = s.N, s.Has(telemetry.HasN)
		case s.Has(telemetry.HasN):
			c.src, c.n0, c.prevN = clockN, s.N, s.N
		default:
			c.src, c.i0 = clockIndex, s.Index
		}
		c.lastTick = 0
		return 0, false
	}
	contiguous := true
	var tk float64
	switch c.src {
	case clockT:
		if !s.Has(telemetry.HasT) {
			tk = c.lastTick + c.periodTicks()
			break
		}
		dt := float64(s.T - c.prevT)
		c.prevT = s.T
		if c.ndt < len(c.dts) && dt > 0 {
			c.dts[c.ndt] = dt
			c.ndt++
			c.perUS = median(c.dts[:c.ndt])
			if c.ndt == len(c.dts) && c.perUS > 0 {
				// The same bounds as the switch below: dt in [0.5 p, 1.5 p] is an
				// interval of the jitter sums (and neither a reset nor a gap).
				c.fast, c.lo, c.hi = true, 0.5*c.perUS, 1.5*c.perUS
			}
		}
		p := c.perUS
		// A sequence number that restarts (n back to 0 or lower) is a reset too, even
		// if t looks plausible.
		nBack := false
		if s.Has(telemetry.HasN) {
			nBack = c.nSeen && s.N < c.prevN
			c.prevN, c.nSeen = s.N, true
		}
		switch {
		case dt <= 0 || (p > 0 && dt > 1e4*p) || nBack:
			// Board reset or a wild jump: start a new time origin one period on.
			c.resets++
			c.base = c.lastTick + p
			c.t0 = s.T
			contiguous = false
		case p > 0 && dt > 1.5*p:
			c.gaps += int64(math.Round(dt/p)) - 1
			contiguous = false
		case p > 0 && dt >= 0.5*p:
			c.jn++
			c.js += dt
			c.jss += dt * dt
		}
		tk = c.base + float64(s.T-c.t0)
	case clockN:
		if !s.Has(telemetry.HasN) {
			tk = c.lastTick + 1
			break
		}
		dn := s.N - c.prevN
		c.prevN = s.N
		switch {
		case dn <= 0 || dn > 1<<20:
			c.resets++
			c.base = c.lastTick + 1
			c.n0 = s.N
			contiguous = false
		case dn > 1:
			c.gaps += dn - 1
			contiguous = false
		}
		tk = c.base + float64(s.N-c.n0)
	default:
		tk = float64(s.Index - c.i0)
	}
	c.lastTick = tk
	return tk, contiguous
}

// periodTicks returns one sample period in ticks (1 for sample-counting clocks).
func (c *clock) periodTicks() float64 {
	if c.src == clockT {
		if c.perUS > 0 {
			return c.perUS
		}
		return 1
	}
	return 1
}

// seconds returns the seconds per tick, the sample period in seconds and where it came
// from, given the meta lines; NaN when unknown.
func (c *clock) seconds(m telemetry.Meta) (perTick, period float64, from string) {
	if c.src == clockT {
		if c.perUS > 0 {
			return 1e-6, c.perUS * 1e-6, "t"
		}
		if m.Has(telemetry.FieldPeriod) && m.Period > 0 {
			return 1e-6, m.Period, "period_us"
		}
		return 1e-6, math.NaN(), ""
	}
	if m.Has(telemetry.FieldPeriod) && m.Period > 0 {
		return m.Period, m.Period, "period_us"
	}
	if c.hasH && c.hn > 1 && c.h1 > c.h0 {
		p := float64(c.h1-c.h0) * 1e-9 / float64(c.hn-1)
		return p, p, "host"
	}
	return math.NaN(), math.NaN(), ""
}

// jitter returns the rms deviation of the sample intervals from their mean, in seconds
// (board time only), NaN when unknown.
func (c *clock) jitter() float64 {
	if c.src != clockT || c.jn < 2 {
		return math.NaN()
	}
	m := c.js / c.jn
	v := c.jss/c.jn - m*m
	if v < 0 {
		v = 0
	}
	return math.Sqrt(v) * 1e-6
}

func median(v []float64) float64 {
	w := slices.Clone(v)
	slices.Sort(w)
	return w[len(w)/2]
}
