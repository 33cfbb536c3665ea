package analysis

import (
	"math"
	"math/cmplx"

	"gonum.org/v1/gonum/dsp/fourier"
)

// spectral is the workspace for the spectrum of one window.
// It is reused between calls so that the live screen does not allocate each frame.
type spectral struct {
	fft  *fourier.FFT
	n    int
	buf  []float64
	coef []complex128
}

// analyse computes the power spectrum of the window w (counts, any mean) minus its
// mean, zero-padded to a power of two at least twice its length, and returns the
// frequency of its strongest line other than DC in cycles per sample (gonum's Freq),
// refined by a parabola through the line and its neighbours (NaN for a flat or short
// window). It leaves |X|^2 in coef for keepSpectrum. For a steady limit cycle the
// strongest line is 1 / the mean interval between charge onsets, the limit cycle of the
// Segment; a test holds the two together.
func (sp *spectral) analyse(w []float64) (freq float64) {
	freq = math.NaN()
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
	return freq
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
