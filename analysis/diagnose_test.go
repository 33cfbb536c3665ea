package analysis

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/caploop/caploop/analysis/loop"
	"github.com/caploop/caploop/telemetry"
)

func hasDiag(s *Summary, code string) bool {
	for _, d := range s.Diagnostics {
		if d.Code == code {
			return true
		}
	}
	return false
}

var meta10 = telemetry.Meta{Vref: 5, ADCBits: 10, Mode: telemetry.TwoState,
	Set: telemetry.FieldVref | telemetry.FieldADCBits | telemetry.FieldMode}

// TestDiagnostics feeds streams made to show one fault each and checks that the
// diagnostic appears (and does not on a clean stream).
func TestDiagnostics(t *testing.T) {
	cases := []struct {
		name string
		feed func(a *Accumulator)
		want []string
		not  []string
	}{
		{"clean two-state", func(a *Accumulator) {
			a.SetMeta(meta10)
			for k := range 2000 {
				pv := 500.0 + float64(k%2)
				a.Add(telemetry.Sample{Index: int64(k), T: int64(k) * 1000, SP: 500.5, PV: pv, U: telemetry.Drive(1 - 2*(k%2)), Flags: telemetry.HasT | telemetry.HasU})
			}
		}, nil, []string{DiagPeriodBelowADC, DiagRailSaturation, DiagDroppedSamples, DiagJitter, DiagInferredDrive, DiagNoPeriod}},
		{"period below the ADC conversion time", func(a *Accumulator) {
			a.SetMeta(meta10)
			for k := range 2000 {
				a.Add(telemetry.Sample{Index: int64(k), T: int64(k) * 50, SP: 500, PV: 500, Flags: telemetry.HasT})
			}
		}, []string{DiagPeriodBelowADC, DiagInferredDrive}, nil},
		{"rail saturation", func(a *Accumulator) {
			a.SetMeta(meta10)
			for k := range 2000 {
				a.Add(telemetry.Sample{Index: int64(k), T: int64(k) * 1000, SP: 1020, PV: 1023, U: 1, Flags: telemetry.HasT | telemetry.HasU})
			}
		}, []string{DiagRailSaturation}, nil},
		{"dropped samples from n", func(a *Accumulator) {
			a.SetMeta(meta10)
			n := int64(0)
			for k := range 2000 {
				n++
				if k%100 == 99 {
					n += 3
				}
				a.Add(telemetry.Sample{Index: int64(k), N: n, SP: 500, PV: 500, U: 0, Flags: telemetry.HasN | telemetry.HasU})
			}
		}, []string{DiagDroppedSamples, DiagNoPeriod}, nil},
		{"jitter", func(a *Accumulator) {
			a.SetMeta(meta10)
			rng := rand.New(rand.NewPCG(1, 2))
			for k := range 2000 {
				tj := int64(k)*1000 + int64(100*rng.NormFloat64())
				a.Add(telemetry.Sample{Index: int64(k), T: tj, SP: 500, PV: 500, U: 0, Flags: telemetry.HasT | telemetry.HasU})
			}
		}, []string{DiagJitter}, []string{DiagDroppedSamples}},
		{"missing code in a sweep", func(a *Accumulator) {
			a.SetMeta(meta10)
			k := 0
			for range 20 {
				for c := 0; c < 1024; c++ {
					pv := float64(c)
					if c == 500 {
						pv = 501
					}
					a.Add(telemetry.Sample{Index: int64(k), T: int64(k) * 1000, SP: 0, PV: pv, U: 1, Flags: telemetry.HasT | telemetry.HasU})
					k++
				}
			}
		}, []string{DiagMissingCodes}, nil},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			a := New(Options{})
			tc.feed(a)
			s := a.Summary()
			for _, c := range tc.want {
				if !hasDiag(s, c) {
					t.Errorf("diagnostic %s missing; got %+v", c, s.Diagnostics)
				}
			}
			for _, c := range tc.not {
				if hasDiag(s, c) {
					t.Errorf("diagnostic %s present, want none; got %+v", c, s.Diagnostics)
				}
			}
		})
	}
}

