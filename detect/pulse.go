package detect

import (
	"math"
	"math/cmplx"
	"sort"

	"gonum.org/v1/gonum/mathext"
	"gonum.org/v1/gonum/stat/distuv"

	"quietband/ingest"

	"quietband/detect/fft"
)

// Pulse finds pulse trains (DME/TACAN-like pulse pairs, radar pulses) in the
// power envelope and measures pulse width, PRI, duty cycle, pair spacing and
// peak J/N.
//
// Detection: the envelope |x[n]|² is averaged over L samples (about 1 µs)
// and compared with an adaptive CFAR threshold γ·N_s, N_s the noise power
// per sample from the floor. Under noise alone the L-sample mean of
// exponential powers is Gamma(L, 1/L), so γ is its (1 − PulsePfa) quantile
// (REFERENCES §9–10). Runs above the threshold are pulses.
//
// Measurement: the raw envelopes of the pulses, aligned on their power
// centroids and averaged, give one pulse profile (see measureProfile); its
// width is taken at half amplitude (a quarter of the peak power above the
// noise), the ICAO way of stating DME pulse duration (3.5 µs). Peak J/N is
// the profile's peak power above the noise over the noise power. Pairs: when
// most gaps between consecutive pulses cluster at one short spacing (12,
// 30 or 36 µs for DME), the pulses are grouped in pairs and that spacing
// reported. PRI is the least-squares slope of group arrival time against
// group index (index from the median interval, so missed pulses do not bias
// it). The carrier offset is the angle of the mean in-pulse lag product
// x[n]·x*[n−1].
type Pulse struct {
	env      []float64
	cache    map[float64]float64
	quartile map[float64][2]float64
	centers  []float64
	starts   []int
	ends     []int
	prof     []float64
	sm       []float64
	sums     []float64 // L-sample running sums of the envelope
	// openEnd is the sample index just past the previous block when that
	// block ended inside a pulse (which it counted), else −1: the same
	// pulse's remainder at the start of the next block is not counted
	// again.
	openEnd int64
	plan    *fft.Plan
	spec    []complex64
	lobes   []float32
	// The sub-band search's scratch: the trains found, their spectra,
	// the filtered samples, the fast convolution's FFTs and buffers.
	trains            []Finding
	lobeBufs          [][]float32
	filtered          []complex64
	sbPlan, sbInv     *fft.Plan
	sbSpec, sbSeg     []complex64
	sbOut             []complex64
	sbTaper           []float32
	clean             []complex64 // the block with its steady tones removed (removeTones)
	lens, lensScratch []float64
	moments           [2]float64 // the block's E|x|² and E|x|⁴
	lowT              float32    // a low-bit quantizer's magnitude threshold (0: not low-bit)
	binom             map[[2]int]int
	carriers          []float64 // each pulse's carrier offset
	mixture           []float64 // the carriers of a wideband train of several emitters
	// burstChirp's scratch.
	slopes    []float64
	regionBuf [][2]float64
	taken     []bool
	chirpAt   []float64
	upCenters []float64
}

// Name implements Detector.
func (*Pulse) Name() string { return "pulse" }

// maxGapLevel is the highest mean power between pulses, relative to the
// reference, that still counts as a return to the floor (1.76 dB).
const maxGapLevel = 1.5

// maxPulseWidth is the longest pulse reported, in seconds.
const maxPulseWidth = 200e-6

// maxPulses bounds the pulses measured per block.
const maxPulses = 4096

// Detect implements Detector.
//
// Pulses are looked for where they are. The whole band's envelope finds a
// train that stands above everything else (and long pulses, and trains
// too fast for SK to see). But a strong steady emitter elsewhere in the
// band (a CW, a noise band) masks a weaker train in the wideband envelope,
// and two trains on different channels mix there. So the bins SK flags as
// intermittent (above its upper threshold: energy present in some frames
// only, REFERENCES §2.5) are grouped into sub-bands, and each sub-band
// that the wideband train does not account for is filtered out of the
// block (mixed to baseband, low-pass filtered and decimated: subband) and
// searched on its own. With two or more such sub-bands, every train is
// taken from its sub-band and the wideband one, a mixture, is dropped.
// Trains on several sub-bands with the same pulse width whose pulses
// together keep one regular PRI, while each channel's alone does not, are
// one emitter hopping over channels (as L5-band data links do): one
// finding over their channels.
func (d *Pulse) Detect(in *BlockInput, out []Finding) []Finding {
	x := in.Samples
	fs := in.F.Fs
	continued := d.openEnd > 0 && d.openEnd == in.F.Start
	d.openEnd = -1
	if len(x) == 0 || in.NoisePower <= 0 {
		return out
	}
	d.trains = d.trains[:0]
	d.mixture = d.mixture[:0]
	d.moments = [2]float64{in.F.Power, in.F.Moment4}
	d.lowT = in.LowBitThreshold
	wide, okWide := d.train(x, fs, in.NoisePower/in.Rise, in.F.Start, 1, continued, in.Cfg, true)
	regions := d.regions(in)
	// A sweep found in this block passes through every sub-band of its
	// span: those are its own (its footprint), not worth a search.
	kept := regions[:0]
	for _, r := range regions {
		swept := false
		for i := range out {
			if c := &out[i]; c.Class == ClassSwept && (r[0]+r[1])/2 >= c.LowHz && (r[0]+r[1])/2 <= c.HighHz {
				swept = true
			}
		}
		if !swept {
			kept = append(kept, r)
		}
	}
	regions = kept
	if okWide && len(d.mixture) > 0 {
		// Several emitters in the wideband train: each carrier becomes a
		// sub-band to search, and the mixture is dropped.
		margin := d.margin(in)
		for _, c := range d.mixture {
			regions = addRegion(regions, [2]float64{c - margin, c + margin})
		}
		okWide = false
	}
	// A region the wideband train's own spectrum accounts for (its main
	// lobe, or sidelobes as strong as the region's excess) is that train.
	unexplained := 0
	for _, r := range regions {
		if !okWide || !(wide.covers(r) || d.regionExplained(in, &wide, r)) {
			unexplained++
		}
	}
	if unexplained == 0 || len(regions) == 0 {
		if okWide {
			out = append(out, wide)
		}
		return out
	}
	// Sub-band search over every region. When the wideband search found
	// a train, it is searched again in its own sub-band, clean of the
	// others' pulses (a mixture's PRI, pairs and peak are wrong), and
	// kept only if that fails.
	wideAt := -1
	if okWide && len(wide.Pulse.Channels) == 0 {
		margin := d.margin(in)
		regions = addRegion(regions, [2]float64{wide.OffsetHz - margin, wide.OffsetHz + margin})
		for i, q := range regions {
			if q[0] <= wide.OffsetHz && wide.OffsetHz <= q[1] {
				wideAt = i
			}
		}
	} else if okWide {
		// A hopper: its channels are its own; search only the others.
		kept := regions[:0]
		for _, r := range regions {
			if !wide.covers(r) {
				kept = append(kept, r)
			}
		}
		regions = kept
	}
	noise := in.NoisePower / in.Rise
	// The steady tones of the block are removed before the sub-band
	// search: a strong CW inside a region (or, on a clipping front end,
	// spread into it) would otherwise fill the region's envelope.
	xs := d.removeTones(x, fs, out, noise)
	found, wideAgain := 0, false
	for i, r := range regions {
		y, fsd, dec, center, nsub, skip := d.subband(in, xs, r)
		if len(y) == 0 {
			continue
		}
		tr, ok := d.train(y, fsd, nsub, in.F.Start+int64(skip), dec, false, in.Cfg, false)
		if !ok {
			continue
		}
		// J/N over the capture band's noise; offsets from the capture's
		// centre.
		tr.JN *= nsub / noise
		tr.OffsetHz += center
		tr.LowHz += center
		tr.HighHz += center
		d.trains = append(d.trains, tr)
		found++
		if i == wideAt {
			wideAgain = true
		}
	}
	if okWide && !wideAgain {
		out = append(out, wide)
	}
	if found == 0 {
		return out
	}
	return d.hopping(out, d.trains, fs)
}

