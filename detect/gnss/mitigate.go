package gnss

import (
	"math"

	"quietband/detect/fft"
)

// Mitigator removes interference from a copy of the acquisition snapshot,
// so that acquisition sees (nearly) Gaussian noise whatever the band holds.
// Three published pre-correlation methods run in order:
//
//  1. Frequency-domain excision over long frames (about 1 ms, so lines
//     about 1 kHz apart are resolved): continuous waves, groups of tones,
//     narrow noise bands, and the line spectra of periodic sweeps (a chirp
//     of period T_s is a comb of lines 1/T_s apart, whatever its span).
//  2. The same on short frames (about 16 µs; short-time excision): a slow
//     sweep that crosses the whole band within a long frame sits in a few
//     bins of a short one.
//  3. Time-domain pulse blanking: samples whose power exceeds a CFAR
//     threshold over the robust noise power, and a guard of 1 µs on each
//     side, are set to zero (Hegarty, Van Dierendonck, Bobyn, Grabowski
//     2000, "Suppression of pulsed interference through blanking", ION AM;
//     REFERENCES §6), unless they are so many that the envelope is not
//     impulsive (more than blankMaxFraction of the snapshot).
//
// Excision (Capozza, Holland, Hopkinson, Landrau 2000, "A single-chip
// narrow-band frequency-domain excisor for a Global Positioning System
// receiver", IEEE J. Solid-State Circuits 35(3), from memory; Borio 2010,
// PhD thesis, for the short-time form, from memory): each frame is
// weighted by a periodic Hann window, transformed, the bins whose power
// exceeds exciseFactor times the frame's median bin power are set to zero,
// and the frames, 50 % overlapped, are added back (the periodic Hann
// window sums to exactly 1 at 50 % overlap, so frames without a hit are
// passed unchanged). The Hann window's sidelobes (−31 dB, falling 18 dB
// per octave) keep a strong line's leakage to a few bins, where a
// rectangular frame would spread it over hundreds. For noise, a bin
// exceeds 15 times the median (10.4 times the mean of exponential bin
// powers) with probability e^{−10.4} ≈ 3·10⁻⁵, so the GNSS signals, far
// below the noise, lose nothing measurable. A Mitigator is not safe for
// concurrent use; it allocates only when a longer snapshot than before
// comes.
type Mitigator struct {
	fs          float64
	long, short excisor
	shorter     excisor
	guard       int
	sel         []float64
	hit         []bool    // samples over the blanking threshold
	frames      []float64 // per-frame bin powers of the passband estimate
	stats       MitigationStats
	// bandLo, bandHi (Hz from the centre) bound the band whose power
	// the passband estimate measures (SetBand); bandSet tells that one
	// was set.
	bandLo, bandHi float64
	bandSet        bool

	// What the last Mitigate decided, which MitigateBlock applies: the
	// excision stages that ran and the blanking thresholds of its two
	// passes (0: none).
	lines, transient bool
	blankThr         [2]float64
}

// MitigationStats says what Mitigate removed from one snapshot.
type MitigationStats struct {
	// ExcisedFraction is the fraction of the snapshot's power removed by
	// the two excision stages.
	ExcisedFraction float64
	// BlankedFraction is the fraction of samples blanked.
	BlankedFraction float64
	// NotImpulsive is set when more than blankMaxFraction of the samples
	// exceeded the blanking threshold, so that nothing was blanked (a
	// strong constant-envelope or wideband interference that excision did
	// not remove).
	NotImpulsive bool
	// BandPower is the snapshot's mean power per sample within the band
	// given to SetBand, before any mitigation (full-scale units: white
	// noise of variance σ² over the whole capture band gives σ² times
	// the band's fraction of it); HasBand is false when no band was set
	// or the snapshot was too short to measure it.
	BandPower float64
	HasBand   bool
}

// Interfered reports whether the snapshot carried interference that
// mitigation saw: more than 1 % of its power excised, any blanking, or
// an envelope too loud to blank.
func (s MitigationStats) Interfered() bool {
	return s.ExcisedFraction > 0.01 || s.BlankedFraction > 0 || s.NotImpulsive
}

