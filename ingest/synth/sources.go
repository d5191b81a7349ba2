package synth

import (
	"math"
	"math/cmplx"
	"math/rand/v2"

	"gonum.org/v1/gonum/dsp/fourier"

	"quietband/ingest/gpsca"
)

// A source adds its contribution to dst, whose first sample is sample n0 of
// the capture. Sources keep state between calls, which must come in order.
type source interface {
	add(dst []complex64, n0 int64)
}

// span is the sample range [lo, hi) an emitter is on.
type span struct{ lo, hi int64 }

// clip returns the part of dst (starting at n0) inside the span, and the
// offset of that part in dst.
func (s span) clip(dst []complex64, n0 int64) ([]complex64, int64) {
	lo, hi := max(s.lo, n0), min(s.hi, n0+int64(len(dst)))
	if lo >= hi {
		return nil, 0
	}
	return dst[lo-n0 : hi-n0], lo
}

// gaussian adds circular complex Gaussian noise of variance sigma2
// (sigma2/2 per component).
type gaussian struct {
	rng *rand.Rand
	sd  float64
	on  span
}

func newGaussian(rng *rand.Rand, sigma2 float64, on span) *gaussian {
	return &gaussian{rng: rng, sd: math.Sqrt(sigma2 / 2), on: on}
}

func (g *gaussian) add(dst []complex64, n0 int64) {
	d, _ := g.on.clip(dst, n0)
	for i := range d {
		d[i] += complex(float32(g.rng.NormFloat64()*g.sd), float32(g.rng.NormFloat64()*g.sd))
	}
}

// tone adds A·exp(j(2π f n/fs + φ0)). The phase is recomputed exactly at
// each call and rotated within it, so there is no drift over long captures.
type tone struct {
	amp, cyclesPerSample, phase0 float64
	on                           span
}

func (t *tone) add(dst []complex64, n0 int64) {
	d, lo := t.on.clip(dst, n0)
	if d == nil {
		return
	}
	_, frac := math.Modf(t.cyclesPerSample * float64(lo))
	p := cmplx.Rect(t.amp, 2*math.Pi*frac+t.phase0)
	rot := cmplx.Rect(1, 2*math.Pi*t.cyclesPerSample)
	for i := range d {
		d[i] += complex64(p)
		p *= rot
	}
}

// chirp adds a constant-envelope linear FM sweep between low and high Hz,
// with period T: "up" and "down" are sawtooth sweeps, "triangle" goes up in
// the first half-period and down in the second.
//
// A sweep that leaves the band (shaped) has its amplitude follow the
// recorder's anti-alias response at its instantaneous frequency
// (antiAliasGain), so that nothing of it aliases.
type chirp struct {
	amp, low, high, period, fs float64
	shape                      string
	cycles                     float64 // phase accumulator, cycles
	on                         span
	shaped                     bool
}

func (c *chirp) freq(t float64) float64 {
	u := math.Mod(t, c.period) / c.period
	switch c.shape {
	case "down":
		return c.high - (c.high-c.low)*u
	case "triangle":
		if u < 0.5 {
			return c.low + (c.high-c.low)*2*u
		}
		return c.high - (c.high-c.low)*2*(u-0.5)
	}
	return c.low + (c.high-c.low)*u
}

func (c *chirp) add(dst []complex64, n0 int64) {
	if c.shaped {
		c.addShaped(dst, n0)
		return
	}
	d, lo := c.on.clip(dst, n0)
	for i := range d {
		t := float64(lo+int64(i)-c.on.lo) / c.fs
		s, co := math.Sincos(2 * math.Pi * c.cycles)
		d[i] += complex(float32(c.amp*co), float32(c.amp*s))
		// Trapezoidal phase step; at a sawtooth flyback the frequency jumps.
		f0, f1 := c.freq(t), c.freq(t+1/c.fs)
		if math.Abs(f1-f0) > (c.high-c.low)/2 {
			f1 = f0
		}
		c.cycles += (f0 + f1) / 2 / c.fs
		c.cycles -= math.Floor(c.cycles)
	}
}

