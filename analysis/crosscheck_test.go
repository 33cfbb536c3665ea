package analysis

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/caploop/caploop/telemetry"
	"gonum.org/v1/gonum/dsp/fourier"
	"gonum.org/v1/gonum/stat"
)

// TestMeanStdAgainstGonum feeds readings scattered about a fixed setpoint and compares
// the steady mean error and rms with gonum's stat.Mean and stat.PopStdDev over the same
// samples.
func TestMeanStdAgainstGonum(t *testing.T) {
	cases := []struct {
		name   string
		spread float64
		seed   uint64
	}{
		{"narrow", 2, 1},
		{"wide", 25, 2},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(tc.seed, 7))
			acc := New(Options{})
			acc.SetMeta(telemetry.Meta{Vref: 5, ADCBits: 10, Period: 1e-3, Mode: telemetry.TwoState,
				Set: telemetry.FieldVref | telemetry.FieldADCBits | telemetry.FieldPeriod | telemetry.FieldMode})
			var steady []float64
			sp := 500.0
			reached, started := false, false
			prevU := 0
			for k := range 5000 {
				pv := math.Round(sp + 1.5 + tc.spread*rng.NormFloat64())
				e := pv - sp
				if k == 0 {
					pv, e = sp-40, -40 // first reading below: reached at the first e >= 0
				}
				u := -1 // the two-state rule: charge below the setpoint
				if e < 0 {
					u = 1
				}
				// The steady part starts at the first drive switch after the reach.
				if reached && !started && u != prevU {
					started = true
				}
				if !reached && k > 0 && e >= 0 {
					reached = true
				}
				prevU = u
				if started {
					steady = append(steady, e)
				}
				acc.Add(telemetry.Sample{Index: int64(k), SP: sp, PV: pv})
			}
			seg := acc.Summary().Segments[0]
			if seg.SteadySamples != int64(len(steady)) {
				t.Fatalf("steady samples: got %d, want %d", seg.SteadySamples, len(steady))
			}
			mean, sd := stat.Mean(steady, nil), stat.PopStdDev(steady, nil)
			if got := deref(seg.MeanErrorCounts); math.Abs(got-mean) > 1e-9*math.Max(1, math.Abs(mean)) {
				t.Errorf("mean error: got %.12g, gonum stat.Mean %.12g", got, mean)
			}
			if got := deref(seg.RippleRMSCounts); math.Abs(got-sd) > 1e-9*sd {
				t.Errorf("rms: got %.12g, gonum stat.PopStdDev %.12g", got, sd)
			}
		})
	}
}

// TestRegressionAgainstGonum checks the streaming fit: with the regressor as its own
// instrument it is ordinary least squares and must match gonum's
// stat.LinearRegression; with a lagged instrument on readings with noise in the
// regressor it must stay unbiased where least squares is not.
func TestRegressionAgainstGonum(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 9))
	const a, b, sigma = 0.98, 20.0, 1.0 // V[k+1] = a V[k] + b: asymptote 1000
	var xs, ys []float64
	var ols, iv ivSums
	v := 100.0
	prevRead, prevPrev := math.NaN(), math.NaN()
	for k := range 40000 {
		if k%200 == 0 {
			v = 100 + 50*rng.Float64() // restart a charge run far from the asymptote
			prevRead, prevPrev = math.NaN(), math.NaN()
		}
		read := v + sigma*rng.NormFloat64()
		if !math.IsNaN(prevRead) {
			xs, ys = append(xs, prevRead), append(ys, read)
			ols.add(prevRead, prevRead, read)
			if !math.IsNaN(prevPrev) {
				iv.add(prevPrev, prevRead, read)
			}
		}
		prevPrev, prevRead = prevRead, read
		v = a*v + b
	}
	alpha, beta := stat.LinearRegression(xs, ys, nil, false)
	got, ok := ols.free()
	if !ok {
		t.Fatal("least-squares fit failed")
	}
	if math.Abs(got.A-beta) > 1e-9 || math.Abs(got.B-alpha) > 1e-6 {
		t.Errorf("z = x: got a=%.12g b=%.12g, gonum stat.LinearRegression beta=%.12g alpha=%.12g", got.A, got.B, beta, alpha)
	}
	gi, ok := iv.free()
	if !ok {
		t.Fatal("instrumental fit failed")
	}
	// tau in samples is -1/ln a; least squares shrinks a by var(noise)/var(V).
	tauTrue, tauOLS, tauIV := -1/math.Log(a), -1/math.Log(beta), -1/math.Log(gi.A)
	if relErr(tauIV, tauTrue) > 0.01 {
		t.Errorf("instrumental tau: got %.4g samples, want %.4g within 1 %%", tauIV, tauTrue)
	}
	if relErr(tauIV, tauTrue) >= relErr(tauOLS, tauTrue) {
		t.Errorf("instrumental tau error %.3g %% not below least squares %.3g %%", 100*relErr(tauIV, tauTrue), 100*relErr(tauOLS, tauTrue))
	}
	if relErr(gi.VInf, 1000) > 0.01 {
		t.Errorf("asymptote: got %.5g, want 1000 within 1 %%", gi.VInf)
	}
	t.Logf("tau true %.4g, least squares %.4g, instrumental %.4g samples", tauTrue, tauOLS, tauIV)
}

