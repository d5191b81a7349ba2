package ingest

import (
	"fmt"
	"math"
	"unsafe"
)

// LOSide says on which side of the RF band a real-IF front end's local
// oscillator sits, and so whether the IF spectrum is upright.
type LOSide uint8

// LO sides.
const (
	LOSideUnknown LOSide = iota
	// LowSide: RF = LO + IF. A signal at RF centre + f lies at IF + f:
	// the spectrum is upright.
	LowSide
	// HighSide: RF = LO − IF. A signal at RF centre + f lies at IF − f:
	// the spectrum is inverted (REFERENCES §12.2).
	HighSide
)

// String is "low", "high" or "unknown".
func (s LOSide) String() string {
	switch s {
	case LowSide:
		return "low"
	case HighSide:
		return "high"
	}
	return "unknown"
}

// ParseLOSide parses "low" or "high".
func ParseLOSide(s string) (LOSide, error) {
	switch s {
	case "low":
		return LowSide, nil
	case "high":
		return HighSide, nil
	}
	return LOSideUnknown, fmt.Errorf("LO side %q: use low (RF = LO + IF) or high (RF = LO − IF)", s)
}

// IFConversion says how a real-valued capture becomes complex baseband:
// the IF (Hz, the centre of the wanted band in the real signal) and the
// LO side. The Reader mixes the real samples by −IF, low-pass filters them
// with the half-band filter HalfBandTaps and keeps every second sample
// (REFERENCES §12.1): the complex stream is at half the file's rate,
// centred on the RF frequency of the IF centre, and upright whatever the
// LO side (a high-side LO's inverted spectrum is conjugated back).
//
// When the IF is a quarter of the file rate (within 1e-9 of it) the mixer
// is the sequence 1, −j, −1, +j and the conversion needs no
// multiplications for it (Lyons; REFERENCES §12.1); any other IF within
// [0.2, 0.3] of the file rate takes a numerically controlled oscillator
// (float64) and twice the filtering. Cost per complex sample on the 2-CPU
// development machine (BenchmarkIFConvert): about 2 ns at fs/4, 7.5 ns
// through the oscillator.
// Outside that range the mirror image of the band would fall inside the
// passband of the filter, and the conversion is refused.
//
// An error δ in the stated IF shifts every frequency of the complex stream
// by −δ (and every satellite's Doppler with it).
type IFConversion struct {
	IFHz float64
	Side LOSide
}

// Check refuses a conversion that cannot be made at file rate fs: no IF,
// no LO side, or an IF outside [0.2, 0.3]·fs. The errors name the settings
// to give; the caller adds the file.
func (c IFConversion) Check(fs float64) error {
	if c.IFHz == 0 {
		return fmt.Errorf("the IF is not known: give --if (Hz, the centre of the wanted band in the real signal) or the input's if_hz (SigMF: global quietband:if_hz)")
	}
	if !(c.IFHz > 0) || math.IsInf(c.IFHz, 0) {
		return fmt.Errorf("IF %g Hz must be a positive number of Hz", c.IFHz)
	}
	if c.Side != LowSide && c.Side != HighSide {
		return fmt.Errorf("the LO side is not known: give --lo-side low (RF = LO + IF) or high (RF = LO − IF), or the input's lo_side (SigMF: global quietband:lo_side)")
	}
	if r := c.IFHz / fs; r < ifMinFraction || r > ifMaxFraction {
		return fmt.Errorf("IF %g Hz is %.4g of the file rate %g samples/s; the real-to-complex conversion (mix by −IF, half-band filter, decimate by 2) needs it within %.1f–%.1f of the file rate (a quarter, %g Hz, is best), or the band's mirror image falls into the analysis band",
			c.IFHz, r, fs, ifMinFraction, ifMaxFraction, fs/4)
	}
	return nil
}