// addShaped is add with the amplitude A·antiAliasGain(f(t)).
func (c *chirp) addShaped(dst []complex64, n0 int64) {
	d, lo := c.on.clip(dst, n0)
	for i := range d {
		t := float64(lo+int64(i)-c.on.lo) / c.fs
		f0, f1 := c.freq(t), c.freq(t+1/c.fs)
		if a := c.amp * antiAliasGain(f0, c.fs); a != 0 {
			s, co := math.Sincos(2 * math.Pi * c.cycles)
			d[i] += complex(float32(a*co), float32(a*s))
		}
		if math.Abs(f1-f0) > (c.high-c.low)/2 {
			f1 = f0
		}
		c.cycles += (f0 + f1) / 2 / c.fs
		c.cycles -= math.Floor(c.cycles)
	}
}

// antiAliasFlat is where the modelled recorder's anti-alias filter starts
// to roll off, as a fraction of fs/2: the outer 20 % of each half band
// rolls off (REFERENCES §12.6 [M]: treat the outer 10–20 % as roll-off).
const antiAliasFlat = 0.8

// antiAliasGain is the amplitude response of the modelled anti-alias
// filter at offset f: 1 up to antiAliasFlat·fs/2, a raised cosine
// ½(1 + cos(π·x)) down to 0 at fs/2 (x from 0 to 1 across the roll-off),
// 0 beyond. Applied to a sweep's instantaneous frequency, it stands for
// the analog filter when the sweep dwells several samples in the roll-off;
// a faster sweep is gated more abruptly than a real filter would do it.
func antiAliasGain(f, fs float64) float64 {
	a := math.Abs(f) / (fs / 2)
	switch {
	case a <= antiAliasFlat:
		return 1
	case a >= 1:
		return 0
	}
	return 0.5 * (1 + math.Cos(math.Pi*(a-antiAliasFlat)/(1-antiAliasFlat)))
}

// sweepLeavesBand reports whether a sweep from lo to hi Hz reaches ±fs/2.
func sweepLeavesBand(lo, hi, fs float64) bool { return lo <= -fs/2 || hi >= fs/2 }

// sweepInBandFraction is the part of a linear sweep from lo to hi Hz
// spent inside ±fs/2.
func sweepInBandFraction(lo, hi, fs float64) float64 {
	in := min(hi, fs/2) - max(lo, -fs/2)
	return max(0, in) / (hi - lo)
}

// pulses adds a carrier at offset Hz keyed by a pulse train: one pulse (or
// pair) every pri seconds, the first at first seconds after the emitter
// starts. gaussian pulses are exp(−α t²/2) (peak 1); rect ones are 1 for
// width seconds.
//
// A hopping train (channels non-empty, cycles per sample) sends pulse k on
// channels[hop(k)], hop a hash of k and the emitter's key, each channel's
// carrier phase continuous in the sample index.
type pulses struct {
	amp, cyclesPerSample, fs float64
	gaussian                 bool
	width, pri, pair, first  float64
	on                       span
	channels                 []float64
	hopKey                   uint64
}

// gaussReach is how far a Gaussian pulse reaches: exp(−α t²/2) < 6·10⁻⁷
// beyond 8 µs.
const gaussReach = 8e-6

func (p *pulses) envelope(t float64) float64 {
	k := math.Floor((t - p.first) / p.pri)
	var e float64
	if p.gaussian {
		// Every pair with a pulse within gaussReach of t, including the
		// tail of earlier pairs when the PRI is short.
		reach := math.Abs(p.pair) + gaussReach
		for kk := math.Floor((t - p.first - reach) / p.pri); kk <= math.Floor((t-p.first+reach)/p.pri); kk++ {
			t0 := p.first + kk*p.pri
			for _, c := range [2]float64{t0, t0 + p.pair} {
				if dt := t - c; math.Abs(dt) < gaussReach {
					e += math.Exp(-DMEAlpha * dt * dt / 2)
				}
			}
		}
		return e
	}
	for _, kk := range [2]float64{k, k + 1} {
		if t0 := p.first + kk*p.pri; t >= t0 && t < t0+p.width {
			e += 1
		}
	}
	return e
}

