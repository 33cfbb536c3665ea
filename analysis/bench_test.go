package analysis

import (
	"bytes"
	"testing"

	"github.com/caploop/caploop/analysis/loop"
	"github.com/caploop/caploop/telemetry"
)

// benchSamples returns n samples of a three-state loop with 1 LSB noise stepping between
// three setpoints, as a board would send them.
func benchSamples(b *testing.B, n int) []telemetry.Sample {
	b.Helper()
	out := make([]telemetry.Sample, 0, n)
	err := loop.Run(benchCfg(loop.ThreeState, 6, 1, 1), schedule(3000, 300, 600, 800), int64(n), func(st loop.Sample) {
		out = append(out, telemetry.Sample{
			Index: st.K, T: int64(st.T*1e6 + 0.5), N: st.K, SP: float64(st.SP), PV: float64(st.PV),
			U: telemetry.Drive(st.U), Flags: telemetry.HasT | telemetry.HasN | telemetry.HasU,
		})
	})
	if err != nil {
		b.Fatal(err)
	}
	return out
}

// BenchmarkAccumulator measures Add per sample with every metric on (ns/op is ns per
// sample); the segment closes every 3000 samples, so their cost is included.
func BenchmarkAccumulator(b *testing.B) {
	const n = 1 << 20
	samples := benchSamples(b, n)
	m := metaOf(benchCfg(loop.ThreeState, 6, 1, 1))
	b.ReportAllocs()
	b.ResetTimer()
	var acc *Accumulator
	for i := 0; i < b.N; i++ {
		if i%n == 0 {
			acc = New(Options{})
			acc.SetMeta(m)
		}
		s := samples[i%n]
		s.Index = int64(i)
		acc.Add(s)
	}
}

// BenchmarkAccumulatorBatch measures the analysing side of Summarize per sample: the
// same stream as BenchmarkAccumulator handed over in batches of batchLen samples, with
// closed segments finished on the finisher's goroutine (ns/op is ns per sample).
func BenchmarkAccumulatorBatch(b *testing.B) {
	const n = 1 << 20
	samples := benchSamples(b, n)
	m := metaOf(benchCfg(loop.ThreeState, 6, 1, 1))
	b.ReportAllocs()
	b.ResetTimer()
	for done := 0; done < b.N; done += n {
		acc := New(Options{})
		acc.SetMeta(m)
		acc.startFinisher()
		for i := 0; i < n && done+i < b.N; i += batchLen {
			acc.addRun(samples[i:min(n, i+batchLen, b.N-done)])
		}
		acc.stopFinisher()
	}
}

// BenchmarkSummary measures one Summary call on an accumulator that has seen a million
// samples (the live screen calls it about ten times a second).
func BenchmarkSummary(b *testing.B) {
	samples := benchSamples(b, 1<<20)
	acc := New(Options{})
	acc.SetMeta(metaOf(benchCfg(loop.ThreeState, 6, 1, 1)))
	for _, s := range samples {
		acc.Add(s)
	}
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		acc.Summary()
	}
}

// BenchmarkAccumulatorSteady measures Add alone: one setpoint, so no segment ever closes
// (the per-sample cost without the end-of-segment spectra). It replays one batch of 8192
// samples (the size Summarize hands over) with the times moved on, so the samples come
// from the cache as they do in Summarize.
func BenchmarkAccumulatorSteady(b *testing.B) {
	const n = batchLen
	var samples []telemetry.Sample
	cfg := benchCfg(loop.ThreeState, 6, 1, 1)
	err := loop.Run(cfg, func(int64) int { return 600 }, n, func(st loop.Sample) {
		samples = append(samples, telemetry.Sample{
			Index: st.K, T: int64(st.T*1e6 + 0.5), N: st.K, SP: float64(st.SP), PV: float64(st.PV),
			U: telemetry.Drive(st.U), Flags: telemetry.HasT | telemetry.HasN | telemetry.HasU,
		})
	})
	if err != nil {
		b.Fatal(err)
	}
	acc := New(Options{})
	acc.SetMeta(metaOf(cfg))
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		s := samples[i%n]
		round := int64(i / n)
		s.Index += round * n
		s.N += round * n
		s.T += round * n * 1000
		acc.Add(s)
	}
}

// BenchmarkSummarize measures the whole-file pass (parse and analysis on two goroutines)
// over 1 Mi lines of telemetry held in memory; ns/op is per line.
func BenchmarkSummarize(b *testing.B) {
	samples := benchSamples(b, 1<<20)
	m := metaOf(benchCfg(loop.ThreeState, 6, 1, 1))
	buf := telemetry.AppendMeta(nil, m)
	buf = append(buf, '\n')
	for _, s := range samples {
		buf = telemetry.AppendData(buf, s)
		buf = append(buf, '\n')
	}
	b.SetBytes(int64(len(buf)) / int64(len(samples)))
	b.ReportAllocs()
	b.ResetTimer()
	for done := 0; done < b.N; done += len(samples) {
		sc := telemetry.NewScanner(bytes.NewReader(buf))
		if _, err := Summarize(sc, Options{}); err != nil {
			b.Fatal(err)
		}
	}
}
