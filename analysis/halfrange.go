package analysis

import "math"

// halfBlocks is the number of block extremes HalfRange keeps: the last half of the
// steady part is found to within 2/halfBlocks of its length.
const halfBlocks = 64

// HalfRange keeps the extremes of a growing series in blocks, so that max - min over
// its last half can be read at any time with bounded memory: when the blocks fill,
// neighbours merge in pairs and the block size doubles.
//
// The measured ripple is an extreme: max - min of noisy readings grows with the number
// of readings (the tails of the noise), where a mean or an rms does not. Read over the
// whole steady part it would depend on when the steady part began and on how long the
// capture ran; over the steady part's last half it is the loop as it runs once settled,
// the same window whatever the capture's length, and what an outside check that reads
// the segment's last half measures.
type HalfRange struct {
	lo, hi [halfBlocks]float64 // extremes of the full blocks, oldest first
	nb     int                 // full blocks
	size   int64               // readings per full block
	clo    float64             // extremes of the block being filled
	chi    float64
	cn     int64
}

// Reset empties it.
func (h *HalfRange) Reset() {
	h.nb, h.size, h.cn = 0, 1, 0
	h.clo, h.chi = math.Inf(1), math.Inf(-1)
}

// Add takes the next value.
func (h *HalfRange) Add(e float64) {
	if h.size == 0 {
		h.Reset()
	}
	h.clo, h.chi = min(h.clo, e), max(h.chi, e)
	h.cn++
	if h.cn < h.size {
		return
	}
	if h.nb == halfBlocks {
		for i := 0; i < halfBlocks/2; i++ {
			h.lo[i] = min(h.lo[2*i], h.lo[2*i+1])
			h.hi[i] = max(h.hi[2*i], h.hi[2*i+1])
		}
		h.nb = halfBlocks / 2
		h.size *= 2
		// The block just closed has the old size: it fills half of a new one.
		if h.cn < h.size {
			return
		}
	}
	h.lo[h.nb], h.hi[h.nb] = h.clo, h.chi
	h.nb++
	h.cn = 0
	h.clo, h.chi = math.Inf(1), math.Inf(-1)
}

// HalfMin is the fewest readings whose last half PP reads: a shorter series is read whole
// (the few dozen readings of a moving setpoint's segments would leave a half too short
// to hold one cycle, reading less than their robust 0.5-99.5 % spread).
const HalfMin = 128

// PP returns max - min over the last half of the n readings added (n >= 1), taking whole
// blocks from the newest back until they cover it; over all n when n < HalfMin.
func (h *HalfRange) PP(n int64) float64 {
	want := (n + 1) / 2
	if n < HalfMin {
		want = n
	}
	lo, hi := h.clo, h.chi
	got := h.cn
	for i := h.nb - 1; i >= 0 && got < want; i-- {
		lo, hi = min(lo, h.lo[i]), max(hi, h.hi[i])
		got += h.size
	}
	return hi - lo
}