const (
	// exciseFactor is how far above the frame's median bin power a bin
	// must stand to be removed (see Mitigator).
	exciseFactor = 15
	// blankFactor is the blanking threshold on |x|² over the robust
	// noise power σ̂² = median|x|²/ln 2 (the median of an exponential
	// variable is ln 2 times its mean): a Gaussian sample exceeds 13σ²
	// with probability e^{−13} ≈ 2·10⁻⁶ (REFERENCES §9, single-cell CFAR).
	blankFactor = 13
	// blankMaxFraction: if more samples than this exceed the threshold,
	// the envelope is not impulsive and blanking would remove the signal
	// with the interference; nothing is blanked.
	blankMaxFraction = 0.4
	// blankStride is the subsampling of the blanking threshold's median.
	blankStride = 8
	// excisionGuard is the number of bins removed on each side of an
	// excised bin.
	excisionGuard = 2
)

// excisor is one overlap-add excision stage of frame length n.
type excisor struct {
	n     int
	plan  *fft.Plan
	win   []float32
	frame []complex64 // windowed frame, then its excised output
	spec  []complex64
	pow   []float64
	sel   []float64
	carry []complex64 // second half of the previous frame's output
	// shape is the receiver's passband at this resolution, median 1 (see
	// Mitigator.passband): bin powers are compared with the threshold
	// after dividing by it.
	shape []float64
	// invShape and pow32 are exciseBlock's 1/shape and bin powers.
	invShape, pow32 []float32
}

func newExcisor(n int) excisor {
	e := excisor{n: n, plan: fft.NewPlan(n), win: make([]float32, n), frame: make([]complex64, n),
		spec: make([]complex64, n), pow: make([]float64, n), sel: make([]float64, n), carry: make([]complex64, n/2),
		shape: make([]float64, n), invShape: make([]float32, n), pow32: make([]float32, n)}
	for i := range e.win {
		e.win[i] = float32(0.5 - 0.5*math.Cos(2*math.Pi*float64(i)/float64(n)))
	}
	return e
}

// pow2Near returns the power of two nearest to v (in the log), at least lo.
func pow2Near(v float64, lo int) int {
	n := lo
	for float64(n)*math.Sqrt2 < v {
		n *= 2
	}
	return n
}

// NewMitigator returns a Mitigator for samples at fs: long frames of the
// power of two nearest 1 ms (4096 at 4 MS/s), short ones nearest 16 µs
// (64 at 4 MS/s).
func NewMitigator(fs float64) *Mitigator {
	return &Mitigator{
		fs:      fs,
		long:    newExcisor(pow2Near(fs*1e-3, 256)),
		short:   newExcisor(pow2Near(fs*16e-6, 32)),
		shorter: newExcisor(pow2Near(fs*6e-6, 16)),
		guard:   int(math.Ceil(fs * 1e-6)),
	}
}

// SetBand sets the band, lo to hi Hz from the capture's centre, whose
// power Mitigate measures on the snapshot as it is (MitigationStats.BandPower):
// the in-band power of REFERENCES §11.1, which must be taken in a ~2 MHz
// band around L1 rather than over a wide capture, where the GNSS signals'
// share is diluted.
func (m *Mitigator) SetBand(lo, hi float64) { m.bandLo, m.bandHi, m.bandSet = lo, hi, true }

// Mitigate writes the mitigated copy of x into dst (len(dst) ≥ len(x); dst
// and x must not overlap) and returns what it removed.
func (m *Mitigator) Mitigate(dst, x []complex64) MitigationStats {
	dst = dst[:len(x)]
	p0 := power(x)
	m.stats = MitigationStats{}
	m.blankThr = [2]float64{}
	copy(dst, x)
	lines, transient := m.passband(x)
	m.lines, m.transient = lines, transient
	// Blanking first, so that excision does not smear pulses over the
	// frames; again after excision, for pulses hidden under a continuous
	// interferer that only excision removes. The excision stages run only
	// where the passband estimate saw what they remove (see passband).
	m.blankThr[0] = m.blank(dst, blankLevel(x, m), &m.stats)
	if !lines && !transient {
		return m.stats
	}
	p1 := power(dst)
	if lines {
		m.long.run(dst, dst, false)
	}
	if transient {
		m.short.run(dst, dst, false)
		m.shorter.run(dst, dst, false)
	}
	if p0 > 0 {
		m.stats.ExcisedFraction = max(0, (p1-power(dst))/p0)
	}
	m.blankThr[1] = m.blank(dst, blankLevel(dst, m), &m.stats)
	return m.stats
}

