package analysis

import (
	"math/rand/v2"
	"reflect"
	"testing"

	"github.com/caploop/caploop/telemetry"
)

// fastPathStream turns data into a sample stream that exercises both sides of addRun's
// inlined fast paths: board time near the period (the clock's fast case), jitter, gaps,
// resets, samples without t, samples with host time, and enough samples to fill and
// merge overview buckets.
func fastPathStream(data []byte) []telemetry.Sample {
	var ss []telemetry.Sample
	t := int64(1000)
	for i, b := range data {
		for rep := 0; rep < 1+int(b&7)*8; rep++ {
			dt := int64(1000)
			switch b >> 5 {
			case 1:
				dt += int64(b&31) * 10 // jitter inside +-50 %
			case 2:
				dt *= 3 // a gap
			case 3:
				if rep == 0 {
					dt = -t + 5 // a reset
				}
			case 4:
				dt = 480 // just outside the fast window
			}
			t += dt
			s := telemetry.Sample{Line: int64(len(ss) + 1), Index: int64(len(ss)), T: t, N: int64(len(ss)),
				SP: float64(500 + 40*(i%3)), PV: float64(400 + int(b)), U: telemetry.Drive(int(b)%3 - 1),
				Flags: telemetry.HasT | telemetry.HasU}
			if b>>5 == 5 && rep == 0 {
				s.Flags &^= telemetry.HasT
			}
			if b>>5 == 6 {
				s.Flags |= telemetry.HasHost
				s.Host = int64(len(ss)) * 1e6
			}
			ss = append(ss, s)
		}
	}
	return ss
}

// checkFastPaths feeds ss through addRun and, beside it, through the plain clock.tick
// and overview.add, and fails when the clock or the overview differ in any field.
func checkFastPaths(t *testing.T, ss []telemetry.Sample) {
	a := New(Options{TraceBuckets: 16})
	var c clock
	var o overview
	o.init(a.opts.TraceBuckets)
	for i := range ss {
		// One sample at a time, so that a reading judged a glitch is known: the
		// overview then holds the last good reading in its place.
		g := a.st.glitches.Count
		a.addRun(ss[i : i+1])
		pv := ss[i].PV
		if a.st.glitches.Count != g {
			pv = a.st.good
		}
		tick, _ := c.tick(&ss[i])
		o.add(tick, ss[i].SP, pv)
	}
	if !reflect.DeepEqual(c, a.clk) {
		t.Fatalf("clock after %d samples:\n fast path %+v\n plain     %+v", len(ss), a.clk, c)
	}
	if !reflect.DeepEqual(o, a.ov) {
		t.Fatalf("overview after %d samples:\n fast path %+v\n plain     %+v", len(ss), a.ov, o)
	}
}

// TestFastPathsMatchPlain pins addRun's hand-inlined copies of clock.tick and
// overview.add to the plain functions over random streams.
func TestFastPathsMatchPlain(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 11))
	for k := 0; k < 40; k++ {
		data := make([]byte, 20+rng.IntN(200))
		for i := range data {
			data[i] = byte(rng.Uint32())
			if rng.IntN(4) > 0 {
				data[i] &^= 0xe0 // mostly steady board time
			}
		}
		checkFastPaths(t, fastPathStream(data))
	}
}

// FuzzFastPaths is TestFastPathsMatchPlain over fuzzed streams.
func FuzzFastPaths(f *testing.F) {
	f.Add([]byte{0, 1, 2, 3, 0x20, 0x41, 0x62, 0x83, 0xa4, 0xc5, 0xe6, 7, 7, 7, 7})
	f.Fuzz(func(t *testing.T, data []byte) {
		if len(data) > 400 {
			data = data[:400]
		}
		checkFastPaths(t, fastPathStream(data))
	})
}