// train runs the envelope detector over x (rate fs; noise the noise power
// per sample expected), whose sample
// 0 is capture sample start and whose samples stand for dec capture
// samples each. wideband says x is the whole block (its pulses may run
// over block boundaries; see openEnd).
func (d *Pulse) train(x []complex64, fs, noise float64, start int64, dec int, continued bool, cfg *Config, wideband bool) (Finding, bool) {
	// Cheap gate: pulses make the envelope impulsive, raising the
	// kurtosis ratio E|x|⁴/(E|x|²)² above the Gaussian 2 (by far more than
	// six standard deviations, 2/√K each, for any train this detector can
	// measure). Band-limited noise keeps it at 2 while its slow envelope
	// would cross a per-sample threshold.
	// (The wideband block's moments come from the spectrum engine's
	// pass.)
	p2, p4 := d.moments[0], d.moments[1]
	if !wideband {
		p2, p4 = 0, 0
		for _, v := range x {
			pw := float64(real(v))*float64(real(v)) + float64(imag(v))*float64(imag(v))
			p2 += pw
			p4 += pw * pw
		}
		if len(x) > 0 {
			p2 /= float64(len(x))
			p4 /= float64(len(x))
		}
	}
	if len(x) == 0 || p2 <= 0 {
		return Finding{}, false
	}
	// (Low-bit samples have their own statistic: their levels make even
	// noise's ratio far from 2.)
	if !(wideband && d.lowT > 0) && p4/(p2*p2) < 2+12/math.Sqrt(float64(len(x))) {
		return Finding{}, false
	}
	var l int
	var ns, thr, thrLow float64
	lowBit := wideband && d.lowT > 0
	if lowBit {
		var ok bool
		if l, ns, thr, thrLow, ok = d.lowBitEnvelope(x, fs, cfg.PulsePfa); !ok {
			return Finding{}, false
		}
	} else {
		l = max(2, int(math.Round(1e-6*fs)))
		if cap(d.env) < len(x) {
			d.env = make([]float64, len(x))
		}
		env := d.env[:len(x)]
		for i, v := range x {
			env[i] = float64(real(v))*float64(real(v)) + float64(imag(v))*float64(imag(v))
		}
		// The L-sample running sums, once for the reference and the runs:
		// sums[j] = Σ env[j … j+L−1].
		if len(env) < l {
			return Finding{}, false
		}
		d.runningSums(env, l)
		var leff float64
		ns, leff = d.reference(d.sums[:len(env)-l+1], l, noise)
		gamma := d.threshold(leff, cfg.PulsePfa)
		thr = gamma * ns * float64(l) // on the running sum
		thrLow = (1 + gamma) / 2 * ns * float64(l)
	}
	env := d.env[:len(x)]
	sums := d.sums[:len(env)-l+1]
	// Runs of the L-sample running sum above the threshold.
	d.starts, d.ends = d.starts[:0], d.ends[:0]
	inRun := false
	for j, run := range sums {
		i := j + l - 1 // the window's last sample
		// Hysteresis: a pulse starts above thr and ends below thrLow, half
		// way down to the reference, so that noise on a long pulse's top
		// does not split it.
		if !inRun && run > thr {
			d.starts = append(d.starts, j)
			inRun = true
		} else if inRun && run < thrLow {
			d.ends = append(d.ends, i)
			inRun = false
		}
		if len(d.starts) > maxPulses {
			break
		}
	}
	if inRun {
		d.ends = append(d.ends, len(env))
		if wideband {
			d.openEnd = start + int64(len(x))
		}
	}
	if continued && len(d.starts) > 0 && d.starts[0] == 0 {
		// The rest of the pulse the previous block ended in.
		copy(d.starts, d.starts[1:])
		copy(d.ends, d.ends[1:])
		d.starts, d.ends = d.starts[:len(d.starts)-1], d.ends[:len(d.ends)-1]
	}
	n := min(len(d.starts), len(d.ends))
	if n < cfg.MinPulses || n > maxPulses {
		return Finding{}, false
	}
	// Centroids, each pulse's carrier and a coarse width bound.
	d.centers = d.centers[:0]
	d.carriers = d.carriers[:0]
	maxLen := 0
	var lag complex128
	for p := 0; p < n; p++ {
		var s, sw float64
		var pl complex128
		for i := d.starts[p]; i < d.ends[p]; i++ {
			e := env[i] - ns
			s += e
			sw += e * float64(i)
			if i > 0 {
				pl += complex128(x[i]) * cmplx.Conj(complex128(x[i-1]))
			}
		}
		lag += pl
		d.carriers = append(d.carriers, fs/(2*math.Pi)*cmplx.Phase(pl))
		if s <= 0 {
			s = 1
			sw = float64(d.starts[p]+d.ends[p]) / 2
		}
		d.centers = append(d.centers, sw/s)
		maxLen = max(maxLen, d.ends[p]-d.starts[p])
	}
	// A steady emitter switching on mid-block is one long run, not a
	// pulse train: GNSS-band pulses (DME, radar) last microseconds.
	if float64(maxLen) > maxPulseWidth*fs {
		return Finding{}, false
	}
	// Between pulses the envelope returns to the reference. Noise that
	// switches on for part of the block (band-limited or wideband) crosses
	// the threshold on its own fluctuations, and between those crossings
	// it stays well above the reference.
	var gapSum float64
	var gapN int
	for p := 0; p+1 < n; p++ {
		for i := d.ends[p]; i < d.starts[p+1]; i++ {
			gapSum += env[i]
		}
		gapN += d.starts[p+1] - d.ends[p]
	}
	if gapN > 0 && gapSum/float64(gapN) > maxGapLevel*ns {
		return Finding{}, false
	}
	// The mean pulse is formed over a window of three median pulse lengths
	// (not the longest run: where two emitters' pulses coincide, a run is
	// longer than either, and a window that wide takes in neighbours), and
	// no wider than 0.9 of the shortest common spacing (a pair's partner
	// stays out).
	lens := d.lens[:0]
	for p := 0; p < n; p++ {
		lens = append(lens, float64(d.ends[p]-d.starts[p]))
	}
	d.lens = lens
	// Pulses of one emitter last alike; the runs of noise crossing the
	// threshold on its own peaks (band noise switching on, two tones
	// beating) do not: their lengths spread as widely as they are long.
	if n >= 4 && !d.alike(lens) {
		return Finding{}, false
	}
	half := min(maxLen, int(math.Ceil(1.5*medianScratch(&d.lensScratch, lens)))) + 2*l
	if n >= 3 {
		gaps := d.lens[:0]
		for p := 0; p+1 < n; p++ {
			gaps = append(gaps, d.centers[p+1]-d.centers[p])
		}
		d.lens = gaps
		sort.Float64s(gaps)
		if g := int(0.45 * gaps[len(gaps)/10]); g > l && g < half {
			half = g
		}
	}
	width := 2*half + 1
	if cap(d.prof) < width {
		d.prof = make([]float64, width)
	}
	prof := d.prof[:width]
	clear(prof)
	used := 0
	for _, c := range d.centers {
		ci := int(math.Round(c))
		if ci-half < 0 || ci+half >= len(env) {
			continue
		}
		for j := -half; j <= half; j++ {
			prof[j+half] += env[ci+j]
		}
		used++
	}
	if used == 0 {
		return Finding{}, false
	}
	for j := range prof {
		prof[j] = prof[j]/float64(used) - ns
	}
	peak, w := measureProfile(prof, max(1, int(math.Round(0.25e-6*fs))), &d.sm, lowBit)
	w /= fs
	if w <= 0 || peak <= 0 {
		return Finding{}, false
	}
	at := func(i int) int64 { return start + int64(i*dec) }
	jn, bound := peak/ns, false
	if lowBit {
		jn, bound = d.lowBitJN(peak, ns)
	}
	if wideband {
		if sw, ok := d.burstChirp(x, n, fs); ok {
			// Each "pulse" is a sweep crossing the band: a sweep wider
			// than the recorder's band, seen as bursts at its period.
			sw.Even = true
			return Finding{Detector: d.Name(), Class: ClassSwept, LowHz: sw.LowHz, HighHz: sw.HighHz,
				OffsetHz: (sw.LowHz + sw.HighHz) / 2, JN: jn, JNLowerBound: bound, Sweep: &sw,
				Start: at(d.starts[0]), End: at(d.ends[n-1])}, true
		}
	}
	pp := &PulseParams{WidthS: w, Pulses: n}
	mixture := false
	if wideband {
		pp.Channels, mixture = d.channels(n, w, fs)
	}
	groups := d.centers
	if sp, ok := pairSpacing(d.centers); ok {
		pp.PairSpacingS = sp / fs
		groups = firstOfPairs(d.centers, sp)
	}
	pp.PRIS = pri(groups) / fs
	pp.Groups = make([]int64, len(groups))
	for i, g := range groups {
		pp.Groups[i] = start + int64(math.Round(g*float64(dec)))
	}
	dur := float64(len(x)) / fs
	pp.DutyCycle = float64(n) * w / dur
	off := fs / (2 * math.Pi) * cmplx.Phase(lag)
	bw := 1 / w
	lo, hi := off-bw, off+bw
	if len(pp.Channels) > 1 {
		lo, hi = pp.Channels[0]-bw, pp.Channels[len(pp.Channels)-1]+bw
		off = (lo + hi) / 2
	}
	rate := float64(n) / dur
	lobes, step := d.spectralDensity(prof, used, ns, rate, fs)
	// Each train of the block keeps its spectrum in a buffer of its own.
	for len(d.lobeBufs) <= len(d.trains)+1 {
		d.lobeBufs = append(d.lobeBufs, nil)
	}
	i := len(d.trains) + 1
	if wideband {
		i = 0
	}
	d.lobeBufs[i] = append(d.lobeBufs[i][:0], lobes...)
	lobes = d.lobeBufs[i]
	if mixture {
		d.mixture = append(d.mixture[:0], pp.Channels...)
		pp.Channels = nil
	}
	return Finding{Detector: d.Name(), Class: ClassPulsed, LowHz: lo, HighHz: hi,
		OffsetHz: off, JN: jn, JNLowerBound: bound, Pulse: pp,
		Start: at(d.starts[0]), End: at(d.ends[n-1]),
		sidelobes: lobes, sidelobeStep: step, pulseRate: rate}, true
}