// MitigateBlock writes into dst (as Mitigate) the mitigated copy of a
// later block x of the capture whose snapshot the last Mitigate saw,
// with that snapshot's decisions: the same excision stages, its passband
// shape, its blanking thresholds, and blanking only in the passes that
// blanked the snapshot. The interference that mitigated tracking follows
// is the one the snapshot showed (the Meter decides mitigated tracking
// from it), so the passband estimate and the blanking medians are left
// out of the per-sample work; a long frame's median bin power is taken
// over 256 of its bins (exciseBlock). A block mitigated on its own
// (Mitigate) would re-decide the stages from its own samples, which a
// slow sweep or a wide one makes change from block to block
// (TestMitigateBlock; BenchmarkPipeline_1s_10MSps/chirp for the cost).
func (m *Mitigator) MitigateBlock(dst, x []complex64) {
	dst = dst[:len(x)]
	src := x // the samples as mitigated so far
	if m.blankThr[0] > 0 {
		copy(dst, x)
		m.blank(dst, m.blankThr[0], nil)
		src = dst
	}
	if m.lines || m.longLines(src) {
		m.long.run(dst, src, true)
		src = dst
	}
	if m.transient {
		m.short.run(dst, src, true)
		m.shorter.run(dst, dst, true)
		src = dst
	}
	if len(src) > 0 && &src[0] != &dst[0] {
		copy(dst, x)
	}
	if m.blankThr[1] > 0 {
		m.blank(dst, m.blankThr[1], nil)
	}
}

// Passband estimate (see passband).
const (
	shapeHalfWindow = 3    // bins on each side of the running quantile
	shapeQuantile   = 0.3  // quantile taken in the running window
	shapeMax        = 2.5  // largest level over the median (4 dB) of a passband
	shapeMin        = 0.05 // smallest level kept (−13 dB)
	// lineFactor: a bin whose median over the frames stands this far above
	// the running quantile around it holds a persistent line or narrow
	// band (for noise the per-bin medians over hundreds of frames scatter
	// by a few per cent): the long excision stage runs.
	lineFactor = 1.5
	// transientFactor: a bin whose largest frame power exceeds its median
	// over the frames this many times saw a transient (a sweep passing, a
	// pulse, a hop): the short stages run. For noise the largest of n
	// exponential powers exceeds 30 times their median (20.8 times their
	// mean) with probability n·e^{−20.8} ≈ 10⁻⁶ per bin for n = 1000
	// (computed).
	transientFactor = 30
	// lineLongFactor is the line test of longLines.
	lineLongFactor = 15
)

