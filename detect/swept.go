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
// (the best-correlated template: sawtooth up, down, or triangle), the rate
// (least squares line through the ramp, Hz/s) and the edges (span = rate ×
// period for a sawtooth, half that for a triangle, centred on the ramp's
// mean frequency).
type Swept struct {
	plan    *fft.Plan
	buf     []complex64
	last    SweepParams // the sweep measured in the previous block
	lag     []float64
	acc     []float64
	win     []float32
	weights []float64
	z       []complex128
	lp      []complex64
	mag     []float64
	prof    []float64

	slowPlan *fft.Plan
	slowBuf  []complex64
	slowF    []float64
	slowW    []float64
	// calls counts Detect's calls; trackOf is the call whose block slowF
	// holds the track of.
	calls, trackOf int
}

// Name implements Detector.
func (*Swept) Name() string { return "swept" }

// maxSweepUnevenness bounds the coefficient of variation of a sweep's
// folded magnitude where it is present: a constant envelope sweeping
// folds evenly (the spread is the noise's and the passband's: a front
// end rolling off by 6 dB halves the amplitude at the edges), two tones
// beating do not.
const maxSweepUnevenness = 0.5

// minSweepSpan is the narrowest sweep reported, as a share of the band
// (chirp jammers sweep megahertz; REFERENCES §5).
const minSweepSpan = 0.05

// minSweepFit is the correlation any sweep's folded frequency profile
// must reach with its shape's template, and minSweepPeriod its shortest
// period: two tones beat with a period of 1/Δf, which folds coherently but
// neither ramps nor lasts the microseconds a jammer's sweep takes.
const (
	minSweepFit    = 0.7
	minSweepPeriod = 2e-6
)

// minNarrowSweepFit is the correlation a sweep narrower than a fifth of
// the band must reach between its folded frequency profile and its shape's
// template: a true narrow sweep is a clean ramp; a carrier's wobble that
// happens to fold is not.
const minNarrowSweepFit = 0.9

// minSweepCoherence is the folded coherence Σ|Z_b|/Σ|z[n]| a chirp must
// reach: a periodic constant-envelope sweep folds coherently (near 1 at
// high J/N, about J/(J+N) below), noise and pulse pairs do not.
const minSweepCoherence = 0.2