// The IF range, as fractions of the file rate, in which the band's mirror
// image stays out of the half-band filter's passband [0, 0.2·fs]: after
// mixing by −IF the negative-frequency half of the real spectrum lies in
// [−IF − fs/2, −IF], clear of ±0.2·fs exactly when 0.2·fs ≤ IF ≤ 0.3·fs
// [C].
const (
	ifMinFraction = 0.2
	ifMaxFraction = 0.3
)

// Half-band filter of the real-to-complex conversion.
//
// Design: a Kaiser-windowed ideal half-band low-pass (cut-off fs/4 of the
// input rate fs), 4·hbK − 1 = 47 taps, window β = 7.55 over the 48-sample
// span: h[n] = ½·sinc(n/2)·w[n], n = −(2·hbK − 1)…(2·hbK − 1). Every tap
// at an even offset other than 0 is zero (sinc(n/2) = 0), and
// H(f) + H(fs/2 − f) = 1 (REFERENCES §12.1), so only hbK distinct taps are
// multiplied. The taps are doubled here (gain 2): the wanted half of a
// real signal's spectrum then keeps its amplitude, so a real tone of
// amplitude A becomes a complex tone of magnitude A, and white real noise
// of RMS σ keeps its density in the passband: complex noise of RMS σ per
// component, less the 0.18 dB the transition band passes short of a brick
// wall (noise gain Σh² = 1.920 instead of 2).
//
// Response (TestHalfBandResponse, computed from the float32 taps on a
// dense grid): passband 0…0.2·fs (0…0.4 of the output rate) within
// ±0.0015 dB of gain 2; stopband 0.3·fs…0.5·fs at least 75 dB down. The
// transition band 0.2–0.3·fs is the outer fifth of each side of the
// output band (|f| > 0.4 of the output rate): there the band's mirror
// leaks in (−6 dB at the band edge), as with any half-band decimator;
// treat it as roll-off (REFERENCES §12.6). The filter has zero phase:
// complex sample n is centred on file sample 2n (the Reader reads ahead
// of it and pads the ends with zeros).
const (
	hbK    = 12
	hbBeta = 7.55
)

// HalfBandTaps returns the conversion filter's taps at offsets 0, ±1, ±3,
// …, ±(2·hbK − 1) as the Reader uses them (gain 2: the centre tap is 1):
// taps[0] is the centre, taps[i] the one at offsets ±(2i − 1).
func HalfBandTaps() []float32 {
	out := make([]float32, hbK+1)
	out[0] = 1
	copy(out[1:], hbTaps[:])
	return out
}

// hbTaps are the doubled taps at offsets ±(2i − 1), i = 1…hbK.
var hbTaps = designHalfBand()

// hbAlt are hbTaps with the sign (−1)^i of the fs/4 form (see
// ifConverter.outputQuarter).
var hbAlt = func() (a [hbK]float32) {
	for i := range a {
		a[i] = hbTaps[i]
		if (i+1)%2 == 1 {
			a[i] = -a[i]
		}
	}
	return a
}()

func designHalfBand() (g [hbK]float32) {
	span := float64(2 * hbK) // the window reaches zero-valued taps at ±2·hbK
	for i := 1; i <= hbK; i++ {
		n := float64(2*i - 1)
		sinc := math.Sin(math.Pi*n/2) / (math.Pi * n / 2)
		r := n / span
		w := besselI0(hbBeta*math.Sqrt(1-r*r)) / besselI0(hbBeta)
		g[i-1] = float32(2 * 0.5 * sinc * w)
	}
	return g
}

// besselI0 is the modified Bessel function of the first kind, order 0,
// by its power series Σ ((x/2)^k / k!)² (Abramowitz & Stegun 9.6.12),
// summed until the terms no longer change the sum.
func besselI0(x float64) float64 {
	sum, term := 1.0, 1.0
	for k := 1; k < 500; k++ {
		term *= x / 2 / float64(k)
		t := term * term
		sum += t
		if t < sum*1e-17 {
			break
		}
	}
	return sum
}

