package analysis

import (
	"math"
	"math/cmplx"

	"gonum.org/v1/gonum/dsp/fourier"
)

// spectral is the workspace for the autocorrelation and the spectrum of one window.
// It is reused between calls so that the live screen does not allocate each frame.
type spectral struct {
	fft  *fourier.FFT
	n    int
	buf  []float64
	coef []complex128
	acf  []float64
}

// analyse computes, for the window w (counts, any mean), the normalised autocorrelation
// of w minus its mean, its power spectrum, and from them:
//
//	period: the lag of the first major autocorrelation peak, in samples, refined by a
//	        parabola through the peak and its neighbours (NaN when there is none);
//	freq:   the frequency of the largest spectral line other than DC, in cycles per
//	        sample (gonum's Freq), refined the same way (NaN for a flat window);
//	peakR:  the autocorrelation at the peak (0..1).
//
// The autocorrelation is the inverse FFT of |FFT(w)|^2 with w zero-padded to twice its
// length (so it is linear, not circular), divided by acf[0]. A peak is "major" when it
// follows the first minimum, reaches at least 0.5 of the largest value beyond that
// minimum, and is above 0.1.
func (sp *spectral) analyse(w []float64) (period, freq, peakR float64) {
	period, freq = math.NaN(), math.NaN()
	m := len(w)
	if m < 8 {
		return
	}
	n := 1
	for n < 2*m {
		n <<= 1
	}
	if sp.fft == nil || sp.n != n {
		if sp.fft == nil {
			sp.fft = fourier.NewFFT(n)
		} else {
			sp.fft.Reset(n)
		}
		sp.n = n
		sp.buf = make([]float64, n)
		sp.coef = make([]complex128, n/2+1)
		sp.acf = make([]float64, n)
	}
	mean := 0.0
	for _, v := range w {
		mean += v
	}
	mean /= float64(m)
	for i := range sp.buf {
		sp.buf[i] = 0
	}
	for i, v := range w {
		sp.buf[i] = v - mean
	}
	c := sp.fft.Coefficients(sp.coef, sp.buf)
	// Dominant frequency: the largest |X|^2 after DC.
	best, bi := 0.0, -1
	for i := 1; i < len(c); i++ {
		p := real(c[i])*real(c[i]) + imag(c[i])*imag(c[i])
		if p > best {
			best, bi = p, i
		}
	}
	if bi > 0 && best > 0 {
		fi := float64(bi)
		if bi+1 < len(c) {
			fi += parabola(cmplx.Abs(c[bi-1]), cmplx.Abs(c[bi]), cmplx.Abs(c[bi+1]))
		}
		freq = fi / float64(n) // gonum's Freq(i) = i/n cycles per sample
	}
	for i := range c {
		c[i] = complex(real(c[i])*real(c[i])+imag(c[i])*imag(c[i]), 0)
	}
	acf := sp.fft.Sequence(sp.acf, c)
	if acf[0] <= 0 {
		return
	}
	r := acf[:m/2+1]
	r0 := acf[0]
	// First local minimum after lag 0.
	k := 1
	for k < len(r)-1 && r[k+1] <= r[k] {
		k++
	}
	if k >= len(r)-1 {
		return
	}
	maxBeyond := 0.0
	for j := k; j < len(r); j++ {
		if r[j] > maxBeyond {
			maxBeyond = r[j]
		}
	}
	thr := math.Max(0.5*maxBeyond, 0.1*r0)
	for j := k + 1; j < len(r)-1; j++ {
		if r[j] >= thr && r[j] >= r[j-1] && r[j] >= r[j+1] {
			period = float64(j) + parabola(r[j-1], r[j], r[j+1])
			peakR = r[j] / r0
			return
		}
	}
	return
}

// parabola returns the offset (-0.5..0.5) of the vertex of the parabola through
// (-1, a), (0, b), (1, c).
func parabola(a, b, c float64) float64 {
	d := a - 2*b + c
	if d == 0 {
		return 0
	}
	o := 0.5 * (a - c) / d
	if o > 0.5 || o < -0.5 || math.IsNaN(o) {
		return 0
	}
	return o
}