// TestMissingCodeFound checks the code histogram finds the one code a sweep skipped.
func TestMissingCodeFound(t *testing.T) {
	a := New(Options{})
	a.SetMeta(meta10)
	k := 0
	for range 20 {
		for c := 0; c < 1024; c++ {
			if c == 700 {
				continue
			}
			a.Add(telemetry.Sample{Index: int64(k), SP: 0, PV: float64(c), U: 1, Flags: telemetry.HasU})
			k++
		}
	}
	got := a.Summary().Plant.MissingCodes
	if len(got) != 1 || got[0] != 700 {
		t.Errorf("missing codes: got %v, want [700]", got)
	}
}

// TestLoopDiagnostics runs the loop model into chatter made by noise and into a droop
// faster than the band.
func TestLoopDiagnostics(t *testing.T) {
	cases := []struct {
		name string
		cfg  loop.Config
		want string
	}{
		{"noise chatter: 3 counts rms against a ±3 count band, no load",
			loop.Config{Circuit: loop.Circuit{Supply: 5, R: 47e3, C: 10e-6}, ADC: loop.ADC{Vref: 5, Bits: 10, Noise: 3},
				Controller: loop.Controller{Kind: loop.ThreeState, Deadband: 3}, Period: 1e-3, Seed: 5},
			DiagNoiseChatter},
		{"droop too fast: 20 kOhm load, ±4 count band",
			loop.Config{Circuit: loop.Circuit{Supply: 5, R: 10e3, C: 1e-6, Load: 20e3}, ADC: loop.ADC{Vref: 5, Bits: 10, Noise: 0.3},
				Controller: loop.Controller{Kind: loop.ThreeState, Deadband: 4}, Period: 1e-3, Seed: 6},
			DiagDroopTooFast},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			r := simulate(t, tc.cfg, square(250, 500, 2000), 12000, false)
			if !hasDiag(r.sum, tc.want) {
				t.Errorf("diagnostic %s missing; got %+v", tc.want, r.sum.Diagnostics)
			}
		})
	}
}

// TestBounded checks that lists and traces stay bounded when the setpoint changes at
// every sample, and that the Summary still counts what it left out.
func TestBounded(t *testing.T) {
	a := New(Options{MaxSegments: 100})
	a.SetMeta(meta10)
	const n = 50000
	for k := range n {
		sp := float64(200 + k%400)
		a.Add(telemetry.Sample{Index: int64(k), T: int64(k) * 1000, SP: sp, PV: sp - 1, Flags: telemetry.HasT})
	}
	s := a.Summary()
	if len(s.Segments) > 100 || len(s.Steps) > 100 {
		t.Errorf("segments %d, steps %d: want at most 100", len(s.Segments), len(s.Steps))
	}
	if s.SegmentsOmitted != n-int64(len(s.Segments)) {
		t.Errorf("segments omitted: got %d, want %d", s.SegmentsOmitted, n-int64(len(s.Segments)))
	}
	tr := s.Traces
	if len(tr.T) > 1024 || len(tr.Zoom) > maxZooms || len(tr.StepTraces) > maxStepTraces || len(tr.SpecFreq) > 1024 {
		t.Errorf("traces: %d overview, %d zooms, %d steps, %d spectrum points", len(tr.T), len(tr.Zoom), len(tr.StepTraces), len(tr.SpecFreq))
	}
	if len(tr.T) < 512 || tr.T[len(tr.T)-1] > 50 || tr.T[len(tr.T)-1] < 49 {
		t.Errorf("overview: %d buckets ending at %v s, want 512..1024 ending near 50 s", len(tr.T), tr.T[len(tr.T)-1])
	}
}