func (p *pulses) add(dst []complex64, n0 int64) {
	if len(p.channels) > 0 {
		p.addHopping(dst, n0)
		return
	}
	d, lo := p.on.clip(dst, n0)
	for i := range d {
		n := lo + int64(i)
		e := p.envelope(float64(n-p.on.lo) / p.fs)
		if e == 0 {
			continue
		}
		_, frac := math.Modf(p.cyclesPerSample * float64(n))
		s, c := math.Sincos(2 * math.Pi * frac)
		d[i] += complex(float32(p.amp*e*c), float32(p.amp*e*s))
	}
}

// hop is the channel index of pulse k: SplitMix64 (Steele, Lea & Flood
// 2014) of the key plus k, reduced modulo the number of channels (the
// modulo bias is below 256/2⁶⁴).
func (p *pulses) hop(k int64) int {
	z := p.hopKey + uint64(k)*0x9e3779b97f4a7c15
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	z ^= z >> 31
	return int(z % uint64(len(p.channels)))
}

// addHopping adds a hopping train: every pulse (or pair) within reach of
// each sample, on its own channel.
func (p *pulses) addHopping(dst []complex64, n0 int64) {
	d, lo := p.on.clip(dst, n0)
	reach := 0.0
	if p.gaussian {
		reach = math.Abs(p.pair) + gaussReach
	}
	for i := range d {
		n := lo + int64(i)
		t := float64(n-p.on.lo) / p.fs
		k0 := int64(math.Floor((t - p.first - reach) / p.pri))
		k1 := int64(math.Floor((t - p.first + reach) / p.pri))
		for k := k0; k <= k1; k++ {
			t0 := p.first + float64(k)*p.pri
			var e float64
			if p.gaussian {
				for _, c := range [2]float64{t0, t0 + p.pair} {
					if dt := t - c; math.Abs(dt) < gaussReach {
						e += math.Exp(-DMEAlpha * dt * dt / 2)
					}
				}
			} else if t >= t0 && t < t0+p.width {
				e = 1
			}
			if e == 0 {
				continue
			}
			_, frac := math.Modf(p.channels[p.hop(k)] * float64(n))
			s, c := math.Sincos(2 * math.Pi * frac)
			d[i] += complex(float32(p.amp*e*c), float32(p.amp*e*s))
		}
	}
}

// keyed switches a source on and off: the source runs on (so its phase
// and state go on), but only the samples inside the on spans are added.
type keyed struct {
	src     source
	on      []span
	scratch []complex64
}

func (k *keyed) add(dst []complex64, n0 int64) {
	if cap(k.scratch) < len(dst) {
		k.scratch = make([]complex64, len(dst))
	}
	s := k.scratch[:len(dst)]
	clear(s)
	k.src.add(s, n0)
	for _, sp := range k.on {
		d, lo := sp.clip(dst, n0)
		if d == nil {
			continue
		}
		src := s[lo-n0:]
		for i := range d {
			d[i] += src[i]
		}
	}
}

// bandNoise adds Gaussian noise of variance sigma2 occupying bandwidth bw
// around offset Hz. It is synthesised in the frequency domain: blocks of n
// samples with independent complex Gaussian bins inside the band, inverse
// FFT, a sine window and 50 % overlap-add. The window satisfies
// w[i]² + w[i+n/2]² = sin² + cos² = 1, so the variance is the same at every
// sample, and a sum of Gaussians stays Gaussian.
type bandNoise struct {
	rng    *rand.Rand
	n      int
	plan   *fourier.CmplxFFT
	bins   []int
	scale  float64
	win    []float64
	spec   []complex128
	blk    []complex128
	out    []complex128 // the hop being emitted
	tail   []complex128 // second half of the last block
	pos    int
	on     span
	primed bool
}