// passband estimates the receiver's passband shape from the snapshot x
// and tells whether the excision stages have anything to remove (lines:
// a persistent line or narrow band; transient: a narrowband transient),
// and gives the shape to the three excision stages, so that bins are compared
// with the frame's median after removing the shape: a real front end's
// band is not flat (the recording of testdata/realdata falls by about
// 10 dB from the centre to the band edges, REFERENCES §12.6), and against
// a plain median the in-band bins of such a band stand 2–3 times higher
// than the median and are excised by the dozen per frame (which cost its
// weakest satellite 2.5 dB of acquisition metric). The estimate is made
// on the short frames (about 16 µs, 62.5 kHz bins at 4 MS/s, side by
// side): the per-bin
// median over the frames (robust to pulses and sweeps, which visit a bin
// only part of the time), then a running 30 % quantile over 7 bins
// (robust to lines and narrow bands, which fill a few bins), divided by
// its median. A shape rising more than 4 dB over its median is not a
// passband but a wide persistent interferer (a noise band): the band is
// then taken as flat, so that nothing can hide in the shape. Otherwise it
// is clamped to [0.05, 2.5] and interpolated to the other stages' bins.
func (m *Mitigator) passband(x []complex64) (lines, transient bool) {
	e := &m.short
	n, h := e.n, e.n/2
	nf := len(x) / n // frames side by side (no overlap: half the cost)
	flat := func() {
		for _, st := range []*excisor{&m.long, &m.short, &m.shorter} {
			for k := range st.shape {
				st.shape[k] = 1
			}
		}
	}
	if nf < 3 {
		flat()
		return true, true
	}
	if cap(m.frames) < nf*n {
		m.frames = make([]float64, nf*n)
	}
	fr := m.frames[:nf*n]
	for f := range nf {
		s := f * n
		for i := range n {
			e.frame[i] = x[s+i] * complex(e.win[i], 0)
		}
		e.plan.Forward(e.spec, e.frame)
		for k, v := range e.spec {
			fr[k*nf+f] = float64(real(v)*real(v) + imag(v)*imag(v))
		}
	}
	// Per-bin maximum and median over the frames, in centred order (bin
	// c − n/2), and the power in the band set by SetBand: the bins whose
	// centre lies in it, their mean over the frames divided by n·Σw²
	// (white noise of variance σ² gives E|X_k|² = σ²·Σw² in every bin).
	med := e.pow
	var band float64
	for k := range n {
		col := fr[k*nf : (k+1)*nf]
		hi, sum := 0.0, 0.0
		for _, v := range col {
			hi = max(hi, v)
			sum += v
		}
		if m.bandSet {
			f := float64(k) * m.fs / float64(n)
			if k >= h {
				f -= m.fs
			}
			if f >= m.bandLo && f < m.bandHi {
				band += sum / float64(nf)
			}
		}
		md := median(col)
		med[(k+h)&(n-1)] = md
		transient = transient || hi > transientFactor*md
	}
	if m.bandSet {
		var w2 float64
		for _, w := range e.win {
			w2 += float64(w) * float64(w)
		}
		m.stats.BandPower, m.stats.HasBand = band/(float64(n)*w2), true
	}
	// Running quantile, in centred order, into sh.
	sh := e.sel
	var win [2*shapeHalfWindow + 1]float64
	for c := range n {
		lo, hi := max(c-shapeHalfWindow, 0), min(c+shapeHalfWindow, n-1)
		w := win[:hi-lo+1]
		copy(w, med[lo:hi+1])
		sh[c] = quantile(w, shapeQuantile)
	}
	all := fr[:n]
	copy(all, sh[:n])
	mid := median(all)
	if !(mid > 0) {
		flat()
		return true, true
	}
	for c := range n {
		lines = lines || med[c] > lineFactor*sh[c]
	}
	for c := range n {
		if sh[c]/mid > shapeMax {
			flat()
			return true, transient
		}
	}
	for c := range n {
		e.shape[(c-h)&(n-1)] = min(max(sh[c]/mid, shapeMin), shapeMax)
	}
	// The other stages: linear interpolation of the centred short shape
	// at each of their bin centres (bin frequencies in units of short
	// bins).
	for _, st := range []*excisor{&m.long, &m.shorter} {
		r := float64(n) / float64(st.n)
		for c := range st.n {
			u := (float64(c-st.n/2))*r + float64(h) // centred short-bin coordinate
			u = min(max(u, 0), float64(n-1))
			g := min(int(u), n-2)
			a := u - float64(g)
			v := sh[g] + a*(sh[g+1]-sh[g])
			st.shape[(c-st.n/2)&(st.n-1)] = min(max(v/mid, shapeMin), shapeMax)
		}
	}
	return lines || m.longLines(x), transient
}

// longLines looks for lines in the first two long frames of x, side by
// side: the sum of their Hann-windowed bin powers, divided by the
// passband shape, exceeds lineLongFactor times its median in some bin.
// For noise the sum is Gamma(2)-distributed (median 1.68 of the mean),
// which exceeds 15 times its median with probability 26·e^{−25} ≈ 4·10⁻¹⁰
// per bin (computed), so only lines (and the C/A signals' nothing) pass;
// the weak spurs of a real front end (testdata/realdata: 15–20 dB over
// the noise in a 1 kHz bin) do.
func (m *Mitigator) longLines(x []complex64) bool {
	e := &m.long
	n := e.n
	if len(x) < 2*n {
		return true
	}
	sum := e.sel
	clear(sum)
	for f := range 2 {
		for i := range n {
			e.frame[i] = x[f*n+i] * complex(e.win[i], 0)
		}
		e.plan.Forward(e.spec, e.frame)
		for k, v := range e.spec {
			sum[k] += float64(real(v)*real(v)+imag(v)*imag(v)) / e.shape[k]
		}
	}
	copy(e.pow, sum)
	thr := lineLongFactor * median(e.pow)
	for _, v := range sum {
		if v > thr {
			return true
		}
	}
	return false
}

