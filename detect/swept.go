package detect

import (
	"math"
	"math/cmplx"

	"quietband/detect/fft"
)

// Swept finds swept tones (chirp jammers) and measures their sweep period,
// edges, rate and shape.
//
// Spectral evidence, cheap, from the engine's pass: a periodic chirp of
// period T has a line spectrum, and its autocorrelation R(τ) peaks at
// τ = T. The block's autocorrelation is the inverse FFT of the excess PSD
// (Wiener–Khinchin), divided by the Hann window's own lag weight
// c(τ) = Σ w[n]w[n+τ]/Σ w². A chirp is indicated when the largest |R(τ)|
// over 1–100 µs is at least half of R(0) and at least four times the median
// |R| over those lags (a CW has a flat |R|, noise none), and the excess
// covers at least 5 % of the band.
//
// Per-sample work, only then: the lag product z[n] = x[n]·x*[n−1] removes
// the carrier phase, and its angle is the instantaneous frequency
// f[n] = fs/2π·arg z[n] (REFERENCES §10). Folding z modulo T over the
// block (synchronous averaging into B = round(T·fs) phase bins) raises the
// SNR by the number of sweeps folded, so the frequency profile of one sweep
// comes out clean even at J/N = 0 dB. T is refined by maximizing the
// folded coherence Σ_b |Z_b| over spans that double in length, each step
// narrowing the search in proportion. The profile then gives the shape
// (sign pattern of its slopes: up, down, triangle), the rate (least
// squares line through the ramp, Hz/s) and the edges (the line at the ramp's
// ends).
type Swept struct {
	plan    *fft.Plan
	buf     []complex64
	lag     []float64
	weights []float64
	z       []complex128
	prof    []float64
}

// Name implements Detector.
func (*Swept) Name() string { return "swept" }

// minSweepCoherence is the folded coherence Σ|Z_b|/Σ|z[n]| a chirp must
// reach: a periodic constant-envelope sweep folds coherently (near 1 at
// high J/N, about J/(J+N) below), noise and pulse pairs do not.
const minSweepCoherence = 0.2

// Detect implements Detector.
func (d *Swept) Detect(in *BlockInput, out []Finding) []Finding {
	f := in.F
	if f.Frames == 0 || len(in.Samples) < 4*f.N {
		return out
	}
	period, ok := d.periodicity(in)
	if !ok {
		return out
	}
	// Occupied span and constant envelope.
	lo, hi, nb := -1, -1, 0
	for k := 0; k < f.N; k++ {
		if !in.Excluded[k] && in.Ratio[k] > in.BinThreshold {
			if lo < 0 {
				lo = k
			}
			hi = k
			nb++
		}
	}
	if lo < 0 || hi-lo+1 < f.N/20 {
		return out
	}
	sw, ok := d.fold(in.Samples, f.Fs, period)
	if !ok || sw.Coherent < minSweepCoherence {
		return out
	}
	// J/N against the thermal floor: what stands above the (possibly
	// raised) floor plus the part of the rise inside the span.
	thermal := in.NoisePower / in.Rise
	span := float64(hi-lo+1) / float64(f.N)
	jn := (in.bandPower(lo, hi) + (in.Rise-1)*thermal*span) / thermal
	return append(out, Finding{Detector: d.Name(), Class: ClassSwept, LowHz: sw.LowHz, HighHz: sw.HighHz,
		OffsetHz: (sw.LowHz + sw.HighHz) / 2, JN: jn, Sweep: &sw})
}

