package loop

import (
	"testing"
)

// benchSim runs b.N samples of cfg through Next and reports ns/sample and samples/s.
func benchSim(b *testing.B, cfg Config, sp int) {
	s, err := New(cfg)
	if err != nil {
		b.Fatal(err)
	}
	var sink int
	b.ReportAllocs()
	b.ResetTimer()
	for range b.N {
		st := s.Next(sp)
		sink += st.PV
	}
	b.StopTimer()
	if sink < 0 {
		b.Fatal("impossible")
	}
	sec := b.Elapsed().Seconds()
	b.ReportMetric(sec*1e9/float64(b.N), "ns/sample")
	b.ReportMetric(float64(b.N)/sec, "samples/s")
}

// BenchmarkSim measures the simulator: at least 20 million samples per second on one
// core is the target (go test -bench Sim -cpu 1 ./analysis/loop/).
func BenchmarkSim(b *testing.B) {
	base := bench()
	base.Controller = Controller{Kind: ThreeState, Deadband: 3}
	b.Run("three-state", func(b *testing.B) { benchSim(b, base, 512) })

	two := base
	two.Controller = Controller{Kind: TwoState}
	b.Run("two-state", func(b *testing.B) { benchSim(b, two, 512) })

	noisy := base
	noisy.ADC.Noise = 1.5
	noisy.DropRate = 0.01
	noisy.Circuit.Load = 470e3
	noisy.Circuit.Leak = 10e6
	b.Run("noise-drops-load", func(b *testing.B) { benchSim(b, noisy, 512) })

	fol := noisy
	fol.Circuit.Follower = Follower{VBE: 0.65, RE: 10e3}
	b.Run("follower", func(b *testing.B) { benchSim(b, fol, 400) })

	jit := fol
	jit.Jitter = 20e-6
	b.Run("follower-jitter", func(b *testing.B) { benchSim(b, jit, 400) })

	b.Run("Run", func(b *testing.B) {
		var n int
		if err := Run(noisy, func(int64) int { return 512 }, int64(b.N), func(s Sample) { n += s.PV }); err != nil {
			b.Fatal(err)
		}
		sec := b.Elapsed().Seconds()
		b.ReportMetric(sec*1e9/float64(b.N), "ns/sample")
		b.ReportMetric(float64(b.N)/sec, "samples/s")
	})
}
