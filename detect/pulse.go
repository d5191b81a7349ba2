package detect

import (
	"math"
	"math/cmplx"
	"sort"

	"gonum.org/v1/gonum/stat/distuv"
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
// centroids and averaged, give one clean pulse profile; its width is taken
// at half amplitude (a quarter of the peak power above the noise), the
// ICAO way of stating DME pulse duration (3.5 µs). Peak J/N is the
// profile's peak power above the noise over the noise power. Pairs: when
// most gaps between consecutive pulses cluster at one short spacing (12,
// 30 or 36 µs for DME), the pulses are grouped in pairs and that spacing
// reported. PRI is the least-squares slope of group arrival time against
// group index (index from the median interval, so missed pulses do not bias
// it). The carrier offset is the angle of the mean in-pulse lag product
// x[n]·x*[n−1].
type Pulse struct {
	env      []float64
	cache    map[int]float64
	quartile map[int]float64
	centers  []float64
	starts   []int
	ends     []int
	prof     []float64
}

// Name implements Detector.
func (*Pulse) Name() string { return "pulse" }

// maxPulseWidth is the longest pulse reported, in seconds.
const maxPulseWidth = 200e-6

// maxPulses bounds the pulses measured per block.
const maxPulses = 4096

// Detect implements Detector.
func (d *Pulse) Detect(in *BlockInput, out []Finding) []Finding {
	x := in.Samples
	fs := in.F.Fs
	if len(x) == 0 || in.NoisePower <= 0 {
		return out
	}
	l := max(2, int(math.Round(1e-6*fs)))
	if cap(d.env) < len(x) {
		d.env = make([]float64, len(x))
	}
	env := d.env[:len(x)]
	for i, v := range x {
		env[i] = float64(real(v))*float64(real(v)) + float64(imag(v))*float64(imag(v))
	}
	ns := d.reference(env, l, in.NoisePower, in.Cfg.PulsePfa)
	gamma := d.threshold(l, in.Cfg.PulsePfa)
	thr := gamma * ns * float64(l) // on the running sum
	// Runs of the L-sample running sum above the threshold.
	d.starts, d.ends = d.starts[:0], d.ends[:0]
	var run float64
	inRun := false
	for i := range env {
		run += env[i]
		if i >= l {
			run -= env[i-l]
		}
		if i < l-1 {
			continue
		}
		if run > thr {
			if !inRun {
				d.starts = append(d.starts, i-l+1)
				inRun = true
			}
		} else if inRun {
			d.ends = append(d.ends, i)
			inRun = false
		}
		if len(d.starts) > maxPulses {
			break
		}
	}
	if inRun {
		d.ends = append(d.ends, len(env))
	}
	n := min(len(d.starts), len(d.ends))
	if n < in.Cfg.MinPulses || n > maxPulses {
		return out
	}
	// Centroids and a coarse width bound.
	d.centers = d.centers[:0]
	maxLen := 0
	var lag complex128
	for p := 0; p < n; p++ {
		var s, sw float64
		for i := d.starts[p]; i < d.ends[p]; i++ {
			e := env[i] - ns
			s += e
			sw += e * float64(i)
			if i > 0 {
				lag += complex128(x[i]) * cmplx.Conj(complex128(x[i-1]))
			}
		}
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
		return out
	}
	half := maxLen + 2*l
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
		return out
	}
	peak := 0.0
	for j := range prof {
		prof[j] = prof[j]/float64(used) - ns
		peak = math.Max(peak, prof[j])
	}
	w := halfAmplitudeWidth(prof, peak) / fs
	if w <= 0 {
		return out
	}
	pp := &PulseParams{WidthS: w, Pulses: n}
	groups := d.centers
	if sp, ok := pairSpacing(d.centers); ok {
		pp.PairSpacingS = sp / fs
		groups = firstOfPairs(d.centers, sp)
	}
	pp.PRIS = pri(groups) / fs
	dur := float64(len(x)) / fs
	pp.DutyCycle = float64(n) * w / dur
	pp.FirstS = float64(d.starts[0]) / fs
	off := fs / (2 * math.Pi) * cmplx.Phase(lag)
	bw := 1 / w
	return append(out, Finding{Detector: d.Name(), Class: ClassPulsed, LowHz: off - bw, HighHz: off + bw,
		OffsetHz: off, JN: peak / ns, Pulse: pp,
		Start: in.F.Start + int64(d.starts[0]), End: in.F.Start + int64(d.ends[n-1])})
}

// reference is the power per sample the pulses must stand above: the
// thermal noise, or more when a steady emitter (a CW, a chirp) lifts the
// envelope. It is read from the lower quartile q of the L-sample running
// mean: under noise alone that mean is Gamma(L, 1/L)·N, so N = q/q_L with
// q_L that distribution's lower quartile. A steady emitter raises q; pulses
// at duty cycles below 75 % do not.
func (d *Pulse) reference(env []float64, l int, noise, pfa float64) float64 {
	const bins = 1024
	var hist [bins]int
	top := 16 * noise // the histogram spans 0..16 N
	var run float64
	count := 0
	for i := range env {
		run += env[i]
		if i >= l {
			run -= env[i-l]
		}
		if i < l-1 {
			continue
		}
		b := int(run / float64(l) / top * bins)
		hist[min(max(b, 0), bins-1)]++
		count++
	}
	want, acc := count/4, 0
	q := 0.0
	for b, c := range hist {
		acc += c
		if acc >= want {
			q = (float64(b) + 0.5) / bins * top
			break
		}
	}
	if d.quartile == nil {
		d.quartile = map[int]float64{}
	}
	ql, ok := d.quartile[l]
	if !ok {
		ql = distuv.Gamma{Alpha: float64(l), Beta: float64(l)}.Quantile(0.25)
		d.quartile[l] = ql
	}
	return math.Max(noise, q/ql)
}

func (d *Pulse) threshold(l int, pfa float64) float64 {
	if d.cache == nil {
		d.cache = map[int]float64{}
	}
	if v, ok := d.cache[l]; ok {
		return v
	}
	v := distuv.Gamma{Alpha: float64(l), Beta: float64(l)}.Quantile(1 - pfa)
	d.cache[l] = v
	return v
}

// halfAmplitudeWidth is the width in samples of prof at a quarter of its
// peak power (half amplitude), with linear interpolation at both edges.
func halfAmplitudeWidth(prof []float64, peak float64) float64 {
	lvl := peak / 4
	ip := 0
	for i, v := range prof {
		if v == peak {
			ip = i
			break
		}
	}
	l := ip
	for l > 0 && prof[l-1] >= lvl {
		l--
	}
	r := ip
	for r < len(prof)-1 && prof[r+1] >= lvl {
		r++
	}
	if l == 0 || r == len(prof)-1 {
		return 0
	}
	left := float64(l) - (prof[l]-lvl)/(prof[l]-prof[l-1])
	right := float64(r) + (prof[r]-lvl)/(prof[r]-prof[r+1])
	return right - left
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
