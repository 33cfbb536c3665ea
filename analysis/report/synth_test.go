package report

import (
	"math"
	"math/cmplx"
	"math/rand/v2"

	"gonum.org/v1/gonum/dsp/fourier"

	"github.com/caploop/caploop/analysis"
)

// synthCase describes a synthetic bench run: a three-state loop on an RC with the given
// parts, stepping through setpoints. It stands in for the accumulator's output so that
// the report can be tested on its own.
type synthCase struct {
	name      string
	r, c      float64   // ohm, farad
	db        float64   // deadband half-width, counts
	setpoints []float64 // counts, each held for hold seconds
	hold      float64   // s
	seed      uint64
}

func ptr[T any](v T) *T { return &v }

// synth simulates the loop (exact first-order update per period, 10-bit ADC at 5 V,
// 1 ms period, 0.4 count rms noise) and fills a Summary with its traces and figures.
func synth(sc synthCase) Capture {
	const (
		vref   = 5.0
		bits   = 10
		period = 1e-3
		vs     = 5.0
	)
	lsbV := vref / 1024
	tau := sc.r * sc.c
	a := math.Exp(-period / tau)
	rng := rand.New(rand.NewPCG(sc.seed, 7))
	perSeg := int(sc.hold / period)
	n := perSeg * len(sc.setpoints)
	t := make([]float64, n)
	sp := make([]float64, n)
	pv := make([]float64, n)
	u := make([]float64, n)
	v := 0.0
	for k := 0; k < n; k++ {
		t[k] = float64(k) * period
		sp[k] = sc.setpoints[k/perSeg]
		pv[k] = math.Floor(v/lsbV + rng.NormFloat64()*0.4)
		e := pv[k] - sp[k]
		switch {
		case e > sc.db:
			u[k] = -1
			v = v * a
		case e < -sc.db:
			u[k] = 1
			v = vs + (v-vs)*a
		default:
			u[k] = 0
			v = v * math.Exp(-period/(200*tau)) // slow droop through a large load
		}
	}
	s := &analysis.Summary{
		Source:        sc.name + ".cap",
		Samples:       int64(n),
		DurationS:     float64(n) * period,
		SamplePeriodS: ptr(period),
		PeriodFrom:    "t",
		JitterS:       ptr(2e-6),
		Board: analysis.Board{VrefV: ptr(vref), ADCBits: ptr(bits), Mode: "three-state", DeadbandCounts: ptr(sc.db),
			SupplyV: ptr(vs), ROhm: ptr(sc.r), CF: ptr(sc.c)},
		Plant: analysis.Plant{TauChargeS: ptr(tau), TauChargeCIS: &[2]float64{tau * 0.97, tau * 1.03},
			TauDischargeS: ptr(tau), VHighV: ptr(vs), NoiseRMSCounts: ptr(0.4)},
		Traces: &analysis.Traces{Volts: true},
	}
	tr := s.Traces
	// Overview: buckets of 8 samples with min/max.
	const bucket = 8
	for i := 0; i+bucket <= n; i += bucket {
		lo, hi := math.Inf(1), math.Inf(-1)
		for _, x := range pv[i : i+bucket] {
			lo, hi = math.Min(lo, x), math.Max(hi, x)
		}
		tr.T = append(tr.T, t[i])
		tr.SP = append(tr.SP, sp[i]*lsbV)
		tr.PV = append(tr.PV, pv[i]*lsbV)
		tr.PVMin = append(tr.PVMin, lo*lsbV)
		tr.PVMax = append(tr.PVMax, hi*lsbV)
	}
	hist := map[int]float64{}
	longest := []float64(nil)
	for g, spc := range sc.setpoints {
		start, end := g*perSeg, (g+1)*perSeg
		steady := start + perSeg/2
		seg := analysis.Segment{SetpointCounts: spc, SetpointV: ptr(spc * lsbV), StartS: t[start], EndS: t[end-1] + period,
			SteadyStartS: ptr(t[steady]), SteadySamples: int64(end - steady), DeadbandCounts: ptr(sc.db)}
		lo, hi, sum, sum2 := math.Inf(1), math.Inf(-1), 0.0, 0.0
		var charge, holdN float64
		for k := steady; k < end; k++ {
			lo, hi = math.Min(lo, pv[k]), math.Max(hi, pv[k])
			e := pv[k] - spc
			sum += e
			sum2 += e * e
			hist[int(e)]++
			switch u[k] {
			case 1:
				charge++
			case 0:
				holdN++
			}
		}
		m := float64(end - steady)
		mean := sum / m
		seg.MeanErrorCounts = ptr(mean)
		seg.MeanErrorV = ptr(mean * lsbV)
		seg.RipplePPCounts = ptr(hi - lo)
		seg.RipplePPV = ptr((hi - lo) * lsbV)
		rms := math.Sqrt(math.Max(sum2/m-mean*mean, 0))
		seg.RippleRMSCounts = ptr(rms)
		seg.RippleRMSV = ptr(rms * lsbV)
		seg.DutyCharge = ptr(charge / m)
		seg.DutyHold = ptr(holdN / m)
		seg.DutyDischarge = ptr(1 - (charge+holdN)/m)
		s.Segments = append(s.Segments, seg)
		// Zoom: the last 150 samples at full rate.
		z := analysis.ZoomTrace{Segment: g}
		for k := end - 150; k < end; k++ {
			z.T = append(z.T, t[k])
			z.PV = append(z.PV, pv[k]*lsbV)
			z.U = append(z.U, u[k])
		}
		tr.Zoom = append(tr.Zoom, z)
		if len(pv[steady:end]) > len(longest) {
			longest = pv[steady:end]
		}
		if g > 0 {
			from := sc.setpoints[g-1]
			s.Steps = append(s.Steps, analysis.StepFigures{AtS: t[start], FromCounts: from, ToCounts: spc,
				FromV: ptr(from * lsbV), ToV: ptr(spc * lsbV), SettleS: ptr(3 * tau)})
			st := analysis.StepTrace{Step: g - 1}
			v0 := pv[start] * lsbV
			vinf := vs
			if spc < from {
				vinf = 0
			}
			for k := start; k < start+min(perSeg/2, int(5*tau/period)); k++ {
				st.T = append(st.T, t[k])
				st.PV = append(st.PV, pv[k]*lsbV)
				st.Fitted = append(st.Fitted, vinf+(v0-vinf)*math.Exp(-(t[k]-t[start])/tau))
			}
			tr.StepTraces = append(tr.StepTraces, st)
		}
	}
	for e := -40; e <= 40; e++ {
		if h, ok := hist[e]; ok {
			tr.ErrBins = append(tr.ErrBins, float64(e))
			tr.ErrHist = append(tr.ErrHist, h)
		}
	}
	// Spectrum of the longest steady part, mean removed.
	x := append([]float64(nil), longest...)
	mean := 0.0
	for _, v := range x {
		mean += v
	}
	mean /= float64(len(x))
	for i := range x {
		x[i] -= mean
	}
	fft := fourier.NewFFT(len(x))
	coef := fft.Coefficients(nil, x)
	for i := 1; i < len(coef); i++ {
		tr.SpecFreq = append(tr.SpecFreq, fft.Freq(i)/period)
		tr.SpecAmp = append(tr.SpecAmp, 2*cmplx.Abs(coef[i])/float64(len(x)))
	}
	s.Diagnostics = append(s.Diagnostics, analysis.Diagnostic{Code: "band_ok", Severity: "info", Message: "the loop settles into hold"})
	return Capture{Name: sc.name, Summary: s}
}

// benchBefore and benchAfter are a bench reference before and after widening the band.
var (
	benchBefore = synthCase{name: "bench-before", r: 47e3, c: 2.2e-6, db: 1, setpoints: []float64{300, 620, 450}, hold: 3, seed: 1}
	benchAfter  = synthCase{name: "bench-after", r: 47e3, c: 4.7e-6, db: 3, setpoints: []float64{300, 620, 450}, hold: 3, seed: 2}
)
