package analysis

import (
	"testing"

	"github.com/caploop/caploop/analysis/loop"
	"github.com/caploop/caploop/telemetry"
)

// simRun is a simulated capture with its truth: the loop model's steps next to what the
// accumulator was fed.
type simRun struct {
	cfg   loop.Config
	steps []loop.Sample
	acc   *Accumulator
	sum   *Summary
}

// metaOf returns the meta lines a board running cfg would send.
func metaOf(cfg loop.Config) telemetry.Meta {
	cfg = cfg.WithDefaults()
	m := telemetry.Meta{
		Vref: cfg.ADC.Vref, ADCBits: cfg.ADC.Bits, Period: cfg.Period,
		Supply: cfg.Circuit.Supply, R: cfg.Circuit.R, C: cfg.Circuit.C,
		Set: telemetry.FieldVref | telemetry.FieldADCBits | telemetry.FieldPeriod |
			telemetry.FieldSupply | telemetry.FieldR | telemetry.FieldC,
	}
	switch cfg.Controller.Kind {
	case loop.TwoState:
		m.Mode, m.Set = telemetry.TwoState, m.Set|telemetry.FieldMode
	case loop.ThreeState:
		m.Mode, m.Deadband = telemetry.ThreeState, float64(cfg.Controller.Deadband)
		m.Set |= telemetry.FieldMode | telemetry.FieldDeadband
	}
	return m
}

// simulate runs the loop model for n samples with setpoint sp and feeds the telemetry a
// board would send (t in µs, n, sp, pv, and u unless noU) to a new accumulator.
func simulate(t testing.TB, cfg loop.Config, sp func(k int64) int, n int64, noU bool) *simRun {
	t.Helper()
	r := &simRun{cfg: cfg.WithDefaults(), acc: New(Options{Source: "sim"})}
	r.acc.SetMeta(metaOf(cfg))
	var idx int64
	err := loop.Run(cfg, sp, n, func(st loop.Sample) {
		r.steps = append(r.steps, st)
		if st.Dropped {
			return
		}
		s := telemetry.Sample{
			Line: idx + 1, Index: idx, T: int64(st.T*1e6 + 0.5), N: st.K,
			SP: float64(st.SP), PV: float64(st.PV), U: telemetry.Drive(st.U),
			Flags: telemetry.HasT | telemetry.HasN | telemetry.HasU,
		}
		if noU {
			s.Flags &^= telemetry.HasU
			s.U = 0
		}
		idx++
		r.acc.Add(s)
	})
	if err != nil {
		t.Fatalf("loop.Run: %v", err)
	}
	r.sum = r.acc.Summary()
	return r
}

// square returns a setpoint that alternates between lo and hi every half samples.
func square(lo, hi int, half int64) func(k int64) int {
	return func(k int64) int {
		if (k/half)%2 == 0 {
			return lo
		}
		return hi
	}
}

// schedule returns a setpoint that takes the values in turn, each for every samples.
func schedule(every int64, sps ...int) func(k int64) int {
	return func(k int64) int {
		return sps[int(k/every)%len(sps)]
	}
}