// spectralDensity returns the pulse train's average power spectral
// density over the noise's, R(i·step) for i = 0, 1, … up to fs/2 from the
// carrier, computed from the measured mean pulse: with a[n] = √p[n] its
// amplitude profile (p the mean power above the noise, kept where it
// exceeds 1 % of the peak and three standard deviations of its own noise,
// ns/√used) and A(f) = Σ a[n]·e^{−j2πfn/fs} its spectrum, a train of rate
// pulses per second adds to the power spectral density, relative to the
// noise's ns/fs,
//
//	R(f) = rate·|A(f)|² / (fs·ns)
//
// on average (each pulse's energy spectrum |A(f)|²/fs, rate of them per
// second: the average power spectrum of a random-phase pulse train, common
// practice). A rectangular pulse's sinc² sidelobes reach far beyond its
// 1/width main lobe; they, and the lines at multiples of the pulse rate
// they carry, are the train's own and not narrowband emitters. The slice
// is the detector's scratch, valid until its next block.
func (d *Pulse) spectralDensity(prof []float64, used int, ns, rate, fs float64) ([]float32, float64) {
	m := 1024
	for m < 2*len(prof) {
		m *= 2
	}
	if d.plan == nil || d.plan.Len() != m {
		d.plan = fft.NewPlan(m)
		d.spec = make([]complex64, m)
		d.lobes = make([]float32, m/2+1)
	}
	peak := 0.0
	for _, v := range prof {
		peak = math.Max(peak, v)
	}
	floor := math.Max(0.01*peak, 3*ns/math.Sqrt(float64(used)))
	clear(d.spec)
	for i, v := range prof {
		if v > floor {
			d.spec[i] = complex(float32(math.Sqrt(v)), 0)
		}
	}
	d.plan.Forward(d.spec, d.spec)
	scale := float32(rate / (fs * ns))
	for k := range d.lobes {
		v := d.spec[k]
		d.lobes[k] = (real(v)*real(v) + imag(v)*imag(v)) * scale
	}
	return d.lobes, fs / float64(m)
}

// reference returns the power per sample the pulses must stand above,
// and the number k of independent powers the L-sample mean of the
// envelope holds between the pulses. Under white noise that mean is
// Gamma(L, 1/L)·N; under noise whose spectrum is not flat (band-limited
// noise beside the pulses) or with a steady emitter, it holds fewer or
// more independent powers than L (Satterthwaite's effective degrees of
// freedom of a quadratic form, common practice), so a threshold set for
// white noise would let band-limited noise through. Both are read from
// the lower decile q₁ and the lower quartile q₂ of the running mean
// (pulses at duty cycles up to three quarters do not move them, nor do
// chirp bursts filling half of the time): k is the shape whose
// Gamma(k, 1/k) has the same ratio q₂/q₁ (from 1 to 4L), and the power is
// q₂ over that distribution's lower quartile.
func (d *Pulse) reference(sums []float64, l int, noise float64) (float64, float64) {
	const bins = 1024
	var hist [bins]int
	top := 16 * noise // the histogram spans 0..16 N
	count := 0
	for _, run := range sums {
		b := int(run / float64(l) / top * bins)
		hist[min(max(b, 0), bins-1)]++
		count++
	}
	quantile := func(q float64) float64 {
		want, acc := int(q*float64(count)), 0
		for b, c := range hist {
			acc += c
			if acc >= want {
				return (float64(b) + 0.5) / bins * top
			}
		}
		return top
	}
	q1, q2 := quantile(0.1), quantile(0.25)
	k := float64(l)
	if q1 > 0 {
		k = d.shapeFor(q2/q1, 4*float64(l))
	}
	_, ql := d.gammaQuartiles(k)
	// The envelope between the pulses measures the background itself;
	// the floor's noise power only guards against a background of zeros
	// (a dead stretch), at a hundredth of it: a wide emitter (a sweep
	// crossing the band, a noise jammer) lifts the floor the spectrum sees
	// far above the envelope between its bursts.
	return math.Max(0.01*noise, q2/ql), k
}

// gammaQuartiles returns the lower decile and the lower quartile of
// Gamma(k, 1/k), cached.
func (d *Pulse) gammaQuartiles(k float64) (float64, float64) {
	if d.quartile == nil {
		d.quartile = map[float64][2]float64{}
	}
	if v, ok := d.quartile[k]; ok {
		return v[0], v[1]
	}
	g := distuv.Gamma{Alpha: k, Beta: k}
	v := [2]float64{g.Quantile(0.1), g.Quantile(0.25)}
	d.quartile[k] = v
	return v[0], v[1]
}

// shapes are the shapes k shapeFor chooses from: tenths up to 4, then
// whole numbers (a threshold far in the tail moves a lot with a small k).
var shapes = func() []float64 {
	var v []float64
	for k := 0.5; k < 4; k += 0.1 {
		v = append(v, math.Round(k*10)/10)
	}
	for k := 4.0; k <= 128; k++ {
		v = append(v, k)
	}
	return v
}()

// shapeFor returns the k up to kmax whose Gamma(k) lower quartile over
// lower decile is nearest r (the ratio falls with k: 2.73 at k = 1).
func (d *Pulse) shapeFor(r, kmax float64) float64 {
	best, at := math.Inf(1), 1.0
	for _, k := range shapes {
		if k > kmax {
			break
		}
		q1, q2 := d.gammaQuartiles(k)
		if e := math.Abs(q2/q1 - r); e < best {
			best, at = e, k
		}
	}
	return at
}

func (d *Pulse) threshold(k, pfa float64) float64 {
	if d.cache == nil {
		d.cache = map[float64]float64{}
	}
	if v, ok := d.cache[k]; ok {
		return v
	}
	v := distuv.Gamma{Alpha: k, Beta: k}.Quantile(1 - pfa)
	d.cache[k] = v
	return v
}