// periodicity returns the period in seconds of the strongest
// autocorrelation peak of the excess PSD in 1–100 µs, if it is marked.
func (d *Swept) periodicity(in *BlockInput) (float64, bool) {
	f := in.F
	n := f.N
	if d.plan == nil || d.plan.Len() != n {
		d.plan = fft.NewPlan(n)
		d.buf = make([]complex64, n)
		d.lag = make([]float64, n)
		d.weights = hannLagWeights(n)
	}
	var r0 float64
	for k := 0; k < n; k++ {
		// Only bins that carry clear excess: the lines of the comb.
		e := 0.0
		if !in.Excluded[k] && in.Ratio[k] > in.BinThreshold {
			e = in.excess(k)
		}
		r0 += e
		// Undo the centring: bin k holds FFT bin (k − N/2) mod N.
		d.buf[(k+n/2)%n] = complex(float32(e), 0)
	}
	if r0 <= 0.25*in.NoisePower {
		return 0, false // J/N below −6 dB: nothing to fold
	}
	d.plan.Inverse(d.buf, d.buf)
	lo := max(2, int(math.Ceil(1e-6*f.Fs)))
	hi := min(n/4, int(100e-6*f.Fs))
	if hi <= lo+2 {
		return 0, false
	}
	best, at := 0.0, 0
	for t := lo; t <= hi; t++ {
		v := cmplx.Abs(complex128(d.buf[t])) / d.weights[t]
		d.lag[t] = v
		if v > best {
			best, at = v, t
		}
	}
	med := medianOf(d.lag[lo : hi+1])
	if best < 0.5*r0 || best < 4*med {
		return 0, false
	}
	// Every multiple of the period peaks as high: take the first lag
	// that comes within 80 % of the best.
	for t := lo + 1; t < hi; t++ {
		if d.lag[t] >= 0.8*best && d.lag[t] >= d.lag[t-1] && d.lag[t] >= d.lag[t+1] {
			at = t
			break
		}
	}
	if at <= lo || at >= hi {
		return 0, false
	}
	// Parabolic interpolation of the peak lag.
	a, b, c := d.lag[at-1], d.lag[at], d.lag[at+1]
	delta := 0.0
	if den := a - 2*b + c; den < 0 {
		delta = 0.5 * (a - c) / den
	}
	return (float64(at) + delta) / f.Fs, true
}

// hannLagWeights returns c(τ) = Σ_m w[m]·w[m−τ] / Σ_m w[m]², m from τ to
// n−1, for the periodic Hann window: the factor by which a frame's
// autocorrelation estimate shrinks a periodic signal's autocorrelation at
// lag τ (the circularly wrapped products pair samples N−τ apart and add
// only incoherently).
func hannLagWeights(n int) []float64 {
	w := make([]float64, n)
	var e float64
	for i := range w {
		s := math.Sin(math.Pi * float64(i) / float64(n))
		w[i] = s * s
		e += w[i] * w[i]
	}
	c := make([]float64, n)
	for t := range c {
		var s float64
		for m := t; m < n; m++ {
			s += w[m] * w[m-t]
		}
		c[t] = math.Max(s/e, 1e-3)
	}
	return c
}

// fold refines the period and measures the sweep from the folded lag
// product.
func (d *Swept) fold(x []complex64, fs, period float64) (SweepParams, bool) {
	bins := int(math.Round(period * fs))
	if bins < 6 {
		return SweepParams{}, false
	}
	if cap(d.z) < bins {
		d.z = make([]complex128, bins)
		d.prof = make([]float64, bins)
	}
	z := d.z[:bins]
	// Coarse-to-fine search of T: folding n samples blurs a period error
	// δ by n·δ/T samples, so each doubling of the span halves the step.
	span := min(len(x), 64*bins)
	step := period / float64(span) * 2
	for {
		best, bestT := -1.0, period
		for i := -6; i <= 6; i++ {
			t := period + float64(i)*step
			if c := coherence(z, x[:span], fs, t); c > best {
				best, bestT = c, t
			}
		}
		period = bestT
		if span == len(x) {
			break
		}
		span = min(len(x), span*4)
		step /= 3
	}
	coh := coherence(z, x, fs, period)
	prof := d.prof[:bins]
	for b, v := range z {
		prof[b] = fs / (2 * math.Pi) * cmplx.Phase(v)
	}
	sw, ok := sweepFromProfile(prof, period)
	sw.Coherent = coh
	return sw, ok
}

