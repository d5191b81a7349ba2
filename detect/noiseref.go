package detect

import (
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// NoiseReference is the noise floor every detector compares with: the
// front end's smooth passband (filter ripple, tilt, roll-off, the GNSS
// signals' bump) at the block's own noise level. Narrow lines, bands and
// sweeps stand above it; the passband itself never does.
//
// With a site baseline, the passband is the baseline's (learned from
// earlier captures, see Baseline) and only the level is measured in the
// block: the level is the lower quantile q of the bins' ratios to the
// passband, over the usable bins (not excluded, not flagged by SK),
// divided by the same quantile of Gamma(M, 1/M), the distribution of a
// mean of M exponential powers over their mean. A lower quantile is
// untouched by interference occupying less than 1 − q of the band, and a
// gain change or a wideband noise moves it exactly by its factor. The same
// is measured in wideSubbands sub-bands, for NoiseFloor's coverage test.
//
// Without a baseline (the first captures of a site, a single-file replay),
// the passband is fitted to the block itself (Passband): robust to
// interference, never a flat median floor that a real front end's
// passband would rise above. The fit is made on the capture's first block
// that no emitter spreading over the band (a sweep, a pulse train, a
// wideband rise) occupies, and kept: the blocks after take its shape at
// their own level, as they would a baseline's (a passband does not change
// within a capture, and an emitter that appears later is not absorbed).
// Until then every block is fitted on its own.
//
// The excess-power threshold on the ratio (BlockInput.BinThreshold) is the
// (1 − BinPfa) quantile of Gamma(M, 1/M), or of F(2M, 2E) when the floor
// comes from a baseline averaged over only E frames, raised by
// referenceMarginDB for what a smooth model cannot follow (ripple finer
// than its knots: about 0.1–0.3 dB on the front ends of the tests).
type NoiseReference struct {
	// shape is the baseline's passband (absolute: the baseline's floor per
	// bin); nil without a baseline.
	shape  []float64
	level  float64 // mean of shape: the baseline's noise level per bin
	frames float64 // frames averaged into the baseline's passband
	pb     *Passband
	vals   []float64
	skip   []bool
	qcache map[int]float64
	// own is the passband fitted to this capture (no baseline), ownAge
	// the blocks since (−1: none yet).
	own    []float64
	ownAge int
	// busy says an emitter that spreads over the band (a sweep, a pulse
	// train, a wideband rise) was on in the last block: its fit is no
	// passband to keep.
	busy bool
}

// referenceQuantile is the lower quantile of the bins' ratios that
// measures the noise level.
const referenceQuantile = 0.15

// referenceMarginDB widens the excess-power threshold for the model error
// of a smooth passband.
const referenceMarginDB = 0.3

// newNoiseReference makes a reference for n-bin spectra.
func newNoiseReference(n int) *NoiseReference {
	return &NoiseReference{pb: NewPassband(n), vals: make([]float64, 0, n), skip: make([]bool, n)}
}

// reset starts a capture with the baseline's passband (nil: none) known
// from frames frames.
func (r *NoiseReference) reset(shape []float64, frames float64) {
	r.shape, r.frames, r.level = nil, 0, 0
	r.ownAge = -1
	if len(shape) != r.pb.n {
		return
	}
	var s float64
	for _, v := range shape {
		s += v
	}
	if !(s > 0) {
		return
	}
	r.shape, r.frames, r.level = shape, frames, s/float64(len(shape))
}

// gammaQuantile is the q quantile of Gamma(m, 1/m), cached by m.
func (r *NoiseReference) gammaQuantile(m int) float64 {
	if r.qcache == nil {
		r.qcache = map[int]float64{}
	}
	if v, ok := r.qcache[m]; ok {
		return v
	}
	v := distuv.Gamma{Alpha: float64(m), Beta: float64(m)}.Quantile(referenceQuantile)
	r.qcache[m] = v
	return v
}

// usable reports whether bin k may measure the floor: not excluded and
// not flagged by SK as non-Gaussian.
func (in *BlockInput) usable(k int) bool { return !in.Excluded[k] && in.SKFlag[k] == 0 }

// apply fills in's Floor, NoisePower, Ratio, LevelRise, SubbandRise and
// BinThreshold for its block. SK must have been computed.
func (r *NoiseReference) apply(in *BlockInput, thr *thresholdCache) {
	f := in.F
	n := f.N
	if len(in.Floor) != n {
		in.Floor = make([]float64, n)
		in.Ratio = make([]float64, n)
	}
	in.HasBaseline = r.shape != nil
	in.Rise, in.LevelRise = 1, 1
	for b := range in.SubbandRise {
		in.SubbandRise[b] = 1
	}
	floorFrames := 0.0
	shape, level := r.shape, r.level
	if shape == nil && r.ownAge >= 0 && f.Frames > 0 {
		shape, level = r.own, r.ownLevel()
	}
	if shape != nil && f.Frames > 0 {
		q := r.gammaQuantile(f.Frames)
		lv := level * r.quantileRatio(in, shape, 0, n) / q
		if !(lv > 0) {
			lv = level
		}
		g := lv / level
		for k := range in.Floor {
			in.Floor[k] = shape[k] * g
		}
		if r.shape != nil {
			in.LevelRise = g
			w := n / wideSubbands
			for b := range in.SubbandRise {
				if v := r.quantileRatio(in, shape, b*w, (b+1)*w) / q; v > 0 {
					in.SubbandRise[b] = v
				}
			}
			floorFrames = r.frames
		} else {
			r.ownAge++
		}
	} else {
		for k := range r.skip {
			r.skip[k] = !in.usable(k)
		}
		fit, ok := r.pb.Fit(f.PSD, max(f.Frames, 1), r.skip)
		if fit == nil {
			fit = f.PSD // nothing usable at all: compare the block with itself
		}
		copy(in.Floor, fit)
		if ok && f.Frames >= minFrames && !r.busy {
			r.own = append(r.own[:0], fit...)
			r.ownAge = 0
		}
	}
	in.NoisePower = 0
	for k, fl := range in.Floor {
		in.NoisePower += fl
		if fl > 0 {
			in.Ratio[k] = f.PSD[k] / fl
		} else {
			in.Ratio[k] = 1
		}
	}
	in.BinThreshold = thr.bin(f.Frames, floorFrames, in.Cfg.BinPfa) * math.Pow(10, referenceMarginDB/10)
}

// ownLevel is the mean of the capture's own passband.
func (r *NoiseReference) ownLevel() float64 {
	var s float64
	for _, v := range r.own {
		s += v
	}
	return s / float64(max(len(r.own), 1))
}

// quantileRatio is the referenceQuantile quantile of PSD/shape over the
// usable bins lo..hi−1 (0 when none is usable).
func (r *NoiseReference) quantileRatio(in *BlockInput, shape []float64, lo, hi int) float64 {
	v := r.vals[:0]
	for k := lo; k < hi; k++ {
		if in.usable(k) && shape[k] > 0 {
			v = append(v, in.F.PSD[k]/shape[k])
		}
	}
	r.vals = v
	if len(v) == 0 {
		return 0
	}
	return selectK(v, int(referenceQuantile*float64(len(v))))
}

// floorLearner accumulates, over a capture, the mean PSD of the time and
// frequency cells no event occupies, from which the baseline's passband
// is learned (Baseline.learn): a capture with interference still teaches
// the baseline everything outside its interference.
//
// A block is taken one block late, with the cells the events of the next
// block occupy excluded too: an interference that starts in a block
// without being measurable there (it fills too little of it) is caught
// when its event opens in the next one.
type floorLearner struct {
	sum    []float64
	cnt    []int
	blocks int
	power  float64
	powN   int
	// The block waiting for the next: its PSD, power, the bins its events
	// occupied, whether it was whole-occupied or not taken at all.
	pend      []float64
	pendOcc   []bool
	pendPower float64
	pendOK    bool
}

func (l *floorLearner) reset(n int) {
	if len(l.sum) != n {
		l.sum = make([]float64, n)
		l.cnt = make([]int, n)
		l.pend = make([]float64, n)
		l.pendOcc = make([]bool, n)
	}
	clear(l.sum)
	clear(l.cnt)
	l.blocks, l.power, l.powN = 0, 0, 0
	l.pendOK = false
}

// add takes the next block: f its features when it is a full block and
// may be learned (nil otherwise), occupied the bins its events occupy,
// whole that events occupy all of it. The block before is committed with
// this one's occupancy added to its own.
func (l *floorLearner) add(f *Features, occupied []bool, whole bool) {
	if l.pendOK && !whole {
		for k, v := range l.pend {
			if !l.pendOcc[k] && !occupied[k] {
				l.sum[k] += v
				l.cnt[k]++
			}
		}
		l.blocks++
		l.power += l.pendPower
		l.powN++
	}
	l.pendOK = f != nil && !whole
	if l.pendOK {
		copy(l.pend, f.PSD)
		copy(l.pendOcc, occupied)
		l.pendPower = f.Power
	}
}

// finish commits the last block (nothing follows it).
func (l *floorLearner) finish() {
	if l.pendOK {
		for k, v := range l.pend {
			if !l.pendOcc[k] {
				l.sum[k] += v
				l.cnt[k]++
			}
		}
		l.blocks++
		l.power += l.pendPower
		l.powN++
		l.pendOK = false
	}
}

// mean returns the mean PSD per bin (0 where no block contributed), the
// fewest blocks behind a contributing bin, and the mean power of the
// blocks taken.
func (l *floorLearner) mean() (psd []float64, minBlocks int, power float64) {
	l.finish()
	minBlocks = math.MaxInt
	for k := range l.sum {
		if l.cnt[k] > 0 {
			l.sum[k] /= float64(l.cnt[k])
			minBlocks = min(minBlocks, l.cnt[k])
		}
	}
	if minBlocks == math.MaxInt {
		minBlocks = 0
	}
	if l.powN > 0 {
		power = l.power / float64(l.powN)
	}
	return l.sum, minBlocks, power
}