// quantile returns the q-quantile (nearest rank) of v, reordering it.
func quantile(v []float64, q float64) float64 {
	k := min(int(q*float64(len(v))), len(v)-1)
	return selectK(v, k)
}

// power returns Σ|x|².
func power(x []complex64) float64 {
	var p float64
	for _, v := range x {
		p += float64(real(v)*real(v) + imag(v)*imag(v))
	}
	return p
}

// run applies the stage to x, writing y (y may be x). Frames start at
// −n/2, 0, n/2, …, each weighted by the periodic Hann window (zero outside
// x), so every sample lies in exactly two frames whose weights sum to 1.
// Samples s … s + n/2 − 1 are final once the frame starting at s has been
// processed, and the next frame reads only samples from s + n/2 on, so
// the stage can work in place. With block, each frame is excised as in a
// tracking block (exciseBlock).
func (e *excisor) run(y, x []complex64, block bool) {
	n, h := e.n, e.n/2
	hold := e.carry
	clear(hold)
	if block {
		for k, v := range e.shape {
			e.invShape[k] = float32(1 / v)
		}
	}
	win, frame := e.win[:n], e.frame[:n]
	for s := -h; s < len(x); s += h {
		if s >= 0 && s+n <= len(x) {
			for i, v := range x[s : s+n] {
				w := win[i]
				frame[i] = complex(real(v)*w, imag(v)*w)
			}
		} else {
			for i := range n {
				j := s + i
				if j < 0 || j >= len(x) {
					frame[i] = 0
					continue
				}
				v, w := x[j], win[i]
				frame[i] = complex(real(v)*w, imag(v)*w)
			}
		}
		var hit bool
		if block {
			hit = e.exciseBlock()
		} else {
			hit = e.excise()
		}
		// The inverse transform is unnormalized: an excised frame is
		// scaled by 1/n on its way out.
		sc := float32(1)
		if hit {
			sc = float32(1 / float64(n))
		}
		lo, hi := max(0, -s), min(h, len(y)-s)
		for i := lo; i < hi; i++ {
			v := frame[i]
			y[s+i] = hold[i] + complex(real(v)*sc, imag(v)*sc)
		}
		for i, v := range frame[h:] {
			hold[i] = complex(real(v)*sc, imag(v)*sc)
		}
	}
}

// excise transforms the windowed frame, zeroes the bins above
// exciseFactor times the median bin power and transforms back
// (unnormalized) if any was zeroed, which it reports; otherwise the
// frame is left as it is.
func (e *excisor) excise() bool {
	tmp := e.spec
	e.plan.Forward(tmp, e.frame)
	for k, v := range tmp {
		e.pow[k] = float64(real(v)*real(v)+imag(v)*imag(v)) / e.shape[k]
	}
	copy(e.sel, e.pow)
	thr := exciseFactor * median(e.sel)
	if !(thr > 0) {
		return false
	}
	// A hit and excisionGuard bins on each side (the Hann window's main
	// lobe and the first sidelobes of a strong line) are removed.
	hit := false
	last := -1
	for k, p := range e.pow {
		if p <= thr {
			continue
		}
		hit = true
		for j := max(k-excisionGuard, last+1); j <= k+excisionGuard; j++ {
			tmp[j&(e.n-1)] = 0
		}
		last = k + excisionGuard
	}
	if hit {
		e.plan.Inverse(e.frame, tmp)
	}
	return hit
}

// blockMedianBins is the most bins whose median a tracking block's
// frame takes (see exciseBlock): the sample median of 256 exponential
// bin powers is within 6 % of the frame's (standard error 1/(2f(m)√n),
// f(m) = ½ at the median of a unit exponential; computed).
const blockMedianBins = 256