// measureProfile returns the peak power and the half-amplitude width (in
// samples) of an averaged pulse profile (noise already subtracted). With
// few pulses averaged the profile is noisy, so: it is smoothed over ls
// samples (a quarter microsecond, which widens a pulse by at most ls/2);
// the pulse's extent is where the smoothed profile first reaches half its
// maximum, searching inwards from both ends (noise dips on a long pulse's
// top do not cut it short); the peak is the raw profile's mean over the
// middle half of that extent (the maximum of a noisy plateau would be
// biased upwards; on a Gaussian pulse the mean is about 0.3 dB under the
// peak); the width is where the smoothed profile crosses a quarter of the
// peak power, again inwards from both ends, interpolated linearly. A
// low-bit quantizer's counts (lowBit) saturate on a pulse's top, so dips
// there are rare, while a profile of the few pulses of one block has
// spikes near half the peak outside the pulse: its extents are searched
// outwards from the maximum instead.
func measureProfile(prof []float64, ls int, scratch *[]float64, lowBit bool) (peak, width float64) {
	n := len(prof)
	if cap(*scratch) < n {
		*scratch = make([]float64, n)
	}
	sm := (*scratch)[:n]
	var run float64
	for i := 0; i < n+ls/2; i++ {
		if i < n {
			run += prof[i]
		}
		if i >= ls {
			run -= prof[i-ls]
		}
		if j := i - ls/2; j >= 0 && j < n {
			sm[j] = run / float64(ls)
		}
	}
	smax, at := 0.0, 0
	for i, v := range sm {
		if v > smax {
			smax, at = v, i
		}
	}
	if smax <= 0 {
		return 0, 0
	}
	a, b := inward(sm, smax/2)
	if lowBit {
		a, b = around(sm, at, smax/2)
	}
	if a < 0 {
		return 0, 0
	}
	q := (b - a) / 4
	var sum float64
	for i := a + q; i <= b-q; i++ {
		sum += prof[i]
	}
	peak = sum / float64(b-q-(a+q)+1)
	lvl := peak / 4
	l, r := inward(sm, lvl)
	if lowBit {
		l, r = around(sm, at, lvl)
	}
	if l <= 0 || r >= n-1 {
		return peak, 0
	}
	if lowBit && !standsOut(prof, l, r, peak, b-q-(a+q)+1) {
		return peak, 0
	}
	left := float64(l) - (sm[l]-lvl)/(sm[l]-sm[l-1])
	right := float64(r) + (sm[r]-lvl)/(sm[r]-sm[r+1])
	return peak, right - left
}

// standsOut reports whether a profile's pulse (extent l…r, mean peak over
// m samples) stands out of the profile's own noise: the mean over m
// samples must exceed 6 standard errors of the samples outside the extent
// (σ/√m). Searched outwards from the maximum, a profile of noise alone
// still yields an "extent" around its largest spike, one or two samples
// wide, whose mean is a few σ: it does not pass.
func standsOut(prof []float64, l, r int, peak float64, m int) bool {
	var s, ss float64
	k := 0
	for i, v := range prof {
		if i >= l && i <= r {
			continue
		}
		s += v
		ss += v * v
		k++
	}
	if k < 8 {
		return true // no room to measure: the caller's width bounds decide
	}
	mean := s / float64(k)
	sd := math.Sqrt(math.Max(ss/float64(k)-mean*mean, 0))
	return peak*math.Sqrt(float64(max(m, 1))) > 6*sd
}

// inward returns the first index from the left and from the right at which
// v reaches lvl (−1, −1 if it never does).
func inward(v []float64, lvl float64) (int, int) {
	a, b := -1, -1
	for i := range v {
		if v[i] >= lvl {
			a = i
			break
		}
	}
	for i := len(v) - 1; i >= 0; i-- {
		if v[i] >= lvl {
			b = i
			break
		}
	}
	return a, b
}

// around returns the first and last index of the stretch of v around at
// that stays at or above lvl: the pulse the peak belongs to, whatever noise
// elsewhere in the profile reaches (a profile averaged over few pulses of
// a low-bit quantizer's counts has spikes near half its peak).
func around(v []float64, at int, lvl float64) (int, int) {
	if at < 0 || at >= len(v) || v[at] < lvl {
		return -1, -1
	}
	a, b := at, at
	for a > 0 && v[a-1] >= lvl {
		a--
	}
	for b < len(v)-1 && v[b+1] >= lvl {
		b++
	}
	return a, b
}

// pairSpacing looks for a short gap shared by at least 40 % of the gaps
// between consecutive pulses and shorter than half the others.
func pairSpacing(c []float64) (float64, bool) {
	if len(c) < 4 {
		return 0, false
	}
	gaps := make([]float64, len(c)-1)
	for i := range gaps {
		gaps[i] = c[i+1] - c[i]
	}
	sorted := append([]float64(nil), gaps...)
	sort.Float64s(sorted)
	// The candidate spacing is the lower quartile gap (robust to a pulse
	// split in two by noise); the pair gaps cluster within 10 % of it.
	short := sorted[len(sorted)/4]
	var sum float64
	var k, above int
	for _, g := range sorted {
		switch {
		case math.Abs(g-short) <= short*0.1+1:
			sum += g
			k++
		case g > short:
			above++
		}
	}
	if float64(k) < 0.4*float64(len(gaps)) || above == 0 {
		return 0, false
	}
	longer := sorted[len(sorted)-above]
	sp := sum / float64(k)
	if longer < 2*sp {
		return 0, false
	}
	return sp, true
}

// firstOfPairs keeps the first pulse of each pair spaced sp apart.
func firstOfPairs(c []float64, sp float64) []float64 {
	out := make([]float64, 0, len(c)/2+1)
	for i := 0; i < len(c); i++ {
		out = append(out, c[i])
		if i+1 < len(c) && math.Abs(c[i+1]-c[i]-sp) <= sp*0.1+1 {
			i++
		}
	}
	return out
}

// pri fits t_g = t_0 + k_g·PRI by least squares, with k_g the group's index
// counted in median intervals (so that a missed pulse does not bias it).
func pri(t []float64) float64 {
	if len(t) < 2 {
		return 0
	}
	gaps := make([]float64, len(t)-1)
	for i := range gaps {
		gaps[i] = t[i+1] - t[i]
	}
	med := medianOf(gaps)
	if med <= 0 {
		return 0
	}
	var sx, sy, sxx, sxy, n float64
	for _, v := range t {
		k := math.Round((v - t[0]) / med)
		sx += k
		sy += v
		sxx += k * k
		sxy += k * v
		n++
	}
	den := n*sxx - sx*sx
	if den == 0 {
		return med
	}
	return (n*sxy - sx*sy) / den
}

// pulseFootprint is what a pulse train accounts for besides itself: the
// level it lifts (a wideband finding no stronger than its peak), its main
// lobe (±2 bins), and, beyond it, whatever its average spectrum explains
// (sidelobeJN): a band of width B receives from the train, over the noise
// power N, on average R·max(B, rate)/fs with R its power spectral density
// over the noise's (Finding.sidelobes) and rate its pulses per second: its
// lines, rate apart, carry R·rate/fs each, one of which a band narrower
// than rate can catch whole. A finding is explained if its J/N is at most
// 4× that with the largest R over its band ± one bin (the 4 covers a pair's
// interference, up to 2× the average, and the scatter of one block's
// estimate). A tone is judged over its ±maxToneHalfWidth bins.
func pulseFootprint(c, x *Finding, g *grid) bool {
	class, lo, hi, jn := x.Class, x.LowHz, x.HighHz, x.JN
	if class == ClassWidebandNoise {
		return jn <= c.JN
	}
	if class == ClassPulsed {
		// The same pulses seen again in another sub-band (a strong
		// train's spectrum reaches far): weaker, arriving with c's.
		return jn < c.JN && samePulses(c.Pulse, x.Pulse, g.fs)
	}
	if c.Pulse != nil && len(c.Pulse.Channels) > 0 {
		// A hopper: each channel's main lobe and spectrum.
		bw := 1 / math.Max(c.Pulse.WidthS, 1e-9)
		for _, ch := range c.Pulse.Channels {
			if overlaps(lo, hi, ch-bw-2*g.bin, ch+bw+2*g.bin) && jn <= c.JN {
				return true
			}
			one := *c
			one.OffsetHz = ch
			if one.sidelobeJN(lo, hi, math.Max(hi-lo, 1.5*g.bin), g.bin, g.fs) >= jn {
				return true
			}
		}
		return false
	}
	if overlaps(lo, hi, c.LowHz-2*g.bin, c.HighHz+2*g.bin) {
		// Within its main lobe: anything no stronger than its peak (a
		// steady tone stronger than the pulses' peak is not their
		// spectrum, whatever band the train was measured over).
		return jn <= c.JN
	}
	band := math.Max(hi-lo, 1.5*g.bin)
	if class == ClassCW {
		band = float64(2*maxToneHalfWidth+1) * g.bin
	}
	return c.sidelobeJN(lo, hi, band, g.bin, g.fs) >= jn
}

