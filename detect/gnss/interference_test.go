package gnss

import (
	"math"
	"math/rand/v2"

	"quietband/detect/fft"
)

// Interference sources for the test bank, added to a capture whose thermal
// noise has complex variance sigma2. J/N is the interference power over
// the noise power in the capture bandwidth while the interference is
// present (in-pulse peak for pulses), the convention of DEVELOPERS.md and
// REFERENCES §5.

// jnPower returns the interference power J for a J/N in dB.
func jnPower(jn, sigma2 float64) float64 { return math.Pow(10, jn/10) * sigma2 }

// addTone adds a CW at offset off (Hz from the centre) of J/N jn dB.
func addTone(x []complex64, fs, sigma2, off, jn, phase float64) {
	a := math.Sqrt(jnPower(jn, sigma2))
	w := 2 * math.Pi * off / fs
	for n := range x {
		s, c := math.Sincos(w*float64(n) + phase)
		x[n] += complex64(complex(a*c, a*s))
	}
}

// antiAlias is the recorder's anti-alias response to a frequency f (Hz
// from the centre): 1 within ±0.4·fs, a raised-cosine fall to 0 at
// ±0.5·fs, 0 beyond, so that a sweep wider than the band does not alias.
func antiAlias(f, fs float64) float64 {
	u := math.Abs(f) / fs
	switch {
	case u <= 0.4:
		return 1
	case u >= 0.5:
		return 0
	}
	c := math.Cos(math.Pi / 2 * (u - 0.4) / 0.1)
	return c * c
}

// addSweep adds a sawtooth linear chirp from lo to hi (Hz from the centre,
// possibly beyond ±fs/2) with the given period, whose in-band amplitude
// has J/N jn dB; the part outside the band is removed by antiAlias.
func addSweep(x []complex64, fs, sigma2, lo, hi, period, jn float64) {
	a := math.Sqrt(jnPower(jn, sigma2))
	var ph float64
	for n := range x {
		// Position within the sweep, from the sample index so that the
		// flyback falls on the same sample of every period when the
		// period is a whole number of samples.
		ps := period * fs
		u := float64(n)/ps - math.Floor(float64(n)/ps+1e-9)
		f := lo + (hi-lo)*max(u, 0)
		g := a * antiAlias(f, fs)
		if g > 0 {
			s, c := math.Sincos(ph)
			x[n] += complex64(complex(g*c, g*s))
		}
		ph = math.Mod(ph+2*math.Pi*f/fs, 2*math.Pi)
	}
}

// addPulses adds a pulse train at offset off: DME-like Gaussian pulse
// pairs (p(t) = exp(−αt²/2), α = 4.5·10¹¹ s⁻², 12 µs apart, from memory of
// Bastide et al. 2004, REFERENCES §6) when width is 0, otherwise
// rectangular pulses of that width; one pulse (pair) every pri seconds,
// in-pulse peak J/N jn dB.
func addPulses(x []complex64, fs, sigma2, off, pri, width, jn float64) {
	a := math.Sqrt(jnPower(jn, sigma2))
	w := 2 * math.Pi * off / fs
	const alpha = 4.5e11
	for n := range x {
		t := float64(n) / fs
		k := math.Floor(t/pri + 0.5)
		dt := t - k*pri
		var env float64
		if width == 0 {
			env = math.Exp(-alpha*dt*dt/2) + math.Exp(-alpha*(dt-12e-6)*(dt-12e-6)/2)
		} else if dt >= 0 && dt < width {
			env = 1
		}
		if env < 1e-6 {
			continue
		}
		s, c := math.Sincos(w * float64(n))
		x[n] += complex64(complex(a*env*c, a*env*s))
	}
}

// addBandNoise adds complex Gaussian noise of power J (J/N jn dB) flat
// over bw hertz around off: white noise shaped by an FFT brick-wall filter
// over blocks of 4096 samples.
func addBandNoise(rng *rand.Rand, x []complex64, fs, sigma2, off, bw, jn float64) {
	const n = 4096
	plan := fft.NewPlan(n)
	spec := make([]complex64, n)
	var bins []int
	for k := range n {
		f := float64(k) * fs / n
		if k >= n/2 {
			f -= fs
		}
		if math.Abs(f-off) <= bw/2 {
			bins = append(bins, k)
		}
	}
	// The inverse transform is unnormalized: E|x|² = Σ_bins E|X_k|².
	sd := math.Sqrt(jnPower(jn, sigma2) / float64(len(bins)) / 2)
	blk := make([]complex64, n)
	for off0 := 0; off0 < len(x); off0 += n {
		clear(spec)
		for _, k := range bins {
			spec[k] = complex(float32(sd*rng.NormFloat64()), float32(sd*rng.NormFloat64()))
		}
		plan.Inverse(blk, spec)
		for i := 0; i < n && off0+i < len(x); i++ {
			x[off0+i] += blk[i]
		}
	}
}

// addNoise adds complex white Gaussian noise of J/N jn dB over the band.
func addNoise(rng *rand.Rand, x []complex64, sigma2, jn float64) {
	sd := math.Sqrt(jnPower(jn, sigma2) / 2)
	for i := range x {
		x[i] += complex(float32(sd*rng.NormFloat64()), float32(sd*rng.NormFloat64()))
	}
}