// TestSummaryRepeatable checks that Summary may be called while samples arrive and
// does not disturb the figures: the same stream summarised once at the end or many
// times along the way gives the same result.
func TestSummaryRepeatable(t *testing.T) {
	cfg := benchCfg(loop.ThreeState, 6, 1, 21)
	var samples []telemetry.Sample
	loop.Run(cfg, schedule(3000, 300, 700), 9000, func(st loop.Sample) {
		samples = append(samples, telemetry.Sample{Index: st.K, T: int64(st.T*1e6 + 0.5), SP: float64(st.SP), PV: float64(st.PV),
			U: telemetry.Drive(st.U), Flags: telemetry.HasT | telemetry.HasU})
	})
	once, often := New(Options{}), New(Options{})
	once.SetMeta(metaOf(cfg))
	often.SetMeta(metaOf(cfg))
	for i, s := range samples {
		once.Add(s)
		often.Add(s)
		if i%997 == 0 {
			often.Summary()
		}
	}
	a, b := once.Summary(), often.Summary()
	if len(a.Segments) != len(b.Segments) {
		t.Fatalf("segments: %d and %d", len(a.Segments), len(b.Segments))
	}
	for i := range a.Segments {
		x, y := a.Segments[i], b.Segments[i]
		if deref(x.RipplePPV) != deref(y.RipplePPV) || deref(x.LimitCyclePeriodS) != deref(y.LimitCyclePeriodS) ||
			x.DeadbandEntries != y.DeadbandEntries {
			t.Errorf("segment %d differs: %+v and %+v", i, x, y)
		}
	}
	if math.Abs(deref(a.Plant.TauChargeS)-deref(b.Plant.TauChargeS)) != 0 {
		t.Errorf("tau differs: %v and %v", deref(a.Plant.TauChargeS), deref(b.Plant.TauChargeS))
	}
}

// TestDeadbandChangeSplits checks that a new band on the same setpoint starts a new
// segment without a step, and that band jumps stop once the band is wide enough (the
// step near 300 counts is about 15 counts: a band of ±4 is jumped, ±9 is not).
func TestDeadbandChangeSplits(t *testing.T) {
	cfg := benchCfg(loop.ThreeState, 4, 0.5, 31)
	sim, err := loop.New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	a := New(Options{})
	m := metaOf(cfg)
	a.SetMeta(m)
	for k := range 8000 {
		if k == 4000 {
			sim.SetDeadband(9)
			m.Deadband = 9
			a.SetMeta(m)
		}
		st := sim.Next(300)
		a.Add(telemetry.Sample{Index: st.K, T: int64(st.T*1e6 + 0.5), SP: float64(st.SP), PV: float64(st.PV),
			U: telemetry.Drive(st.U), Flags: telemetry.HasT | telemetry.HasU})
	}
	s := a.Summary()
	if len(s.Segments) != 2 || len(s.Steps) != 0 {
		t.Fatalf("got %d segments and %d steps, want 2 and 0", len(s.Segments), len(s.Steps))
	}
	before, after := s.Segments[0], s.Segments[1]
	if deref(before.DeadbandCounts) != 4 || deref(after.DeadbandCounts) != 9 {
		t.Errorf("bands: got %v and %v, want 4 and 9", deref(before.DeadbandCounts), deref(after.DeadbandCounts))
	}
	if math.Abs(after.StartS-4) > 1e-9 {
		t.Errorf("second segment starts at %g s, want 4 s", after.StartS)
	}
	if before.BandJumps == 0 || after.BandJumps != 0 {
		t.Errorf("band jumps: got %d before and %d after, want some and none", before.BandJumps, after.BandJumps)
	}
}

// TestOverview checks the decimated envelope: every sample is in exactly one bucket,
// the envelope holds the extremes, and the buckets stay within their number.
func TestOverview(t *testing.T) {
	for _, n := range []int{1, 7, 1024, 1025, 5000, 100003} {
		var o overview
		o.init(64)
		lo, hi := math.Inf(1), math.Inf(-1)
		for k := range n {
			pv := float64((k * 7919) % 1000)
			lo, hi = math.Min(lo, pv), math.Max(hi, pv)
			o.add(float64(k), 0, pv)
		}
		var buckets int
		var count float64
		glo, ghi, prevT, ordered := math.Inf(1), math.Inf(-1), -1.0, true
		o.each(func(t, sp, mean, l, h float64) {
			buckets++
			glo, ghi = math.Min(glo, l), math.Max(ghi, h)
			ordered = ordered && t > prevT
			prevT = t
		})
		if !ordered {
			t.Errorf("n=%d: bucket times not increasing", n)
		}
		for i := range o.cnt {
			count += o.cnt[i]
		}
		if o.open {
			count += o.ccnt
		}
		if buckets > 64 || count != float64(n) || glo != lo || ghi != hi {
			t.Errorf("n=%d: %d buckets (max 64), %g samples, envelope [%g, %g], want %d samples in [%g, %g]", n, buckets, count, glo, ghi, n, lo, hi)
		}
	}
}