// alike reports whether run lengths are those of one emitter's pulses:
// their interquartile range at most the median (the quartiles of a pulse
// train's runs differ by a few samples of threshold jitter; those of noise
// peaks, roughly exponential, by about 1.1 medians).
func (d *Pulse) alike(lens []float64) bool {
	s := append(d.lensScratch[:0], lens...)
	d.lensScratch = s
	sort.Float64s(s)
	q1, q2, q3 := s[len(s)/4], s[len(s)/2], s[3*len(s)/4]
	return q3-q1 <= q2
}

// samePulses reports whether most (four fifths) of train b's arrivals
// coincide with a's, to within a's pulse width or a microsecond (arrival
// times in capture samples at rate fs); with either pulse of a's pairs
// when a's pulses come in pairs.
func samePulses(a, b *PulseParams, fs float64) bool {
	if a == nil || b == nil || len(b.Groups) == 0 || len(a.Groups) == 0 {
		return false
	}
	tol := math.Max(a.WidthS, 1e-6)
	// Arrival times are capture samples; a's are sorted. When a's pulses
	// come in pairs, b may have been seen at either pulse of a pair.
	pair := int64(math.Round(a.PairSpacingS * fs))
	hit := 0
	for _, t := range b.Groups {
		near := math.Inf(1)
		for _, t := range []int64{t, t - pair} {
			i := sort.Search(len(a.Groups), func(i int) bool { return a.Groups[i] >= t })
			for _, j := range []int{i - 1, i} {
				if j >= 0 && j < len(a.Groups) {
					near = math.Min(near, math.Abs(float64(a.Groups[j]-t)))
				}
			}
		}
		if near <= tol*fs {
			hit++
		}
	}
	return 5*hit >= 4*len(b.Groups)
}

// sidelobeJN is the most J/N pulse train c's spectrum explains in the band
// lo..hi of width band (see pulseFootprint); 0 without a spectrum.
func (c Finding) sidelobeJN(lo, hi, band, bin, fs float64) float64 {
	if len(c.sidelobes) == 0 || c.sidelobeStep <= 0 {
		return 0
	}
	dlo, dhi := math.Abs(lo-c.OffsetHz), math.Abs(hi-c.OffsetHz)
	near, far := math.Min(dlo, dhi), math.Max(dlo, dhi)
	if lo <= c.OffsetHz && c.OffsetHz <= hi {
		near = 0
	}
	i0 := max(0, int((near-bin)/c.sidelobeStep))
	i1 := min(len(c.sidelobes)-1, int(math.Ceil((far+bin)/c.sidelobeStep)))
	r := float32(0)
	for i := i0; i <= i1; i++ {
		r = max(r, c.sidelobes[i])
	}
	return 4 * float64(r) * math.Max(band, c.pulseRate) / fs
}