func newBandNoise(rng *rand.Rand, fs, offset, bw, sigma2 float64, on span) *bandNoise {
	n := 8192
	for float64(n)*bw/fs < 32 && n < 1<<16 {
		n *= 2
	}
	b := &bandNoise{rng: rng, n: n, plan: fourier.NewCmplxFFT(n), on: on,
		win: make([]float64, n), spec: make([]complex128, n), blk: make([]complex128, n),
		out: make([]complex128, n/2), tail: make([]complex128, n/2)}
	df := fs / float64(n)
	for k := 0; k < n; k++ {
		f := float64(k) * df
		if k >= n/2 {
			f -= fs
		}
		if f >= offset-bw/2 && f < offset+bw/2 {
			b.bins = append(b.bins, k)
		}
	}
	if len(b.bins) == 0 {
		b.bins = []int{(int(math.Round(offset/df)) + n) % n}
	}
	// x[m] = Σ X_k e^{+j2πkm/n} (unnormalised inverse), so
	// E|x|² = K·E|X|² = K·2·scale² = sigma2.
	b.scale = math.Sqrt(sigma2 / float64(len(b.bins)) / 2)
	for i := range b.win {
		b.win[i] = math.Sin(math.Pi * (float64(i) + 0.5) / float64(n))
	}
	return b
}

// block draws one windowed block into b.blk.
func (b *bandNoise) block() {
	clear(b.spec)
	for _, k := range b.bins {
		b.spec[k] = complex(b.rng.NormFloat64()*b.scale, b.rng.NormFloat64()*b.scale)
	}
	b.plan.Sequence(b.blk, b.spec)
	for i := range b.blk {
		b.blk[i] *= complex(b.win[i], 0)
	}
}

// hop overlap-adds the next block and makes the next n/2 samples ready.
func (b *bandNoise) hop() {
	b.block()
	h := b.n / 2
	for j := 0; j < h; j++ {
		b.out[j] = b.tail[j] + b.blk[j]
	}
	copy(b.tail, b.blk[h:])
	b.pos = 0
}

func (b *bandNoise) add(dst []complex64, n0 int64) {
	d, _ := b.on.clip(dst, n0)
	if d == nil {
		return
	}
	if !b.primed {
		b.block()
		copy(b.tail, b.blk[b.n/2:])
		b.hop()
		b.primed = true
	}
	for i := range d {
		if b.pos == len(b.out) {
			b.hop()
		}
		d[i] += complex64(b.out[b.pos])
		b.pos++
	}
}

// satellite adds one GPS L1 C/A signal: amplitude sqrt(C), ±1 data bits at
// 50 bit/s aligned to code epochs, the code sampled at the Doppler-shifted
// chip rate 1.023 MHz·(1 + fD/L1) (code Doppler fD/1540, IS-GPS-200), and
// the carrier at (L1 − centre) + fD.
type satellite struct {
	amp                     float64
	code                    [gpsca.CodeLength]int8
	bits                    []int8
	chip0, chipsPerSample   float64
	cyclesPerSample, phase0 float64
}

func (s *satellite) add(dst []complex64, n0 int64) {
	_, frac := math.Modf(s.cyclesPerSample * float64(n0))
	p := cmplx.Rect(s.amp, 2*math.Pi*frac+s.phase0)
	rot := cmplx.Rect(1, 2*math.Pi*s.cyclesPerSample)
	for i := range dst {
		ph := s.chip0 + float64(n0+int64(i))*s.chipsPerSample
		c := int64(ph)
		v := float64(s.code[c%gpsca.CodeLength] * s.bits[(c/(gpsca.CodeLength*20))%int64(len(s.bits))])
		dst[i] += complex64(p * complex(v, 0))
		p *= rot
	}
}