// Detect implements Detector.
func (d *Swept) Detect(in *BlockInput, out []Finding) []Finding {
	f := in.F
	d.calls++
	if f.Frames == 0 || len(in.Samples) < 4*f.N {
		return out
	}
	// A sweep measured in the last block is most likely still there: one
	// fine fold around its refined period costs a fraction of the search,
	// and the fold's coherence re-checks it (a sweep that stopped or
	// changed its period folds incoherently). The autocorrelation search
	// runs when no sweep is being followed, or when the fine fold fails.
	var sw SweepParams
	ok := false
	if d.last.PeriodS > 0 && constantEnvelope(f, len(in.Samples)) {
		var edge bool
		sw, ok, edge = d.foldNear(in.Samples, f.Fs, d.last.PeriodS)
		// A best period at the edge of the ±1 step grid has drifted
		// further than the fine fold can follow: search again.
		ok = ok && !edge && sw.Coherent >= minSweepCoherence
	}
	if !ok {
		period, found := d.periodicity(in)
		if !found {
			period, found = d.slowPeriodicity(in)
		}
		switch {
		case found:
			sw, ok, _ = d.fold(in.Samples, f.Fs, period)
		default:
			// Slower than a block: a ramp across it.
			sw, ok = d.ramp(in)
			if !ok {
				d.last = SweepParams{}
				return out
			}
		}
	}
	// A "sweep" over a few bins is a carrier wobbling (a strong tone
	// through a 2-bit quantizer folds coherently too): a sweep covers at
	// least minSweepSpan of the band.
	if !ok || sw.Coherent < minSweepCoherence || sw.HighHz-sw.LowHz < minSweepSpan*f.Fs ||
		sw.Fit < minSweepFit || sw.PeriodS < minSweepPeriod && !sw.Slow ||
		sw.HighHz-sw.LowHz < 0.2*f.Fs && sw.Fit < minNarrowSweepFit {
		d.last = SweepParams{}
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
	if !sw.Even {
		d.last = SweepParams{}
		return out // tones beating, not a sweep
	}
	wide := sw.HighHz-sw.LowHz >= 0.3*f.Fs && sw.Coherent >= 2*minSweepCoherence
	if (lo < 0 || nb < f.N/20) && !wide {
		d.last = SweepParams{}
		return out // a few tones, not a sweep
	}
	d.last = sw
	// J/N against the thermal floor: what stands above the (possibly
	// raised) floor plus the part of the rise inside the span. A sweep
	// over most of the band hides the floor (a fitted passband or the
	// level's lower quantile would sit on it): then the fold gives it, J
	// the sweep's power while present (SweepParams.Power) and N what the
	// block's power leaves, P − J·duty.
	thermal := in.NoisePower / in.Rise
	var jn float64
	if lo >= 0 {
		span := float64(hi-lo+1) / float64(f.N)
		jn = (in.bandPower(lo, hi) + (in.Rise-1)*thermal*span) / thermal
	}
	if wide && (!in.HasBaseline || sw.HighHz-sw.LowHz >= 0.7*f.Fs || sw.Beyond) {
		if n := f.Power - sw.Power*sw.Duty; sw.Power > 0 && n > 0 {
			jn = sw.Power / n
		}
	}
	found := sw // escapes with the finding; sw itself stays on the stack
	return append(out, Finding{Detector: d.Name(), Class: ClassSwept, LowHz: sw.LowHz, HighHz: sw.HighHz,
		OffsetHz: (sw.LowHz + sw.HighHz) / 2, JN: jn, Sweep: &found})
}

// periodicity returns the sweep period in seconds, from the
// autocorrelation of the instantaneous phase step θ[n] = arg(x[n]·x*[n−1])
// (2π f/fs; REFERENCES §10). θ follows the sweep's frequency, a sawtooth or
// a triangle, so its autocorrelation (mean removed) is largest at multiples
// of T and negative in between (−½ of the peak at T/2 for a sawtooth, −1
// for a triangle) — and it does so even when the jammer's phase jumps at
// its flybacks, which blurs x's own line spectrum. Noise makes θ white, a CW
// makes it constant: neither has such peaks. The autocorrelation is
// estimated frame by frame with the engine's FFT size (|FFT(w·θ)|²
// averaged, inverse FFT — Wiener–Khinchin — divided by the window's lag
// weight). It runs only when the block's kurtosis ratio E|x|⁴/(E|x|²)² is
// below the Gaussian 2 by more than six standard deviations (2/√K for K
// samples): a constant envelope is present.
func (d *Swept) periodicity(in *BlockInput) (float64, bool) {
	f := in.F
	n := f.N
	x := in.Samples
	if !constantEnvelope(f, len(x)) {
		return 0, false
	}
	if d.plan == nil || d.plan.Len() != n {
		d.plan = fft.NewPlan(n)
		d.buf = make([]complex64, n)
		d.acc = make([]float64, n)
		d.lag = make([]float64, n)
		d.weights = hannLagWeights(n)
		d.win = make([]float32, n)
		for i := range d.win {
			v := math.Sin(math.Pi * float64(i) / float64(n))
			d.win[i] = float32(v * v)
		}
	}
	clear(d.acc)
	for i := 0; i < f.Frames; i++ {
		base := i * n
		var mean float64
		for j := 0; j < n; j++ {
			k := base + j
			var th float64
			if k > 0 {
				a, b := x[k], x[k-1]
				z := a * complex(real(b), -imag(b))
				th = float64(fastAtan2(imag(z), real(z)))
			}
			d.buf[j] = complex(float32(th), 0)
			mean += th
		}
		m := float32(mean / float64(n))
		for j := range d.buf {
			d.buf[j] = complex((real(d.buf[j])-m)*d.win[j], 0)
		}
		d.plan.Forward(d.buf, d.buf)
		for j, v := range d.buf {
			d.acc[j] += float64(real(v)*real(v) + imag(v)*imag(v))
		}
	}
	for j, v := range d.acc {
		d.buf[j] = complex(float32(v), 0)
	}
	d.plan.Inverse(d.buf, d.buf)
	r0 := float64(real(d.buf[0]))
	lo := max(2, int(math.Ceil(1e-6*f.Fs)))
	hi := min(n/4, int(100e-6*f.Fs))
	if hi <= lo+2 || r0 <= 0 {
		return 0, false
	}
	best := 0.0
	for t := lo; t <= hi; t++ {
		v := float64(real(d.buf[t])) / d.weights[t]
		d.lag[t] = v
		best = math.Max(best, v)
	}
	// The peak must stand clear of the estimate's own noise, about
	// R(0)/√K for K samples.
	if best < 6*r0/math.Sqrt(float64(f.Frames*n)) {
		return 0, false
	}
	// The first local maximum within 15 % of the best after a dip below
	// −0.2 of it: the correlation of a periodic sweep falls negative
	// between its peaks, a slowly decaying one does not.
	at, dipped := 0, false
	for t := lo + 1; t < hi; t++ {
		if d.lag[t] < -0.2*best {
			dipped = true
		}
		if dipped && d.lag[t] >= 0.85*best && d.lag[t] >= d.lag[t-1] && d.lag[t] >= d.lag[t+1] {
			at = t
			break
		}
	}
	if at == 0 {
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

// slowPeriodicity looks for sweeps slower than periodicity's lags reach
// (periods from about 50 µs to a quarter of the block): the lag product
// summed over D samples, Z_m = Σ x[n]·x*[n−1], gives the mean
// instantaneous frequency f_m = fs/2π·arg Z_m over each D-sample stretch
// (the coherent sum keeps it clean at J/N of a few dB), and the
// autocorrelation of f_m (mean removed, by FFT over the whole block,
// normalized by the number of overlapping terms) peaks at the sweep
// period. The same first-peak-after-a-dip rule as periodicity applies. It
// runs only under a constant envelope.
func (d *Swept) slowPeriodicity(in *BlockInput) (float64, bool) {
	f := in.F
	fm, dec, ok := d.slowTrack(in)
	if !ok {
		return 0, false
	}
	m := len(fm)
	size := 1
	for size < 2*m {
		size *= 2
	}
	if d.slowPlan == nil || d.slowPlan.Len() != size {
		d.slowPlan = fft.NewPlan(size)
		d.slowBuf = make([]complex64, size)
	}
	var mean float64
	for _, v := range fm {
		mean += v
	}
	mean /= float64(m)
	clear(d.slowBuf)
	for i, v := range fm {
		d.slowBuf[i] = complex(float32(v-mean), 0)
	}
	d.slowPlan.Forward(d.slowBuf, d.slowBuf)
	for i, v := range d.slowBuf {
		d.slowBuf[i] = complex(real(v)*real(v)+imag(v)*imag(v), 0)
	}
	d.slowPlan.Inverse(d.slowBuf, d.slowBuf)
	r0 := float64(real(d.slowBuf[0])) / float64(m)
	lo := max(4, int(math.Ceil(50e-6*f.Fs/float64(dec))))
	hi := m / 4
	if hi <= lo+2 || r0 <= 0 {
		return 0, false
	}
	lag := func(t int) float64 { return float64(real(d.slowBuf[t])) / float64(m-t) }
	best := 0.0
	for t := lo; t <= hi; t++ {
		best = math.Max(best, lag(t))
	}
	// A sweep's frequency profile correlates strongly with itself one
	// period on: at least half of R(0), against the estimate's noise.
	if best < 0.5*r0 || best < 6*r0/math.Sqrt(float64(m)) {
		return 0, false
	}
	at, dipped := 0, false
	for t := 1; t < hi; t++ {
		v := lag(t)
		if v < -0.2*best {
			dipped = true
		}
		if t >= lo && dipped && v >= 0.85*best && v >= lag(t-1) && v >= lag(t+1) {
			at = t
			break
		}
	}
	if at == 0 {
		return 0, false
	}
	a, b, c := lag(at-1), lag(at), lag(at+1)
	delta := 0.0
	if den := a - 2*b + c; den < 0 {
		delta = 0.5 * (a - c) / den
	}
	return (float64(at) + delta) * float64(dec) / f.Fs, true
}

// slowTrack is the block's frequency track for slowPeriodicity and ramp:
// f_m = arg Z_m (radians per sample) of the lag product summed over D
// samples (about 2 µs), with its weight |Z_m| in d.slowW, and D. It needs a
// constant envelope.
func (d *Swept) slowTrack(in *BlockInput) ([]float64, int, bool) {
	f := in.F
	x := in.Samples
	if !constantEnvelope(f, len(x)) {
		return nil, 0, false
	}
	dec := max(4, int(math.Round(2e-6*f.Fs)))
	m := len(x) / dec
	if m < 64 {
		return nil, 0, false
	}
	if d.trackOf == d.calls && len(d.slowF) >= m {
		return d.slowF[:m], dec, true // this block's, computed already
	}
	d.trackOf = d.calls
	if cap(d.slowF) < m {
		d.slowF = make([]float64, m)
		d.slowW = make([]float64, m)
	}
	fm, wm := d.slowF[:m], d.slowW[:m]
	for i := 0; i < m; i++ {
		var z complex64
		for n := max(i*dec, 1); n < (i+1)*dec; n++ {
			a, b := x[n], x[n-1]
			z += a * complex(real(b), -imag(b))
		}
		fm[i] = float64(fastAtan2(imag(z), real(z)))
		wm[i] = math.Sqrt(float64(real(z)*real(z) + imag(z)*imag(z)))
	}
	return fm, dec, true
}

// ramp finds a sweep slower than a block: a frequency track (slowTrack)
// that ramps in a straight line across the block, flying back at most
// once or twice (a sawtooth's flyback is a jump of more than a third of
// the band). The pieces between flybacks are fitted by weighted least
// squares, and the longest must fit a line (R² ≥ 0.95) over at least a
// quarter of the block and cover at least minSweepSpan of the band. Its
// period is the time between two flybacks when the block holds two;
// otherwise it is left to the event (Swept's event gathers the flybacks
// of its blocks; see SweepParams.FlybackAt).
func (d *Swept) ramp(in *BlockInput) (SweepParams, bool) {
	f := in.F
	fm, dec, ok := d.slowTrack(in)
	if !ok {
		return SweepParams{}, false
	}
	wm := d.slowW[:len(fm)]
	toHz := f.Fs / (2 * math.Pi)
	var jumps [3]int
	nj := 0
	for i := 1; i < len(fm); i++ {
		if math.Abs(fm[i]-fm[i-1])*toHz > f.Fs/3 {
			if nj == len(jumps) {
				return SweepParams{}, false
			}
			jumps[nj] = i
			nj++
		}
	}
	bounds := append([]int{0}, jumps[:nj]...)
	bounds = append(bounds, len(fm))
	best, bestN := SweepParams{}, 0
	lo, hi := math.Inf(1), math.Inf(-1)
	for k := 0; k+1 < len(bounds); k++ {
		a, b := bounds[k]+1, bounds[k+1]-1
		if b-a < 8 {
			continue
		}
		var sw, sx, sy, sxx, sxy, syy float64
		for i := a; i < b; i++ {
			w, t, y := wm[i], float64(i), fm[i]*toHz
			sw += w
			sx += w * t
			sy += w * y
			sxx += w * t * t
			sxy += w * t * y
			syy += w * y * y
		}
		den := sw*sxx - sx*sx
		vy := sw*syy - sy*sy
		if den <= 0 || vy <= 0 {
			continue
		}
		slope := (sw*sxy - sx*sy) / den // Hz per track point
		r2 := (sw*sxy - sx*sy) * (sw*sxy - sx*sy) / (den * vy)
		icpt := (sy - slope*sx) / sw
		y0, y1 := icpt+slope*float64(a), icpt+slope*float64(b)
		if r2 >= 0.95 {
			lo, hi = math.Min(lo, math.Min(y0, y1)), math.Max(hi, math.Max(y0, y1))
		}
		if n := b - a; n > bestN && r2 >= 0.95 {
			bestN = n
			best = SweepParams{RateHzS: slope * f.Fs / float64(dec), Coherent: r2, Fit: r2}
		}
	}
	if bestN < len(fm)/4 || hi-lo < minSweepSpan*f.Fs {
		return SweepParams{}, false
	}
	best.LowHz, best.HighHz = lo, hi
	best.SpanHz = hi - lo
	best.Shape = "up"
	if best.RateHzS < 0 {
		best.Shape = "down"
	}
	if nj >= 2 {
		best.PeriodS = float64((jumps[1]-jumps[0])*dec) / f.Fs
	}
	for i := 0; i < nj; i++ {
		best.FlybackAt = append(best.FlybackAt, f.Start+int64(jumps[i]*dec))
	}
	// Power while present, as the fold measures it: |Z_m| over D.
	var pw float64
	for _, w := range wm {
		pw += w
	}
	best.Power = pw / float64(len(wm)*dec)
	best.Duty = 1
	best.Slow = true
	best.Even = true
	return best, true
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

// constantEnvelope reports whether the block's kurtosis ratio
// E|x|⁴/(E|x|²)² lies below the Gaussian 2 by more than six standard
// deviations (2/√K for K samples).
func constantEnvelope(f *Features, k int) bool {
	return f.Power > 0 && f.Moment4/(f.Power*f.Power) < 2-12/math.Sqrt(float64(k))
}

// foldNear folds the block around a known period only, at the finest
// step of the full search and ±1 step (the parabola through the three
// points refines it; edge tells when the best was at the edge).
func (d *Swept) foldNear(x []complex64, fs, period float64) (sw SweepParams, ok, edge bool) {
	return d.foldFrom(x, fs, period, len(x), period*float64(period*fs)/(8*float64(len(x))), 1)
}

// fold refines the period and measures the sweep from the folded lag
// product.
func (d *Swept) fold(x []complex64, fs, period float64) (sw SweepParams, ok, edge bool) {
	return d.foldFrom(x, fs, period, int(math.Round(period*fs))*8, 0.01*period, 6)
}

// foldFrom searches the period from span samples, ±half steps of step,
// folding four times as many samples with a step four times finer at each
// level until the whole block is folded, and measures the sweep. edge
// reports that the last level's best period was at its grid's edge.
func (d *Swept) foldFrom(x []complex64, fs, period float64, span int, step float64, half int) (sw SweepParams, ok, edge bool) {
	bins := int(math.Round(period * fs))
	if bins < 6 || len(x) < 2 {
		return SweepParams{}, false, false
	}
	if cap(d.z) < bins {
		d.z = make([]complex128, bins)
		d.prof = make([]float64, bins)
	}
	z := d.z[:bins]
	// The lag product once for all the folds below, and its magnitudes'
	// running sum, so that a fold of the first m samples costs one complex
	// addition per sample.
	if cap(d.lp) < len(x) {
		d.lp = make([]complex64, len(x))
		d.mag = make([]float64, len(x)+1)
	}
	lp, mag := d.lp[:len(x)], d.mag[:len(x)+1]
	lp[0], mag[0], mag[1] = 0, 0, 0
	for i := 1; i < len(x); i++ {
		a, b := x[i], x[i-1]
		p := a * complex(real(b), -imag(b))
		lp[i] = p
		mag[i+1] = mag[i] + math.Sqrt(float64(real(p)*real(p)+imag(p)*imag(p)))
	}
	// Coarse-to-fine search of T. Folding P periods with a period error δ
	// shifts the last ones by P·δ; the lag product changes little over an
	// eighth of a period, so a level folding P periods resolves δ ≈ T/(8P).
	// Start from 8 periods and ±6 % (the autocorrelation's accuracy), then
	// fold four times as many periods with a step four times finer.
	span = min(len(x), span)
	for {
		// Fold the span where the sweep is strongest: in a block it only
		// partly fills, the start of the block may hold none of it.
		at := strongestSpan(mag, span)
		seg, tot := lp[at:at+span], mag[at+span]-mag[at]
		best, bestI := -1.0, 0
		var cs [13]float64
		for i := -half; i <= half; i++ {
			cs[i+6] = coherence(z, seg, tot, fs, period+float64(i)*step)
			if cs[i+6] > best {
				best, bestI = cs[i+6], i
			}
		}
		// Parabolic refinement between the grid points.
		delta := 0.0
		if bestI > -half && bestI < half {
			a, b, c := cs[bestI+5], cs[bestI+6], cs[bestI+7]
			if den := a - 2*b + c; den < 0 {
				delta = 0.5 * (a - c) / den
			}
		}
		period += (float64(bestI) + delta) * step
		edge = bestI == -half || bestI == half
		if span == len(x) {
			break
		}
		span = min(len(x), span*4)
		step /= 4
		half = 3 // the previous level left the period within a step or two
	}
	coh := coherence(z, lp, mag[len(x)], fs, period)
	// The profile, at most maxProfile points (a long period's bins are
	// summed in groups first), each weighted by its |Z_b|: where the sweep
	// is absent for part of the period (it leaves the band), the bins hold
	// only noise, which must not vote on the shape.
	groups := (bins + maxProfile - 1) / maxProfile
	np := bins / groups
	if cap(d.prof) < 2*np {
		d.prof = make([]float64, 2*np)
	}
	prof, wts := d.prof[:np], d.prof[np:2*np]
	for b := 0; b < np; b++ {
		var v complex128
		for _, zz := range z[b*groups : (b+1)*groups] {
			v += zz
		}
		prof[b] = fs / (2 * math.Pi) * cmplx.Phase(v)
		wts[b] = cmplx.Abs(v)
	}
	sw, ok = sweepFromProfile(prof, wts, period)
	sw.Coherent = coh
	sw.SpanHz = sw.HighHz - sw.LowHz
	// The sweep's power while present: a folded bin's lag products add
	// coherently to J·count (the noise terms average out), so J is the
	// mean |Z_b|/count over the bins where the sweep is (weight above a
	// quarter of the most), and duty is their share of the period.
	{
		top := 0.0
		for _, v := range z {
			top = math.Max(top, cmplx.Abs(v))
		}
		var sum float64
		var on int
		for _, v := range z {
			if a := cmplx.Abs(v); a >= top/4 {
				sum += a
				on++
			}
		}
		if on > 0 {
			sw.Power = sum / float64(on) / (float64(len(x)) / float64(bins))
			sw.Duty = float64(on) / float64(bins)
			// A chirp's folded magnitude is even where it is present (a
			// constant envelope sweeping); two beating tones' swings with
			// their beat.
			mean := sum / float64(on)
			var v float64
			for _, z := range z {
				if a := cmplx.Abs(z); a >= top/4 {
					v += (a - mean) * (a - mean)
				}
			}
			sw.Even = math.Sqrt(v/float64(on)) <= maxSweepUnevenness*mean
		}
	}
	if ok && sw.SpanHz > 0.95*fs {
		// Wider than the band: say which part of it was seen, where the
		// fold found the sweep (weight above a quarter of the most).
		top := 0.0
		for _, w := range wts {
			top = math.Max(top, w)
		}
		lo, hi := math.Inf(1), math.Inf(-1)
		for b, w := range wts {
			if w >= top/4 {
				lo, hi = math.Min(lo, prof[b]), math.Max(hi, prof[b])
			}
		}
		sw.Beyond = true
		sw.LowHz, sw.HighHz = math.Max(lo, -fs/2), math.Min(hi, fs/2)
	}
	return sw, ok, edge
}

// maxProfile bounds the points of the sweep profile analysed for shape.
const maxProfile = 256

// strongestSpan returns the start of the span-sample window with the
// largest Σ|z|, from the running sums mag (mag[i] = Σ_{n<i} |z[n]|),
// searched in steps of a quarter span.
func strongestSpan(mag []float64, span int) int {
	n := len(mag) - 1
	best, at := -1.0, 0
	step := max(span/4, 1)
	for s := 0; s+span <= n; s += step {
		if e := mag[s+span] - mag[s]; e > best {
			best, at = e, s
		}
	}
	if e := mag[n] - mag[n-span]; e > best {
		at = n - span
	}
	return at
}

// coherence folds the lag products lp modulo period t into len(z) phase
// bins and returns Σ_b |Z_b| / tot, tot being Σ|lp[n]|.
func coherence(z []complex128, lp []complex64, tot, fs, t float64) float64 {
	clear(z)
	nb := len(z)
	// The phase bin advances by bins/(t·fs) per sample; keep it as a
	// running fixed-point value (bins·2^32 per period), wrapped, instead
	// of a floor per sample: an integer addition per sample, where a
	// floating-point one would chain its latency through the loop.
	const one = 1 << 32
	inc := uint64(math.Round(float64(nb) / (t * fs) * one))
	wrap := uint64(nb) * one
	ph := uint64(0)
	for i := range lp {
		z[ph>>32] += complex128(lp[i])
		ph += inc
		if ph >= wrap {
			ph -= wrap
		}
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
// instantaneous-frequency profile, each point weighted (w: the fold's
// |Z_b|; a point where the sweep is absent carries little). The shape is
// the template (sawtooth ramp or triangle) with the highest weighted
// correlation coefficient over all circular alignments, which stays
// reliable where the profile is too noisy for slope signs; the sign of the
// ramp's correlation tells up from down. Rate and edges come from a
// weighted least-squares line through the aligned ramp (through the
// falling half, for a triangle). A sweep that leaves the band for part of
// its period shows a ramp with a gap, still a ramp.
func sweepFromProfile(prof, w []float64, period float64) (SweepParams, bool) {
	n := len(prof)
	c := float64(n-1) / 2
	bestRamp, rampAt, bestTri, triAt := 0.0, 0, 0.0, 0
	for r := 0; r < n; r++ {
		// Weighted Pearson correlation of the profile rotated by r with the
		// ramp i − c and the V |i − c|.
		var sw, sv, svv, sr, srr, srv, st, stt, stv float64
		for i := 0; i < n; i++ {
			j := r + i
			if j >= n {
				j -= n
			}
			wi, v := w[j], prof[j]
			ri := float64(i) - c
			ti := math.Abs(ri)
			sw += wi
			sv += wi * v
			svv += wi * v * v
			sr += wi * ri
			srr += wi * ri * ri
			srv += wi * ri * v
			st += wi * ti
			stt += wi * ti * ti
			stv += wi * ti * v
		}
		if sw <= 0 {
			return SweepParams{}, false
		}
		vv := svv - sv*sv/sw
		rr := srr - sr*sr/sw
		tt := stt - st*st/sw
		if vv <= 0 || rr <= 0 || tt <= 0 {
			continue
		}
		if cr := (srv - sr*sv/sw) / math.Sqrt(rr*vv); math.Abs(cr) > math.Abs(bestRamp) {
			bestRamp, rampAt = cr, r
		}
		if ct := (stv - st*sv/sw) / math.Sqrt(tt*vv); ct > bestTri {
			// A V template peaks at its ends: its best alignment starts
			// at the profile's maximum.
			bestTri, triAt = ct, r
		}
	}
	if bestRamp == 0 && bestTri == 0 {
		return SweepParams{}, false
	}
	dt := period / float64(n)
	sw := SweepParams{PeriodS: period, Fit: math.Max(math.Abs(bestRamp), bestTri)}
	if math.Abs(bestRamp) >= bestTri {
		sw.Shape = "up"
		if bestRamp < 0 {
			sw.Shape = "down"
		}
		// Over one period the ramp covers the span once: span = |slope|·n,
		// centred on the line's mid value.
		slope, icpt := fitRamp(prof, w, rampAt, n, 0.1)
		sw.RateHzS = slope / dt
		mid, span := icpt+slope*float64(n-1)/2, math.Abs(slope)*float64(n)
		sw.LowHz, sw.HighHz = mid-span/2, mid+span/2
	} else {
		sw.Shape = "triangle"
		// The V template aligned at triAt falls over its first half: fit
		// the falling half, the sweep's down leg.
		half := n / 2
		slope, icpt := fitRamp(prof, w, triAt, half, 0.1)
		sw.RateHzS = math.Abs(slope) / dt
		mid, span := icpt+slope*float64(half-1)/2, math.Abs(slope)*float64(n)/2
		sw.LowHz, sw.HighHz = mid-span/2, mid+span/2
	}
	return sw, sw.HighHz > sw.LowHz
}

// fitRamp fits a weighted least-squares line to length samples of prof
// starting at start (circularly), ignoring trim of each end, and returns
// the slope per bin and the line's value at the ramp's start.
func fitRamp(prof, w []float64, start, length int, trim float64) (slope, icpt float64) {
	n := len(prof)
	a, b := int(trim*float64(length)), int((1-trim)*float64(length))
	var sx, sy, sxx, sxy, m float64
	for i := a; i < b; i++ {
		x := float64(i)
		j := (start + i) % n
		y, wi := prof[j], w[j]
		sx += wi * x
		sy += wi * y
		sxx += wi * x * x
		sxy += wi * x * y
		m += wi
	}
	den := m*sxx - sx*sx
	if den == 0 {
		return 0, 0
	}
	slope = (m*sxy - sx*sy) / den
	icpt = (sy - slope*sx) / m
	return slope, icpt
}

// fastAtan2 approximates atan2(y, x) to within about 0.005 rad with the
// rational form atan(u) ≈ u/(1 + 0.28125·u²) for |u| ≤ 1 (a common
// practice approximation; ample for the periodicity statistic, which
// correlates phase steps over thousands of samples). It does not allocate
// and avoids math.Atan2's cost in the per-sample loop.
func fastAtan2(y, x float32) float32 {
	const pi, halfPi = float32(math.Pi), float32(math.Pi / 2)
	if x == 0 && y == 0 {
		return 0
	}
	ax, ay := x, y
	if ax < 0 {
		ax = -ax
	}
	if ay < 0 {
		ay = -ay
	}
	var r float32
	if ax >= ay {
		u := ay / ax
		r = u / (1 + 0.28125*u*u)
	} else {
		u := ax / ay
		r = halfPi - u/(1+0.28125*u*u)
	}
	if x < 0 {
		r = pi - r
	}
	if y < 0 {
		r = -r
	}
	return r
}

// sweptFootprint is what a sweep accounts for besides itself: everything
// inside its span (±2 bins: its comb of lines, partial bursts at its
// start and end, its passes through a sub-band, which look like pulses
// there, no stronger than itself), the level it lifts when it covers most
// of the band, and its skirts. A chirp cut at each period's end (flyback, turnaround)
// leaks beyond its edges: by stationary phase the sweep's in-band density
// is J/S for span S, and the endpoint term of a chirp cut at an edge
// frequency falls as 1/(2πΔf) in amplitude, so Δf beyond the edge the
// density is at most about 2·μ/(4π²Δf²) of the in-band one for sweep rate
// μ (two endpoints per period; common practice for truncated linear FM).
// A finding outside the span is explained when its density stands at most
// 4× that (scatter of one block); a tone is one line of the skirt's comb,
// which carries the density over one line spacing 1/T (period T).
// sweepPassPRITol is how close a pulse train's PRI must come to a sweep's
// period to be its passes: 3 % (the sweep's period is measured to 2 %,
// the tolerance; a PRI over a block to well under 1 %).
const sweepPassPRITol = 0.03

func sweptFootprint(c, x *Finding, g *grid) bool {
	class, lo, hi, jn := x.Class, x.LowHz, x.HighHz, x.JN
	if c.Sweep == nil {
		return false
	}
	if class == ClassWidebandNoise {
		return jn <= 2*c.JN
	}
	sl, sh := c.LowHz-2*g.bin, c.HighHz+2*g.bin
	if class == ClassPulsed {
		// The sweep's passes through a sub-band look like pulses there,
		// at about the sweep's own power (4×: the pass's peak over the
		// sweep's mean in a shaped band).
		// Pulses that recur at the sweep's period (or half of it: a
		// triangle passes twice) are its passes whatever their level: a
		// low-bit or clipping front end measures a pass's peak and the
		// sweep's mean on different scales.
		if overlaps(x.OffsetHz, x.OffsetHz, sl, sh) && x.Pulse != nil && c.Sweep.PeriodS > 0 {
			for _, p := range [2]float64{c.Sweep.PeriodS, c.Sweep.PeriodS / 2} {
				if math.Abs(x.Pulse.PRIS-p) <= sweepPassPRITol*p {
					return true
				}
			}
		}
		return overlaps(x.OffsetHz, x.OffsetHz, sl, sh) && jn <= 4*c.JN
	}
	if overlaps(lo, hi, sl, sh) {
		return true
	}
	// The distance to the nearer edge, the band's ends wrapping round (a
	// skirt beyond −fs/2 comes back in at +fs/2: aliasing).
	d := math.Max(sl-hi, lo-sh)
	for _, wrap := range [2]float64{-g.fs, g.fs} {
		if dd := math.Max(sl+wrap-hi, lo-sh-wrap); dd >= 0 && dd < d {
			d = dd
		}
	}
	span := math.Max(c.HighHz-c.LowHz, g.bin)
	mu := math.Abs(c.Sweep.RateHzS)
	r := 2 * mu / (4 * math.Pi * math.Pi * d * d)
	w := math.Max(hi-lo, g.bin)
	if class == ClassCW && c.Sweep.PeriodS > 0 {
		w = math.Max(w, 1/c.Sweep.PeriodS)
	}
	return jn/w <= 4*r*c.JN/span
}

// isSweepComb reports whether tones form a long regular comb: the line
// spectrum of a periodic sweep seen in a block where the sweep itself could
// not be measured (it covers only part of the block). Such a block raises
// no cw event; the sweep is picked up where it fills a block, and its start
// is then refined back into this one.
func isSweepComb(t []ToneParam) bool {
	if len(t) < 8 {
		return false
	}
	gaps := make([]float64, len(t)-1)
	for i := range gaps {
		gaps[i] = t[i+1].OffsetHz - t[i].OffsetHz
	}
	med := medianOf(gaps)
	regular := 0
	for _, g := range gaps {
		if math.Abs(g-med) < 0.1*med {
			regular++
		}
	}
	return regular >= len(gaps)*2/3
}
