// Package gen makes telemetry for the screen's tests and benchmarks: an endless-looking
// stream from the loop model, made on the fly in constant memory.
package gen

import (
	"io"

	"github.com/caploop/caploop/analysis/loop"
	"github.com/caploop/caploop/telemetry"
)

// Source is a telemetry stream made by the loop model: meta lines, then n data lines
// "t= n= sp= pv= u=" of a three-state loop (47 kΩ, 1 µF, 10-bit, 5 V, deadband 4) at the
// given sample period, stepping between setpoints 400 and 600 every second.
type Source struct {
	sim    *loop.Sim
	n, k   int64
	period float64
	buf    []byte
	off    int
	meta   bool
}

// NewSource returns a stream of n samples at the given period, in seconds.
func NewSource(n int64, period float64) (*Source, error) {
	sim, err := loop.New(loop.Config{
		Circuit:    loop.Circuit{Supply: 5, R: 47e3, C: 1e-6, Load: 1e6},
		ADC:        loop.ADC{Vref: 5, Bits: 10, Noise: 0.5},
		Controller: loop.Controller{Kind: loop.ThreeState, Deadband: 4},
		Period:     period,
		Seed:       3,
		V0:         1,
	})
	if err != nil {
		return nil, err
	}
	return &Source{sim: sim, n: n, period: period}, nil
}

// Name returns "generated".
func (g *Source) Name() string { return "generated" }

// Close does nothing.
func (g *Source) Close() error { return nil }

// Read fills p with the next lines.
func (g *Source) Read(p []byte) (int, error) {
	if g.off >= len(g.buf) {
		g.buf, g.off = g.buf[:0], 0
		if !g.meta {
			g.meta = true
			g.buf = telemetry.AppendMeta(g.buf, telemetry.Meta{Vref: 5, ADCBits: 10, Period: g.period, Mode: telemetry.ThreeState, Deadband: 4,
				Set: telemetry.FieldVref | telemetry.FieldADCBits | telemetry.FieldPeriod | telemetry.FieldMode | telemetry.FieldDeadband})
			g.buf = append(g.buf, '\n')
		}
		per := int64(1 / g.period) // samples per second
		for i := 0; i < 512 && g.k < g.n; i++ {
			sp := 400
			if (g.k/per)%2 == 1 {
				sp = 600
			}
			st := g.sim.Next(sp)
			g.buf = telemetry.AppendData(g.buf, telemetry.Sample{
				T: int64(float64(g.k) * g.period * 1e6), N: g.k, SP: float64(sp), PV: float64(st.PV), U: st.U,
				Flags: telemetry.HasT | telemetry.HasN | telemetry.HasU,
			})
			g.buf = append(g.buf, '\n')
			g.k++
		}
		if len(g.buf) == 0 {
			return 0, io.EOF
		}
	}
	n := copy(p, g.buf[g.off:])
	g.off += n
	return n, nil
}
