package advice

import (
	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/loop"
)

// readRipple measures the ripple of the readings over one setpoint as a summary does
// (package analysis): the steady part starts at the first reading inside the band (or
// across the setpoint), and again at the first drive onset after that (the level is then
// in its limit cycle); a loop that rests (the drive never switched in the steady part,
// switched at most once into each drive, or sat in one drive over more than the last half
// of it) and has sat in one drive for at least 32 readings shows the ripple of that end
// run, after its last transient.
type readRipple struct {
	db, sp       int
	k            int // readings seen
	firstSign    int
	steady       bool
	firm         bool
	reachK       int
	prevU        loop.Drive
	sn           int                // steady readings
	half         analysis.HalfRange // the readings' extremes, for max - min over the steady part's last half
	endRun       int                // readings with the same drive at the end
	endLo, endHi int
	switches     int    // drive changes in the steady part
	onsets       [2]int // charge and discharge onsets in the steady part
}

func newReadRipple(sp, db int) readRipple {
	return readRipple{sp: sp, db: db}
}

// add takes one reading and the drive chosen after it.
func (r *readRipple) add(pv int, u loop.Drive) {
	e := pv - r.sp
	r.k++
	if r.k == 1 {
		r.firstSign = sgn(e)
	}
	if !r.steady && ((e >= -r.db && e <= r.db) || (r.k > 1 && sgn(e) != r.firstSign)) {
		r.steady, r.reachK = true, r.k
	}
	restart := r.steady && !r.firm && r.k > r.reachK && u != r.prevU && u != loop.Hold
	if restart {
		r.firm, r.sn, r.switches, r.onsets = true, 0, 0, [2]int{}
	}
	if r.k > 1 && u == r.prevU {
		r.endRun++
		r.endLo, r.endHi = min(r.endLo, pv), max(r.endHi, pv)
	} else {
		r.endRun, r.endLo, r.endHi = 1, pv, pv
	}
	if r.steady {
		if r.sn == 0 {
			r.half.Reset()
		}
		r.sn++
		r.half.Add(float64(pv))
		if (r.sn > 1 && u != r.prevU) || restart {
			if !restart {
				r.switches++
			}
			switch u {
			case loop.Charge:
				r.onsets[0]++
			case loop.Discharge:
				r.onsets[1]++
			}
		}
	}
	r.prevU = u
}

// pp returns the p-p of the readings in counts, and false without a steady part.
func (r *readRipple) pp() (int, bool) {
	if r.sn == 0 {
		return 0, false
	}
	rests := r.switches == 0 || (r.onsets[0] < 2 && r.onsets[1] < 2) || (r.sn >= 32 && 2*r.endRun > r.sn)
	rests = rests || (r.firm && r.onsets[0] <= 2 && r.onsets[1] <= 2 && r.onsets[0]+r.onsets[1] <= 3)
	if rests && r.endRun >= 32 && r.endRun < r.sn {
		return r.endHi - r.endLo, true
	}
	return int(r.half.PP(int64(r.sn))), true
}