// burstChirp tells bursts of a sweep that crosses the band from pulses of
// a carrier. In each run, the chirp rate is read from the second-order
// phase difference (the second-order ambiguity function at lag 1, Peleg &
// Porat 1991): with z[n] = x[n]·x*[n−1], whose angle is 2π·f(n)/fs, the
// product y[n] = z[n]·z*[n−1] has the angle 2π·ḟ/fs², which stays small
// (no wrapping, unlike f itself near ±fs/2), so the rate is
// ḟ = fs²/2π·arg Σ y[n], the sum taken over the run. A burst of a sweep
// wider than the band ramps across much of it (|ḟ|·duration above a
// quarter of fs, the duration being the |z|-weighted spread of the run,
// √12·σ, as of a uniform span) with the y[n] coherent (|Σy| ≥ ½ Σ|y|); a
// pulse holds its carrier (ḟ ≈ 0). When most runs ramp, the emitter is a
// sweep: all ramps of one sign, a sawtooth (up or down) whose period is
// the runs' PRI; both signs, a triangle whose period is the PRI of the
// runs of one sign (|Σy| ≥ 0.3 Σ|y| on a low-bit quantizer's samples, see
// below). The rate is the median; the part of the sweep seen is
// the range the ramps cover around their mean frequency; the whole span
// follows from rate × period (a sawtooth) or rate × period/2 (a triangle).
func (d *Pulse) burstChirp(x []complex64, n int, fs float64) (SweepParams, bool) {
	d.slopes = d.slopes[:0]
	d.chirpAt = d.chirpAt[:0]
	// A low-bit quantizer's samples carry the phase to within a sector
	// (2 bits per rail: about ±20° on a strong signal), which spreads the
	// lag-1 products' angles: a burst of a sweep then sums to about 0.45
	// of Σ|y| (measured on the 2-bit world site) against near 1 for 16-bit
	// samples, while noise alone sums to about 1/√n (0.15 for a 45-sample
	// run). The run must still move its mean frequency the rate's way.
	coherent := 0.5
	if d.lowT > 0 {
		coherent = 0.2
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for p := 0; p < n; p++ {
		a, b := d.starts[p], d.ends[p]
		if b-a < 4 {
			continue
		}
		var zsum, ysum complex128
		var zh [2][1]complex128
		var ymag, sw, sx, sxx float64
		prev := complex128(0)
		half := (a + b) / 2
		for i := max(a, 1); i < b; i++ {
			z := complex128(x[i] * complex(real(x[i-1]), -imag(x[i-1])))
			w := cmplx.Abs(z)
			t := float64(i - a)
			zsum += z
			if i < half {
				zh[0][0] += z
			} else {
				zh[1][0] += z
			}
			sw += w
			sx += w * t
			sxx += w * t * t
			if prev != 0 {
				y := z * cmplx.Conj(prev)
				ysum += y
				ymag += cmplx.Abs(y)
			}
			prev = z
		}
		if sw <= 0 || ymag <= 0 || cmplx.Abs(ysum) < coherent*ymag {
			continue
		}
		rate := cmplx.Phase(ysum) * fs * fs / (2 * math.Pi) // Hz/s
		mean := sx / sw
		dur := math.Sqrt(12*math.Max(sxx/sw-mean*mean, 0)) / fs
		ext := rate * dur
		// The mean frequencies of the run's two halves must move the same
		// way by a good part of the band (the lag-1 estimate alone is too
		// coarse on a long pulse: a small angle error is a large rate).
		move := (cmplx.Phase(zh[1][0]) - cmplx.Phase(zh[0][0])) * fs / (2 * math.Pi)
		if math.Abs(ext) < 0.25*fs || math.Abs(move) < 0.15*fs || move*ext < 0 {
			continue
		}
		mid := cmplx.Phase(zsum) * fs / (2 * math.Pi)
		lo, hi = math.Min(lo, mid-math.Abs(ext)/2), math.Max(hi, mid+math.Abs(ext)/2)
		d.slopes = append(d.slopes, rate)
		d.chirpAt = append(d.chirpAt, d.centers[p])
	}
	// Most runs must ramp.
	if len(d.slopes) < 2 || 5*len(d.slopes) < 4*n {
		return SweepParams{}, false
	}
	n = len(d.slopes)
	up := 0
	for _, v := range d.slopes {
		if v > 0 {
			up++
		}
	}
	sw := SweepParams{Coherent: 1}
	abs := d.slopes[:0:0]
	for _, v := range d.slopes {
		abs = append(abs, math.Abs(v))
	}
	rate := medianOf(abs)
	switch {
	case up == n || up == 0:
		sw.Shape = "up"
		sw.RateHzS = rate
		if up == 0 {
			sw.Shape, sw.RateHzS = "down", -rate
		}
		sw.PeriodS = pri(d.chirpAt) / fs
		sw.SpanHz = rate * sw.PeriodS
	case up >= n/3 && up <= n-n/3:
		sw.Shape = "triangle"
		sw.RateHzS = rate
		ups := d.upCenters[:0]
		for i, v := range d.slopes {
			if v > 0 {
				ups = append(ups, d.chirpAt[i])
			}
		}
		d.upCenters = ups
		sw.PeriodS = pri(ups) / fs
		sw.SpanHz = rate * sw.PeriodS / 2
	default:
		return SweepParams{}, false
	}
	if !(sw.PeriodS > 0) {
		return SweepParams{}, false
	}
	sw.LowHz, sw.HighHz = math.Max(lo, -fs/2), math.Min(hi, fs/2)
	sw.Beyond = sw.SpanHz > 1.1*(sw.HighHz-sw.LowHz)
	return sw, true
}

// regionExplained reports whether pulse train c's average spectrum
// accounts for the excess power SK-flagged region r holds (see
// pulseFootprint).
func (d *Pulse) regionExplained(in *BlockInput, c *Finding, r [2]float64) bool {
	if c.Class != ClassPulsed {
		return false
	}
	f := in.F
	bin := f.Fs / float64(f.N)
	m := d.margin(in)
	lo, hi := f.Bin(r[0]+m), f.Bin(r[1]-m)
	if hi < lo {
		lo, hi = hi, lo
	}
	jn := in.bandPower(lo, hi) / in.NoisePower
	x := Finding{Class: ClassNarrowbandNoise, LowHz: f.Offset(lo), HighHz: f.Offset(hi), JN: jn}
	return pulseFootprint(c, &x, &grid{bin: bin, fs: f.Fs})
}

// margin is how far a sub-band reaches beyond the bins SK flagged: a
// pulse's spectrum spreads beyond its strongest bins (a 3.5 µs DME pulse's
// to about ±300 kHz at −17 dB), and a sub-band filter much narrower than
// twice that would smear a pulse pair into one.
func (d *Pulse) margin(in *BlockInput) float64 {
	return math.Max(500e3, 4*in.F.Fs/float64(in.F.N))
}

// regionPfa is the probability under noise alone at which a run of SK-high
// bins is still searched for pulses (about one region in 10⁶ of noise:
// three flagged bins within eleven, at the default SK false-alarm rate).
const regionPfa = 1e-6

// maxRegions bounds the sub-bands searched per block.
const maxRegions = 6

// regions finds the sub-bands where pulses are: around the bins SK flags
// above its upper threshold (energy in some frames only), strongest
// first. From the SK-high bin of most excess power not yet taken, the run
// of SK-high bins around it (gaps of up to four bins bridged, at most a
// fifth of the band each way) widened by margin is one region; at most
// maxRegions. Where a strong emitter drives a low-bit quantizer, a pulse
// changes the whole band's statistics and SK flags bins everywhere: the
// strongest of them, the pulse's own, still lead.
func (d *Pulse) regions(in *BlockInput) [][2]float64 {
	f := in.F
	margin := d.margin(in)
	out := d.regionBuf[:0]
	if cap(d.taken) < f.N {
		d.taken = make([]bool, f.N)
	}
	taken := d.taken[:f.N]
	clear(taken)
	reach := f.N / 5
	for len(out) < maxRegions {
		best, at := 0.0, -1
		for k := 1; k+1 < f.N; k++ {
			if in.SKFlag[k] <= 0 || taken[k] {
				continue
			}
			if p := in.excess(k-1) + in.excess(k) + in.excess(k+1); p > best {
				best, at = p, k
			}
		}
		if at < 0 {
			break
		}
		lo, hi := at, at
		for gap := 0; lo > 0 && at-lo < reach && gap <= 4; {
			lo--
			if in.SKFlag[lo] > 0 {
				gap = 0
			} else {
				gap++
			}
		}
		for gap := 0; hi < f.N-1 && hi-at < reach && gap <= 4; {
			hi++
			if in.SKFlag[hi] > 0 {
				gap = 0
			} else {
				gap++
			}
		}
		flagged := 0
		for k := lo; k <= hi; k++ {
			taken[k] = true
			if in.SKFlag[k] > 0 {
				flagged++
			}
		}
		// Noise alone flags a bin with probability SKPfa: a run whose
		// count of flagged bins is that likely under noise (binomial
		// tail P(X ≥ flagged) over its span above regionPfa, Abramowitz
		// & Stegun 26.5.24 as in binomialThreshold) is not searched — on
		// a clean band, a sub-band search every few blocks for nothing.
		if flagged < 2 || mathext.RegIncBeta(float64(flagged), float64(hi-lo+1-flagged+1), in.Cfg.SKPfa) > regionPfa {
			continue
		}
		out = addRegion(out, [2]float64{f.Offset(lo) - margin, f.Offset(hi) + margin})
	}
	d.regionBuf = out
	return out
}

// subband filters sub-band r (offsets, Hz) out of the block, mixed to
// baseband and decimated, by fast convolution (overlap-save, Oppenheim &
// Schafer, from memory): the block is cut into segments of F samples
// hopping by F/2; each segment's F-point FFT keeps the F/D bins around
// the sub-band's centre (an even bin, so that consecutive segments join in
// phase), those within its half-width at 1 and a raised-cosine edge of a
// fifth of the half-width beyond; an F/D-point inverse FFT gives the
// segment decimated by D. The mask is a zero-phase filter, whose impulse
// response reaches both ways, so the circular convolution is exact in the
// middle half of each segment only: that half is kept. D is the
// largest power of two leaving the output rate at least 2.5 times the
// sub-band's width and 2 MS/s (1 µs must hold two samples). The filter is
// as sharp as the FFT's bins (fs/F), at about 10 ns per input sample. It
// returns the output, its rate, D, the centre, the noise power per output
// sample expected from the noise reference over the sub-band, and the
// block samples left out at its start.
func (d *Pulse) subband(in *BlockInput, x []complex64, r [2]float64) ([]complex64, float64, int, float64, float64, int) {
	f := in.F
	fs := f.Fs
	const segment = 4096
	binHz := fs / segment
	b0 := 2 * int(math.Round((r[0]+r[1])/2/binHz/2))
	fc := float64(b0) * binHz
	half := math.Min((r[1]-r[0])/2, fs/2)
	edge := half / 5
	dec := 1
	for dec*2 <= segment/16 && fs/float64(dec*2) >= math.Max(2.5*2*(half+edge), 2e6) {
		dec *= 2
	}
	m := segment / dec
	if d.sbPlan == nil || d.sbPlan.Len() != segment {
		d.sbPlan = fft.NewPlan(segment)
		d.sbSpec = make([]complex64, segment)
		d.sbSeg = make([]complex64, segment)
	}
	if d.sbInv == nil || d.sbInv.Len() != m {
		d.sbInv = fft.NewPlan(m)
		d.sbOut = make([]complex64, m)
		d.sbTaper = make([]float32, m)
	}
	// The taper over the kept bins, in FFT order (k ≥ 0 at k, k < 0 at
	// m + k).
	for i := range d.sbTaper {
		k := i
		if i >= m/2 {
			k = i - m
		}
		a := math.Abs(float64(k)) * binHz
		switch {
		case a <= half:
			d.sbTaper[i] = 1
		case a <= half+edge:
			d.sbTaper[i] = float32(0.5 * (1 + math.Cos(math.Pi*(a-half)/edge)))
		default:
			d.sbTaper[i] = 0
		}
	}
	hop := segment / 2
	n := len(x) / dec
	if cap(d.filtered) < n+m {
		d.filtered = make([]complex64, n+m)
	}
	y := d.filtered[:0]
	scale := complex(float32(1.0/segment), 0)
	for st := -segment / 4; st < len(x); st += hop {
		seg := d.sbSeg
		clear(seg)
		lo, hi := max(st, 0), min(st+segment, len(x))
		if lo < hi {
			copy(seg[lo-st:], x[lo:hi])
		}
		d.sbPlan.Forward(d.sbSpec, seg)
		for i := range d.sbOut {
			k := i
			if i >= m/2 {
				k = i - m
			}
			j := ((b0+k)%segment + segment) % segment
			d.sbOut[i] = d.sbSpec[j] * complex(d.sbTaper[i], 0) * scale
		}
		d.sbInv.Inverse(d.sbOut, d.sbOut)
		y = append(y, d.sbOut[m/4:3*m/4]...)
	}
	y = y[:min(len(y), n)]
	d.filtered = y
	// The block's edges: the filter meets the zeros beyond them, and a
	// strong emitter's abrupt start there leaks into the sub-band; the
	// first and last samples within the filter's reach (about five over
	// the taper's width) are left out.
	guard := int(math.Ceil(5 / edge * fs / float64(dec)))
	if 4*guard >= len(y) {
		return nil, 0, 0, 0, 0, 0
	}
	y = y[guard : len(y)-guard]
	var noise float64
	for k := f.Bin(fc - half); k <= f.Bin(fc+half); k++ {
		noise += in.Floor[k]
	}
	return y, fs / float64(dec), dec, fc, noise, guard * dec
}

// hopping appends the sub-band trains to out, one finding for those that
// are one emitter hopping over channels: at least two trains whose pulse
// widths agree within 15 % and whose pulses, merged in time, keep a
// regular spacing (the PRI fitted over all of them explains their times
// to within a tenth of it) that no channel keeps alone.
func (d *Pulse) hopping(out []Finding, trains []Finding, fs float64) []Finding {
	if len(trains) < 2 {
		return append(out, trains...)
	}
	used := make([]bool, len(trains))
	for i := range trains {
		if used[i] {
			continue
		}
		group := []int{i}
		for j := i + 1; j < len(trains); j++ {
			if !used[j] && math.Abs(trains[j].Pulse.WidthS-trains[i].Pulse.WidthS) <= 0.15*trains[i].Pulse.WidthS {
				group = append(group, j)
			}
		}
		if len(group) >= 2 {
			var times []float64
			for _, g := range group {
				for _, t := range trains[g].Pulse.Groups {
					times = append(times, float64(t))
				}
			}
			sort.Float64s(times)
			if p := pri(times); p > 0 && regular(times, p) && !regular(float64s(trains[i].Pulse.Groups), p) {
				h := trains[i]
				pp := *h.Pulse
				pp.Groups = make([]int64, len(times))
				for k, t := range times {
					pp.Groups[k] = int64(t)
				}
				pp.PRIS = p / fs
				pp.Pulses = 0
				lo, hi := math.Inf(1), math.Inf(-1)
				h.JN = 0
				for _, g := range group {
					t := trains[g]
					used[g] = true
					pp.Pulses += t.Pulse.Pulses
					pp.Channels = append(pp.Channels, t.OffsetHz)
					lo, hi = math.Min(lo, t.LowHz), math.Max(hi, t.HighHz)
					h.JN = math.Max(h.JN, t.JN)
					h.Start, h.End = min(h.Start, t.Start), max(h.End, t.End)
				}
				sort.Float64s(pp.Channels)
				pp.DutyCycle = 0
				for _, g := range group {
					pp.DutyCycle += trains[g].Pulse.DutyCycle
				}
				h.Pulse = &pp
				h.LowHz, h.HighHz, h.OffsetHz = lo, hi, (lo+hi)/2
				h.sidelobes = nil // a hopper's spectrum is its channels'
				out = append(out, h)
				continue
			}
		}
		used[i] = true
		out = append(out, trains[i])
	}
	return out
}

// addRegion adds r to regions, merged with one it overlaps.
func addRegion(regions [][2]float64, r [2]float64) [][2]float64 {
	for i, q := range regions {
		if overlaps(q[0], q[1], r[0], r[1]) {
			regions[i] = [2]float64{math.Min(q[0], r[0]), math.Max(q[1], r[1])}
			return regions
		}
	}
	return append(regions, r)
}

// covers reports whether pulse train c accounts for sub-band r: r holds
// its carrier, or one of a hopper's channels.
func (c *Finding) covers(r [2]float64) bool {
	if c.Pulse != nil && len(c.Pulse.Channels) > 0 {
		for _, ch := range c.Pulse.Channels {
			if r[0] <= ch && ch <= r[1] {
				return true
			}
		}
		return false
	}
	return overlaps(r[0], r[1], c.LowHz, c.HighHz)
}

// regular reports whether times (sorted) sit on a grid of spacing p to
// within a tenth of p.
func regular(times []float64, p float64) bool {
	if len(times) < 3 || p <= 0 {
		return false
	}
	bad := 0
	for _, t := range times {
		k := math.Round((t - times[0]) / p)
		if math.Abs(t-times[0]-k*p) > 0.1*p {
			bad++
		}
	}
	// … and fill it: a channel alone skips grid points.
	span := math.Round((times[len(times)-1]-times[0])/p) + 1
	return bad*10 <= len(times) && float64(len(times)) >= 0.8*span
}

func float64s(v []int64) []float64 {
	out := make([]float64, len(v))
	for i, x := range v {
		out[i] = float64(x)
	}
	return out
}

// channels groups the carriers of a wideband train's pulses (sorted,
// split where neighbours lie more than max(2/width, 200 kHz) apart; a
// group needs a tenth of the pulses). One group: one carrier (nil). Several
// groups whose pulses together sit on one regular grid (regular, with the
// PRI fitted over all of them) while each group alone does not: one
// emitter hopping over them, returned as its channels. Several groups
// otherwise: a mixture of emitters, their carriers returned with mixture
// set, for the sub-band search to take apart.
func (d *Pulse) channels(n int, width, fs float64) (ch []float64, mixture bool) {
	sorted := append(d.lens[:0], d.carriers[:n]...)
	d.lens = sorted
	sort.Float64s(sorted)
	sep := math.Max(2/width, 200e3)
	var groups [][2]int // index ranges into sorted
	a := 0
	for i := 1; i <= len(sorted); i++ {
		if i == len(sorted) || sorted[i]-sorted[i-1] > sep {
			if i-a >= max(2, n/10) {
				groups = append(groups, [2]int{a, i})
			}
			a = i
		}
	}
	if len(groups) < 2 {
		return nil, false
	}
	for _, g := range groups {
		ch = append(ch, medianOf(sorted[g[0]:g[1]]))
	}
	p := pri(d.centers[:n])
	if !regular(d.centers[:n], p) {
		return ch, true
	}
	for _, c := range ch {
		var own []float64
		for i, f := range d.carriers[:n] {
			if math.Abs(f-c) <= sep {
				own = append(own, d.centers[i])
			}
		}
		if regular(own, p) {
			return ch, true
		}
	}
	return ch, false
}

// runningSums fills d.sums with the l-sample running sums of env:
// sums[j] = Σ env[j … j+l−1].
func (d *Pulse) runningSums(env []float64, l int) {
	if cap(d.sums) < len(env) {
		d.sums = make([]float64, len(env))
	}
	sums := d.sums[:len(env)-l+1]
	var run float64
	for i := range env {
		run += env[i]
		if i >= l {
			run -= env[i-l]
		}
		if i >= l-1 {
			sums[i-l+1] = run
		}
	}
}

// Pulses in low-bit samples. A quantizer of two or three bits (the sign
// and magnitude bits of a GNSS front end, REFERENCES §12.3) caps the
// envelope: a pulse 20 dB over the noise reads barely 4 dB over it in
// |x|², and noise alone reaches that cap in a few samples by chance, so
// the envelope test cannot hold its false-alarm rate. What does carry
// the pulse is the magnitude bit: each component is beyond the
// quantizer's threshold T with probability p₀ under noise (0.317 at
// T = σ), with probability near 1 inside a strong pulse. The statistic
// is the count of such components over a window of W samples, Binomial
// (2W, p₀) under noise; W is the fewest samples (at least a microsecond)
// for which a full count is rarer than the false-alarm rate (p₀^(2W) ≤
// Pfa/100), and the threshold is the count whose binomial tail is at
// most PulsePfa. p₀ is read from the block: the median, over 256-sample
// stretches, of their share of components beyond T (pulses at duty
// cycles below a half do not move it).

// lowBitEnvelope fills d.env with the magnitude-bit count of each sample
// and d.sums with its W-sample running sums, and returns W, the count per
// sample expected under noise (2p₀), and the high and low thresholds on
// the running sum.
func (d *Pulse) lowBitEnvelope(x []complex64, fs, pfa float64) (w int, ns, thr, thrLow float64, ok bool) {
	t := d.lowT
	if cap(d.env) < len(x) {
		d.env = make([]float64, len(x))
	}
	env := d.env[:len(x)]
	for i, v := range x {
		var c float64
		if re := real(v); re > t || re < -t {
			c++
		}
		if im := imag(v); im > t || im < -t {
			c++
		}
		env[i] = c
	}
	const stretch = 256
	shares := d.lens[:0]
	for a := 0; a+stretch <= len(env); a += stretch {
		var c float64
		for _, v := range env[a : a+stretch] {
			c += v
		}
		shares = append(shares, c/(2*stretch))
	}
	d.lens = shares
	if len(shares) == 0 {
		return 0, 0, 0, 0, false
	}
	p0 := medianScratch(&d.lensScratch, shares)
	if !(p0 > 0 && p0 < 0.9) {
		return 0, 0, 0, 0, false // no magnitude bits, or saturated throughout
	}
	w = max(2, int(math.Round(1e-6*fs)))
	for math.Pow(p0, float64(2*w)) > pfa/100 {
		w++
	}
	if len(env) < 4*w {
		return 0, 0, 0, 0, false
	}
	d.runningSums(env, w)
	n := 2 * w
	c := d.binomialThreshold(n, p0, pfa)
	return w, 2 * p0, float64(c) - 0.5, (2*p0*float64(w) + float64(c)) / 2, true
}

// binomialThreshold is the smallest count c with P(X ≥ c) ≤ pfa for
// X ~ Binomial(n, p): P(X ≥ c) = I_p(c, n − c + 1), the regularized
// incomplete beta function (Abramowitz & Stegun 26.5.24, from memory).
// Cached by n and p in thousandths.
func (d *Pulse) binomialThreshold(n int, p, pfa float64) int {
	if d.binom == nil {
		d.binom = map[[2]int]int{}
	}
	key := [2]int{n, int(math.Round(p * 1000))}
	if c, ok := d.binom[key]; ok {
		return c
	}
	c := n
	for k := n; k >= 1; k-- {
		if mathext.RegIncBeta(float64(k), float64(n-k+1), p) > pfa {
			break
		}
		c = k
	}
	d.binom[key] = c
	return c
}

// lowBitJN turns a low-bit pulse's mean count at its top (peak over the
// noise's ns, counts per sample) into its J/N: the in-pulse share of
// components beyond T is p = (peak + ns)/2, and with p₀ = ns/2 the powers
// follow from σ/T = 1/(√2·erfc⁻¹(p)) (REFERENCES §12.3), so
// J/N = (σ_in/σ₀)² − 1. Above a share of 0.95 the quantizer is saturated
// and the J/N is a lower bound (bound true).
func (d *Pulse) lowBitJN(peak, ns float64) (jn float64, bound bool) {
	p, p0 := (peak+ns)/2, ns/2
	if p > ingest.OccupancySaturation {
		p, bound = ingest.OccupancySaturation, true
	}
	s := 1 / (math.Sqrt2 * math.Erfcinv(p))
	s0 := 1 / (math.Sqrt2 * math.Erfcinv(p0))
	return math.Max(s*s/(s0*s0)-1, 0), bound
}

// Tone removal before the sub-band search.
const (
	// removeToneMinJN is the J/N (linear, over the capture band's noise)
	// from which a CW finding's tone is removed: 3 dB.
	removeToneMinJN = 2
	// removeToneMax bounds the tones removed per block (the strongest).
	removeToneMax = 4
	// removeToneSegment is the segment over which a tone's amplitude is
	// taken as constant: 1024 samples (256 µs at 4 MS/s), short against a
	// keyed tone's on-time and long against a pulse.
	removeToneSegment = 1024
)

// removeTones returns x with the strongest steady tones of the block's
// CW findings (those of out at J/N ≥ 3 dB, at most four) subtracted, in
// d.clean; x itself when there are none. Each tone's frequency is refined
// from the phase advance of its correlation over successive segments of
// L samples (the phase-difference estimator: δω = arg Σ c_{s+1}·c_s*/L,
// unambiguous within ±fs/(2L); the CW detector gives the offset to a few
// Hz), then its complex amplitude is taken per segment, a_s =
// (1/L) Σ x[n]·e^{−jωn}, and a_s·e^{jωn} subtracted. Per-segment
// amplitudes follow a keyed tone and the gain changes of a clipping front
// end; a pulse a few µs long changes a segment's estimate by its share of
// the segment's energy only. Cost: two passes over the block per tone.
func (d *Pulse) removeTones(x []complex64, fs float64, out []Finding, noise float64) []complex64 {
	var tones [removeToneMax]ToneParam
	n := 0
	for i := range out {
		c := &out[i]
		if c.Class != ClassCW {
			continue
		}
		for _, t := range c.Tones {
			if math.Pow(10, t.JNDB/10) < removeToneMinJN {
				continue
			}
			if n < removeToneMax {
				tones[n] = t
				n++
				continue
			}
			// Replace the weakest kept.
			w := 0
			for j := 1; j < n; j++ {
				if tones[j].JNDB < tones[w].JNDB {
					w = j
				}
			}
			if t.JNDB > tones[w].JNDB {
				tones[w] = t
			}
		}
	}
	if n == 0 || len(x) < 2*removeToneSegment {
		return x
	}
	if cap(d.clean) < len(x) {
		d.clean = make([]complex64, len(x))
	}
	y := d.clean[:len(x)]
	copy(y, x)
	const L = removeToneSegment
	for _, t := range tones[:n] {
		w := 2 * math.Pi * t.OffsetHz / fs
		// Refine ω from the phase advance between segments.
		var adv complex128
		var prev complex128
		for s0 := 0; s0+L <= len(y); s0 += L {
			c := correlate(y[s0:s0+L], w, s0)
			if s0 > 0 {
				adv += c * cmplx.Conj(prev)
			}
			prev = c
		}
		w += cmplx.Phase(adv) / L
		// Subtract the tone segment by segment (the tail joins the last
		// segment).
		for s0 := 0; s0 < len(y); s0 += L {
			e := s0 + L
			if e+L > len(y) {
				e = len(y)
			}
			seg := y[s0:e]
			a := correlate(seg, w, s0) / complex(float64(len(seg)), 0)
			subtractTone(seg, w, s0, a)
			if e == len(y) {
				break
			}
		}
	}
	return y
}

// correlate returns Σ x[i]·e^{−jω(n0+i)}.
func correlate(x []complex64, w float64, n0 int) complex128 {
	rot := cmplx.Exp(complex(0, -w*float64(n0)))
	step := cmplx.Exp(complex(0, -w))
	var sum complex128
	for i, v := range x {
		sum += complex128(v) * rot
		rot *= step
		if i&255 == 255 {
			rot /= complex(cmplx.Abs(rot), 0) // keep |rot| = 1
		}
	}
	return sum
}

// subtractTone subtracts a·e^{jω(n0+i)} from x[i].
func subtractTone(x []complex64, w float64, n0 int, a complex128) {
	rot := a * cmplx.Exp(complex(0, w*float64(n0)))
	step := cmplx.Exp(complex(0, w))
	mag := cmplx.Abs(a)
	for i := range x {
		x[i] -= complex64(rot)
		rot *= step
		if i&255 == 255 && mag > 0 {
			rot *= complex(mag/cmplx.Abs(rot), 0)
		}
	}
}