// TestSpectrumAgainstGonum compares the dominant frequency of a noisy sinusoid with the
// largest bin of gonum's FFT of the same window and
// with the known frequency.
func TestSpectrumAgainstGonum(t *testing.T) {
	cases := []struct {
		name   string
		period float64 // samples
		n      int
	}{
		{"37.3 samples", 37.3, 4096},
		{"6.2 samples", 6.2, 3000},
		{"120 samples", 120, 4096},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(5, uint64(tc.n)))
			w := make([]float64, tc.n)
			for i := range w {
				w[i] = 600 + 10*math.Sin(2*math.Pi*float64(i)/tc.period) + 0.5*rng.NormFloat64()
			}
			var sp spectral
			freq := sp.analyse(w)
			// gonum reference: plain FFT of the mean-removed window, largest bin.
			fft := fourier.NewFFT(tc.n)
			x := make([]float64, tc.n)
			m := stat.Mean(w, nil)
			for i := range w {
				x[i] = w[i] - m
			}
			c := fft.Coefficients(nil, x)
			bi := 1
			for i := 1; i < len(c); i++ {
				if math.Hypot(real(c[i]), imag(c[i])) > math.Hypot(real(c[bi]), imag(c[bi])) {
					bi = i
				}
			}
			ref := fft.Freq(bi)
			if math.Abs(freq-ref) > 1/float64(tc.n) {
				t.Errorf("frequency: got %.6g cycles/sample, gonum FFT peak %.6g (bin %d)", freq, ref, bi)
			}
			if want := 1 / tc.period; relErr(freq, want) > 0.01 {
				t.Errorf("frequency: got %.6g, want %.6g within 1 %%", freq, want)
			}
		})
	}
}

// TestStepFigures checks rise time and overshoot on a noise-free two-state step, against
// the closed form of an RC charge: the time from 10 % to 90 % of the way from V0 to the
// setpoint is tau ln((Vinf - V10) / (Vinf - V90)) (any circuits textbook).
func TestStepFigures(t *testing.T) {
	cfg := benchCfg(0, 0, 0, 1) // two-state
	r := simulate(t, cfg, schedule(3000, 200, 700), 6000, false)
	if len(r.sum.Steps) != 1 {
		t.Fatalf("steps: got %d, want 1", len(r.sum.Steps))
	}
	st := r.sum.Steps[0]
	lsb := 5.0 / 1024
	vinf := cfg.Circuit.VInf(1) / lsb
	tau := cfg.Circuit.Tau(1)
	v10, v90 := 200+0.1*500.0, 200+0.9*500.0
	want := tau * math.Log((vinf-v10)/(vinf-v90))
	// The readings are sampled every ms and quantised: allow two periods.
	if st.RiseS == nil || math.Abs(*st.RiseS-want) > 2e-3 {
		t.Errorf("rise: got %v s, want %.4g s within 2 ms", deref(st.RiseS), want)
	}
	if st.OvershootV == nil || *st.OvershootV > 20*lsb {
		t.Errorf("overshoot: got %v V, want at most one step (20 LSB)", deref(st.OvershootV))
	}
	if st.SettleS == nil || *st.SettleS < want || *st.SettleS > 0.5 {
		t.Errorf("settle: got %v s, want between the rise %.3g s and 0.5 s", deref(st.SettleS), want)
	}
	if st.SlewVPerS == nil || *st.SlewVPerS <= 0 {
		t.Errorf("slew: got %v, want > 0", deref(st.SlewVPerS))
	}
}
