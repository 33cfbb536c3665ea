package tui

import "github.com/caploop/caploop/tui/live"

// Ring is a fixed-capacity buffer of the newest points: the retained window the plot can
// scroll back through. Memory is capacity * 24 bytes whatever the session length.
type Ring struct {
	buf   []live.Point
	start int // index of the oldest point
	n     int
}

// NewRing returns a ring that keeps the newest capacity points (at least 16).
func NewRing(capacity int) *Ring {
	if capacity < 16 {
		capacity = 16
	}
	return &Ring{buf: make([]live.Point, capacity)}
}

// Cap returns the capacity.
func (r *Ring) Cap() int { return len(r.buf) }

// Len returns how many points the ring holds.
func (r *Ring) Len() int { return r.n }

// Reset empties the ring.
func (r *Ring) Reset() { r.start, r.n = 0, 0 }

// Push appends p, dropping the oldest point when full.
func (r *Ring) Push(p live.Point) {
	if r.n < len(r.buf) {
		r.buf[(r.start+r.n)%len(r.buf)] = p
		r.n++
		return
	}
	r.buf[r.start] = p
	r.start = (r.start + 1) % len(r.buf)
}

// At returns the i-th point, 0 being the oldest. It panics when i is out of range.
func (r *Ring) At(i int) live.Point {
	if i < 0 || i >= r.n {
		panic("tui: ring index out of range")
	}
	return r.buf[(r.start+i)%len(r.buf)]
}

// Last returns the newest point and whether there is one.
func (r *Ring) Last() (live.Point, bool) {
	if r.n == 0 {
		return live.Point{}, false
	}
	return r.At(r.n - 1), true
}

// Search returns the index of the first point with T >= t (Len when none), by binary
// search: points arrive in time order.
func (r *Ring) Search(t float64) int {
	lo, hi := 0, r.n
	for lo < hi {
		m := int(uint(lo+hi) >> 1)
		if r.At(m).T < t {
			lo = m + 1
		} else {
			hi = m
		}
	}
	return lo
}

// Slice appends the points with from <= T < to to dst and returns it.
func (r *Ring) Slice(dst []live.Point, from, to float64) []live.Point {
	for i := r.Search(from); i < r.n; i++ {
		p := r.At(i)
		if p.T >= to {
			break
		}
		dst = append(dst, p)
	}
	return dst
}