// coherence folds z[n] = x[n]x*[n−1] modulo period t into len(z) phase bins
// and returns Σ|Z_b| / Σ|z[n]|.
func coherence(z []complex128, x []complex64, fs, t float64) float64 {
	clear(z)
	bins := float64(len(z))
	inc := 1 / (t * fs)
	var tot float64
	for i := 1; i < len(x); i++ {
		p := complex128(x[i]) * cmplx.Conj(complex128(x[i-1]))
		ph := float64(i) * inc
		b := int((ph - math.Floor(ph)) * bins)
		if b >= len(z) {
			b = len(z) - 1
		}
		z[b] += p
		tot += cmplx.Abs(p)
	}
	var s float64
	for _, v := range z {
		s += cmplx.Abs(v)
	}
	if tot == 0 {
		return 0
	}
	return s / tot
}

// sweepFromProfile reads shape, rate and edges from one period's
// instantaneous-frequency profile.
func sweepFromProfile(prof []float64, period float64) (SweepParams, bool) {
	n := len(prof)
	// The flyback of a sawtooth is the largest jump between bins.
	jump, at := 0.0, 0
	pos := 0
	for b := 0; b < n; b++ {
		dlt := prof[(b+1)%n] - prof[b]
		if math.Abs(dlt) > math.Abs(jump) {
			jump, at = dlt, b
		}
	}
	for b := 0; b < n; b++ {
		if b == at {
			continue
		}
		if prof[(b+1)%n]-prof[b] > 0 {
			pos++
		}
	}
	frac := float64(pos) / float64(n-1)
	dt := period / float64(n)
	sw := SweepParams{PeriodS: period}
	switch {
	case frac > 0.75 || frac < 0.25:
		sw.Shape = "up"
		if frac < 0.25 {
			sw.Shape = "down"
		}
		// Rotate so the ramp starts after the flyback; fit its middle 80 %.
		// Over one period the ramp covers the span once: span = |slope|·n,
		// centred on the line's mid value.
		slope, icpt := fitRamp(prof, at+1, n, 0.1)
		sw.RateHzS = slope / dt
		mid, span := icpt+slope*float64(n-1)/2, math.Abs(slope)*float64(n)
		sw.LowHz, sw.HighHz = mid-span/2, mid+span/2
	default:
		sw.Shape = "triangle"
		imax, imin := 0, 0
		for b := range prof {
			if prof[b] > prof[imax] {
				imax = b
			}
			if prof[b] < prof[imin] {
				imin = b
			}
		}
		// Fit the rising half (from the minimum to the maximum).
		l := (imax - imin + n) % n
		if l < 3 {
			return sw, false
		}
		slope, icpt := fitRamp(prof, imin, l, 0.15)
		sw.RateHzS = slope / dt
		mid, span := icpt+slope*float64(l-1)/2, math.Abs(slope)*float64(n)/2
		sw.LowHz, sw.HighHz = mid-span/2, mid+span/2
	}
	return sw, sw.HighHz > sw.LowHz
}

// fitRamp fits a least-squares line to length samples of prof starting at
// start (circularly), ignoring trim of each end, and returns the slope per
// bin and the line's value at the ramp's start.
func fitRamp(prof []float64, start, length int, trim float64) (slope, icpt float64) {
	n := len(prof)
	a, b := int(trim*float64(length)), int((1-trim)*float64(length))
	var sx, sy, sxx, sxy, m float64
	for i := a; i < b; i++ {
		x := float64(i)
		y := prof[(start+i)%n]
		sx += x
		sy += y
		sxx += x * x
		sxy += x * y
		m++
	}
	den := m*sxx - sx*sx
	if den == 0 {
		return 0, 0
	}
	slope = (m*sxy - sx*sy) / den
	icpt = (sy - slope*sx) / m
	return slope, icpt
}
