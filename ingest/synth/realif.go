package synth

import (
	"math"
	"math/cmplx"

	"quietband/ingest"
)

// realIFWriter turns the capture's complex samples (rate fs) into real
// samples at an IF (rate 2·fs) and writes them (see RealIF):
//
//	y[2n] = z[n],  y[2n+1] = Σ_{i=1..K} g_i·(z[n+1−i] + z[n+i])
//
// (zero insertion and the half-band filter of ingest.HalfBandTaps, gain 2,
// whose taps at even offsets other than 0 are zero), then
// x[m] = Re{y[m]·e^{j2π·IF·m/(2fs)}}, y conjugated for a high-side LO, then
// the ADC's offset, quantization, stuck value and scale. Before the first
// and after the last complex sample z is zero (as the Reader pads). It
// keeps K samples of look-ahead and K of history; nothing is allocated
// per block.
type realIFWriter struct {
	w       *ingest.Writer
	g       []float64 // g[i-1] = tap at offsets ±(2i−1)
	k       int
	invert  bool
	quarter bool
	cyc     float64 // IF/(2fs), cycles per file sample
	dc      float64
	dead    bool
	quant   *quantizer
	stuck   *float32
	scale   float32

	z    []complex64 // z[j] is complex sample base + j
	base int64
	next int64 // next complex sample whose two file samples are due
	out  []float32
}

func newRealIFWriter(w *ingest.Writer, conv ingest.IFConversion, fileRate float64) *realIFWriter {
	taps := ingest.HalfBandTaps()
	r := &realIFWriter{w: w, k: len(taps) - 1, invert: conv.Side == ingest.HighSide, cyc: conv.IFHz / fileRate, scale: 1}
	for _, t := range taps[1:] {
		r.g = append(r.g, float64(t))
	}
	r.quarter = math.Abs(conv.IFHz/fileRate-0.25) < 1e-9
	r.z = make([]complex64, r.k, blockSamples+3*r.k)
	r.base = -int64(r.k) // K zeros before the first sample
	r.out = make([]float32, 0, 2*blockSamples)
	return r
}

// write takes the next complex samples and writes the real samples that
// are complete.
func (r *realIFWriter) write(z []complex64) error {
	for len(z) > 0 {
		room := cap(r.z) - len(r.z)
		c := min(room, len(z))
		r.z = append(r.z, z[:c]...)
		z = z[c:]
		if err := r.emit(r.base + int64(len(r.z)) - int64(r.k)); err != nil {
			return err
		}
		// Keep the history the next outputs need: z from next−K on.
		keep := r.next - int64(r.k) + 1 - r.base
		if keep > 0 {
			n := copy(r.z, r.z[keep:])
			r.z = r.z[:n]
			r.base += keep
		}
	}
	return nil
}

// close pads K zeros after the last sample and writes the rest.
func (r *realIFWriter) close() error {
	end := r.base + int64(len(r.z))
	for range r.k {
		r.z = append(r.z, 0)
	}
	return r.emit(end)
}

// emit writes file samples 2n and 2n+1 for every complex sample n from
// r.next up to (not including) upto.
func (r *realIFWriter) emit(upto int64) error {
	for ; r.next < upto; r.next++ {
		n := r.next
		j := int(n - r.base)
		even := complex128(r.z[j])
		var odd complex128
		for i, g := range r.g {
			odd += complex(g, 0) * (complex128(r.z[j+1-(i+1)]) + complex128(r.z[j+i+1]))
		}
		r.out = append(r.out, r.adc(r.mix(even, 2*n)), r.adc(r.mix(odd, 2*n+1)))
		if len(r.out) == cap(r.out) {
			if err := r.flush(); err != nil {
				return err
			}
		}
	}
	return nil
}

// mix is Re{y·e^{j2π·cyc·m}} (y conjugated for a high-side LO).
func (r *realIFWriter) mix(y complex128, m int64) float64 {
	if r.invert {
		y = cmplx.Conj(y)
	}
	if r.quarter { // e^{jπm/2}: 1, j, −1, −j
		switch m & 3 {
		case 0:
			return real(y)
		case 1:
			return -imag(y)
		case 2:
			return -real(y)
		}
		return imag(y)
	}
	_, frac := math.Modf(r.cyc * float64(m))
	return real(y * cmplx.Rect(1, 2*math.Pi*frac))
}

// adc is the ADC's offset, quantization, stuck value and scale.
func (r *realIFWriter) adc(x float64) float32 {
	if r.dead {
		return 0
	}
	if r.stuck != nil {
		return *r.stuck
	}
	x += r.dc
	if r.quant != nil {
		return r.quant.value(r.quant.level(x))
	}
	return float32(x) * r.scale
}

func (r *realIFWriter) flush() error {
	err := r.w.WriteReal(r.out)
	r.out = r.out[:0]
	return err
}

// realIFNoiseSigma is the standard deviation of the real IF samples that
// thermal noise of power sigma2, through the passband taps (nil: none),
// becomes: x = Re{y·e^{jωm}} has variance E|y|²/2, and E|y|² alternates
// between R_z[0] on the even samples (y[2n] = z[n]) and
// Σ_{l,l'} c_l·c_l'·R_z[l − l'] on the odd ones (the interpolator's
// weights c), R_z the noise's autocorrelation, σ²·Σ_j h[j]·h*[j−k]
// (σ²·δ[k] without a passband). For white noise the odd samples carry
// 1.920 − 1 = 0.92 of the even ones' power (the half-band's noise gain,
// ingest.HalfBandTaps), so σ_x² = 0.96·σ²/2 [C].
func realIFNoiseSigma(sigma2 float64, taps []complex128) float64 {
	r := func(k int) complex128 {
		if taps == nil {
			if k == 0 {
				return complex(sigma2, 0)
			}
			return 0
		}
		var acc complex128
		for j := range taps {
			if i := j - k; i >= 0 && i < len(taps) {
				acc += taps[j] * cmplx.Conj(taps[i])
			}
		}
		return acc * complex(sigma2, 0)
	}
	hb := ingest.HalfBandTaps()
	k := len(hb) - 1
	// y[2n+1] = Σ_{i=1..K} g_i·(z[n+1−i] + z[n+i]): weights at offsets l.
	type wt struct {
		l int
		c float64
	}
	var c []wt
	for i := 1; i <= k; i++ {
		c = append(c, wt{1 - i, float64(hb[i])}, wt{i, float64(hb[i])})
	}
	var odd complex128
	for _, a := range c {
		for _, b := range c {
			odd += complex(a.c*b.c, 0) * r(a.l-b.l)
		}
	}
	return math.Sqrt((real(r(0)) + real(odd)) / 4)
}