// ifConverter turns real samples into complex baseband, streaming.
//
// The real samples are kept as pairs: pair p holds file samples 2p and
// 2p+1 as its real and imaginary parts (the layout in which the complex
// twin format decodes them). Output m is centred on file sample 2m and
// needs pairs m − hbK … m + hbK − 1, so the converter keeps hbK pairs of
// history and the Reader reads hbK pairs ahead of the outputs it asks for;
// before the first and after the last file sample the samples are zero.
type ifConverter struct {
	quarter bool    // IF = fs/4: the multiplier-free mixer
	invert  bool    // high-side LO: conjugate the output
	cyc     float64 // IF/fs, cycles per file sample (general IF)
	pairs   []complex64
	// The streams the filter runs on, indexed as pairs (j ↔ pair base+j),
	// contiguous for the vector kernel. IF = fs/4: even[j] = real(pairs[j]),
	// odd[j] = imag(pairs[j]). General IF: the mixed samples y[k] =
	// x[k]·e^(−j2π·cyc·k), evenRe/evenIm = y[2p] and oddRe/oddIm =
	// (−1)^p·y[2p+1] (see outputGeneral).
	even, odd, evenIm, oddIm []float32
	bufs                     [][]complex64 // what even … oddIm are cut from, for the pool
	scratch                  []complex64   // general IF: one block of the real parts' filter output
	base                     int64         // pair index of pairs[0]
	have                     int64         // pairs base … have−1 are filled
}

func newIFConverter(c IFConversion, fs float64, blockSamples int) *ifConverter {
	v := &ifConverter{invert: c.Side == HighSide, cyc: c.IFHz / fs}
	v.quarter = math.Abs(4*c.IFHz-fs) <= 1e-9*fs
	n := blockSamples + 2*hbK + 1
	v.pairs = samplePool.get(n)
	// Each complex buffer of n holds two float32 streams of n.
	split := func() (a, b []float32) {
		buf := samplePool.get(n)
		v.bufs = append(v.bufs, buf)
		r := realsOf(buf)
		return r[:n:n], r[n:]
	}
	v.even, v.odd = split()
	if !v.quarter {
		v.evenIm, v.oddIm = split()
		v.scratch = samplePool.get(blockSamples)
		v.bufs = append(v.bufs, v.scratch)
	}
	v.reset()
	return v
}

func (v *ifConverter) streams() [][]float32 {
	if v.quarter {
		return [][]float32{v.even, v.odd}
	}
	return [][]float32{v.even, v.odd, v.evenIm, v.oddIm}
}

func (v *ifConverter) reset() {
	v.base, v.have = -hbK, 0
	clear(v.pairs[:hbK])
	for _, x := range v.streams() {
		clear(x[:hbK])
	}
}

func (v *ifConverter) release() {
	samplePool.put(v.pairs)
	for _, b := range v.bufs {
		samplePool.put(b)
	}
	v.pairs, v.bufs, v.scratch = nil, nil, nil
	v.even, v.odd, v.evenIm, v.oddIm = nil, nil, nil, nil
}

// compact drops the pairs no output from m0 on needs.
func (v *ifConverter) compact(m0 int64) {
	drop := int(m0 - hbK - v.base)
	if drop <= 0 {
		return
	}
	keep := int(v.have - v.base)
	copy(v.pairs, v.pairs[drop:keep])
	for _, x := range v.streams() {
		copy(x, x[drop:keep])
	}
	v.base += int64(drop)
}

// slot returns room for the next n pairs (from pair index have on).
func (v *ifConverter) slot(n int) []complex64 {
	j := int(v.have - v.base)
	return v.pairs[j : j+n]
}

// commit takes the n pairs written into slot(n) (or zeros, for padding).
func (v *ifConverter) commit(n int) {
	if v.quarter {
		j := int(v.have - v.base)
		ev, od := v.even[j:j+n], v.odd[j:j+n]
		for i, p := range v.pairs[j : j+n] {
			ev[i], od[i] = real(p), imag(p)
		}
	} else {
		v.mix(v.have, n)
	}
	v.have += int64(n)
}