// exciseBlock is excise for a tracking block (see MitigateBlock): the
// frame's median bin power is taken over every s-th bin, s = n/256 for
// frames longer than 256 bins, and the bin powers in float32.
func (e *excisor) exciseBlock() bool {
	tmp := e.spec
	e.plan.Forward(tmp, e.frame)
	stride := max(1, e.n/blockMedianBins)
	p, inv := e.pow32[:len(tmp)], e.invShape[:len(tmp)]
	sel := e.sel[:0]
	for k, v := range tmp {
		p[k] = (real(v)*real(v) + imag(v)*imag(v)) * inv[k]
	}
	for k := 0; k < len(p); k += stride {
		sel = append(sel, float64(p[k]))
	}
	thr := float32(exciseFactor * median(sel))
	if !(thr > 0) {
		return false
	}
	hit := false
	last := -1
	for k, v := range p {
		if v <= thr {
			continue
		}
		hit = true
		for j := max(k-excisionGuard, last+1); j <= k+excisionGuard; j++ {
			tmp[j&(e.n-1)] = 0
		}
		last = k + excisionGuard
	}
	if hit {
		e.plan.Inverse(e.frame, tmp)
	}
	return hit
}

// median returns the median (the upper one for an even count) of v,
// reordering it.
func median(v []float64) float64 {
	if len(v) == 0 {
		return 0
	}
	return selectK(v, len(v)/2)
}

// selectK returns the k-th smallest element of v (0-based), reordering v
// (Hoare's quickselect).
func selectK(v []float64, k int) float64 {
	lo, hi := 0, len(v)-1
	for lo < hi {
		p := v[(lo+hi)/2]
		i, j := lo, hi
		for i <= j {
			for v[i] < p {
				i++
			}
			for v[j] > p {
				j--
			}
			if i <= j {
				v[i], v[j] = v[j], v[i]
				i++
				j--
			}
		}
		switch {
		case k <= j:
			hi = j
		case k >= i:
			lo = i
		default:
			return v[k]
		}
	}
	return v[k]
}

// blankLevel returns the blanking threshold blankFactor·σ̂² for x,
// σ̂² = median|x|²/ln 2, or 0 if σ̂² is not positive. The median is taken
// from every blankStride-th sample: 12 500 of the 100 000 of 10 ms at
// 10 MS/s estimate it within about 1 % (computed: standard error
// 1/(2f(m)√n) of a sample median).
func blankLevel(x []complex64, m *Mitigator) float64 {
	ns := (len(x) + blankStride - 1) / blankStride
	if cap(m.sel) < ns {
		m.sel = make([]float64, ns)
	}
	sel := m.sel[:ns]
	for i := range sel {
		v := x[i*blankStride]
		sel[i] = float64(real(v)*real(v) + imag(v)*imag(v))
	}
	sigma2 := median(sel) / math.Ln2
	if !(sigma2 > 0) {
		return 0
	}
	return blankFactor * sigma2
}

// blank sets to zero the samples of x (and a guard around them) whose
// power exceeds thr (see blankLevel), unless more than blankMaxFraction
// of them do, and returns thr. What it did goes into st, if not nil.
func (m *Mitigator) blank(x []complex64, thr float64, st *MitigationStats) float64 {
	if !(thr > 0) {
		return 0
	}
	hits := 0
	for _, v := range x {
		if float64(real(v)*real(v)+imag(v)*imag(v)) > thr {
			hits++
		}
	}
	if hits == 0 {
		return 0
	}
	if float64(hits) > blankMaxFraction*float64(len(x)) {
		if st != nil {
			st.NotImpulsive = true
		}
		return 0
	}
	if st != nil {
		st.NotImpulsive = false
	}
	// Blank each hit and the guard on both sides: mark, then zero.
	if cap(m.hit) < len(x) {
		m.hit = make([]bool, len(x))
	}
	hit := m.hit[:len(x)]
	for i, v := range x {
		hit[i] = float64(real(v)*real(v)+imag(v)*imag(v)) > thr
	}
	blanked := 0
	last := -1 // last index blanked
	for i, h := range hit {
		if !h {
			continue
		}
		lo, hi := max(i-m.guard, last+1), min(i+m.guard, len(x)-1)
		for j := lo; j <= hi; j++ {
			x[j] = 0
			blanked++
		}
		last = max(last, hi)
	}
	if st != nil {
		st.BlankedFraction += float64(blanked) / float64(len(x))
	}
	return thr
}