// pad appends zero pairs up to pair index end.
func (v *ifConverter) pad(end int64) {
	if n := int(end - v.have); n > 0 {
		clear(v.slot(n))
		v.commit(n)
	}
}

// mix forms the mixed samples y[k] = x[k]·e^(−j2π·cyc·k) of the n pairs
// from pair index p0 into the four streams (the odd ones times (−1)^p):
// the oscillator starts each call from its exact phase (reduced modulo one
// cycle in float64) and steps by complex multiplication in float64 within
// it.
func (v *ifConverter) mix(p0 int64, n int) {
	ph := math.Mod(v.cyc*float64(2*p0), 1)
	s, c := math.Sincos(-2 * math.Pi * ph)
	rot := complex(c, s)
	s1, c1 := math.Sincos(-2 * math.Pi * v.cyc)
	step1 := complex(c1, s1)
	step2 := step1 * step1
	j := int(p0 - v.base)
	src := v.pairs[j : j+n]
	er, ei, or, oi := v.even[j:j+n], v.evenIm[j:j+n], v.odd[j:j+n], v.oddIm[j:j+n]
	sign := 1.0
	if p0%2 != 0 {
		sign = -1
	}
	for i, x := range src {
		r1 := rot * step1
		x0, x1 := float64(real(x)), sign*float64(imag(x))
		er[i], ei[i] = float32(x0*real(rot)), float32(x0*imag(rot))
		or[i], oi[i] = float32(x1*real(r1)), float32(x1*imag(r1))
		rot *= step2
		sign = -sign
	}
}

// output writes the complex samples m0 … m0+len(dst)−1 into dst; the pairs
// they need (up to m0 + len(dst) + hbK − 1) must be in.
func (v *ifConverter) output(dst []complex64, m0 int64) {
	if v.quarter {
		v.outputQuarter(dst, m0)
	} else {
		v.outputGeneral(dst, m0)
	}
}

// outputQuarter is the IF = fs/4 form. With the mixer (−j)^k, file
// samples x[k], e[p] = x[2p] and o[p] = x[2p+1], the zero-phase half-band
// output z[m] = Σ_k h[k]·x[2m−k]·(−j)^(2m−k) reduces to
//
//	z[m] = (−1)^m · (e[m] − j·Σ_{i=1…K} g_i·(−1)^i·(o[m−i] − o[m+i−1]))
//
// (g_i the doubled taps at offsets ±(2i−1), the centre tap 1): hbK
// multiplications per output sample and none for the mixer. The sum runs
// in halfBandQuarter (AVX where the CPU has it, the same operations in Go
// otherwise).
func (v *ifConverter) outputQuarter(dst []complex64, m0 int64) {
	j0 := int(m0 - v.base)
	s := float32(1)
	if m0%2 != 0 {
		s = -1
	}
	qs := float32(-1) // −j·S; the conjugate for a high-side LO
	if v.invert {
		qs = 1
	}
	var signs [2][8]float32 // (−1)^m for the real part, (−1)^m·qs for the imaginary
	for k := range 8 {
		signs[0][k], signs[1][k] = s, s*qs
		s = -s
	}
	halfBandQuarter(dst, v.even, v.odd, j0, &signs)
}

// hbAltVec are hbAlt's taps, each repeated 8 times, for the vector kernel.
var hbAltVec = func() (t [hbK][8]float32) {
	for i := range t {
		for k := range t[i] {
			t[i][k] = hbAlt[i]
		}
	}
	return t
}()

// halfBandQuarter writes z[m] for m = 0 … len(dst)−1, centred on pair j0+m
// of even and odd (which must hold pairs j0−hbK … j0+len(dst)+hbK−2), with
// the signs signs[0][m%8] on the real part and signs[1][m%8] on the
// imaginary one. The vector kernel takes the outputs eight at a time; the
// rest, and everything without it, goes through halfBandQuarterGo.
func halfBandQuarter(dst []complex64, even, odd []float32, j0 int, signs *[2][8]float32) {
	if len(dst) == 0 {
		return
	}
	_ = odd[j0-hbK]
	_ = odd[j0+len(dst)+hbK-2]
	_ = even[j0+len(dst)-1]
	done := 0
	if useVectorHalfBand {
		done = len(dst) &^ 7
		if done > 0 {
			halfBandQuarterAVX(&dst[0], &even[j0], &odd[j0], done, &hbAltVec, signs)
		}
	}
	halfBandQuarterGo(dst[done:], even, odd, j0+done, signs, done)
}

// halfBandQuarterGo is the Go twin of the vector kernel: the same float32
// operations in the same order (the explicit float32 conversions keep a
// compiler from fusing a product into the following sum). phase is the
// index of dst[0] in the sign pattern.
func halfBandQuarterGo(dst []complex64, even, odd []float32, j0 int, signs *[2][8]float32, phase int) {
	g := &hbAlt
	for m := range dst {
		w := (*[2 * hbK]float32)(odd[j0+m-hbK : j0+m+hbK]) // w[hbK+k] = o[m+k]
		d0 := float32(g[0] * (w[11] - w[12]))
		d1 := float32(g[1] * (w[10] - w[13]))
		d2 := float32(g[2] * (w[9] - w[14]))
		d3 := float32(g[3] * (w[8] - w[15]))
		d4 := float32(g[4] * (w[7] - w[16]))
		d5 := float32(g[5] * (w[6] - w[17]))
		d6 := float32(g[6] * (w[5] - w[18]))
		d7 := float32(g[7] * (w[4] - w[19]))
		d8 := float32(g[8] * (w[3] - w[20]))
		d9 := float32(g[9] * (w[2] - w[21]))
		d10 := float32(g[10] * (w[1] - w[22]))
		d11 := float32(g[11] * (w[0] - w[23]))
		a := float32(float32(d0+d1) + float32(d2+d3))
		b := float32(float32(d4+d5) + float32(d6+d7))
		c := float32(float32(d8+d9) + float32(d10+d11))
		sum := float32(float32(a+b) + c)
		k := (phase + m) % 8
		dst[m] = complex(even[j0+m]*signs[0][k], sum*signs[1][k])
	}
}

// outputGeneral is the NCO form, z[m] = y[2m] + Σ_i g_i·(y[2m−2i+1] +
// y[2m+2i−1]) on the mixed samples y, for the real and the imaginary parts
// of y. With the odd samples stored as yo'[p] = (−1)^p·y[2p+1], each sum is
// (−1)^m·Σ_i g_i·(−1)^i·(yo'[m−i] − yo'[m+i−1]): the fs/4 form's sum, so
// the same kernel (halfBandQuarter) computes both, with the signs (−1)^m
// on its sums and none on the even samples; the two results are then
// added up.
func (v *ifConverter) outputGeneral(dst []complex64, m0 int64) {
	j0 := int(m0 - v.base)
	s := float32(1)
	if m0%2 != 0 {
		s = -1
	}
	var signs [2][8]float32
	for k := range 8 {
		signs[0][k], signs[1][k] = 1, s
		s = -s
	}
	re := v.scratch[:len(dst)]
	halfBandQuarter(re, v.even, v.odd, j0, &signs)      // (y_re[2m], S_re)
	halfBandQuarter(dst, v.evenIm, v.oddIm, j0, &signs) // (y_im[2m], S_im)
	q := float32(1)
	if v.invert {
		q = -1
	}
	for m, a := range re {
		b := dst[m]
		dst[m] = complex(real(a)+imag(a), q*(real(b)+imag(b)))
	}
}

// realsOf views pairs of real samples as the real samples themselves: a
// complex64 is its real then its imaginary float32 in memory (the layout
// the gc and gccgo compilers give it, as C's float _Complex;
// TestRealsOfLayout checks it).
func realsOf(p []complex64) []float32 {
	if len(p) == 0 {
		return nil
	}
	return unsafe.Slice((*float32)(unsafe.Pointer(unsafe.SliceData(p))), 2*len(p))
}
