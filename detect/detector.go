package detect

import (
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// A Detector examines one block through the engine's shared features (and
// the samples, when the spectral evidence calls for per-sample work) and
// appends what it finds to out.
type Detector interface {
	Name() string
	Detect(in *BlockInput, out []Finding) []Finding
}

// BlockInput is everything a detector may read about one block: the
// samples, the one FFT pass over them, and the references the pipeline
// derived once for all detectors.
type BlockInput struct {
	F       *Features
	Samples []complex64
	Cfg     *Config

	// Floor is the per-bin noise reference (see NoiseReference): the
	// front end's smooth passband at the block's noise level, from the
	// site baseline's passband or, before there is one, fitted to the
	// block itself. Narrow lines, bands and sweeps stand above it.
	Floor []float64
	// NoisePower is Σ Floor: the noise power in the capture bandwidth.
	NoisePower  float64
	HasBaseline bool
	// Rise is the linear wideband floor rise over the baseline that
	// NoiseFloor reported in this block (1 when none); NoisePower/Rise is
	// the thermal noise power.
	Rise float64
	// LevelRise is the block's noise level over the baseline's (linear;
	// 1 without a baseline), and SubbandRise the same in each of
	// wideSubbands equal sub-bands: what NoiseFloor tests.
	LevelRise   float64
	SubbandRise [wideSubbands]float64
	// Compressed says the block's samples went through a nonlinear front
	// end: a quantizer of one to three bits, or an ADC that clipped more
	// than compressedClip of them (see nonlinear.go).
	Compressed bool
	// LowBitThreshold is the magnitude threshold of a symmetric two- or
	// three-bit quantizer whose levels the capture's samples take (full
	// scale 1; 0 otherwise): what the pulse detector counts beyond.
	LowBitThreshold float32
	// Ratio is PSD/Floor per bin; Excluded marks bins no detector looks
	// at (the DC bin of direct-conversion front ends, masks).
	Ratio    []float64
	Excluded []bool
	// BinThreshold is the ratio a bin must exceed to carry excess power:
	// the (1 − BinPfa) quantile of Gamma(M, 1/M), the distribution of a
	// mean of M exponential powers over their mean.
	BinThreshold float64

	// SK is the per-bin spectral kurtosis and SKFlag its verdict (−1 below
	// the lower threshold, +1 above the upper one), from SpectralKurtosis.
	SK          []float64
	SKFlag      []int8
	SKThreshold [2]float64
	SKSigma     float64 // standard deviation of SK under the null

	scratch  []float64 // for medians
	scratch2 []float64
}

// Finding is one detector's report for one block.
type Finding struct {
	Detector string
	// Class is the event class the finding argues for, or "" for pure
	// evidence (SK flags) that only supports other findings.
	Class string
	// Evidence is set on class-less findings: "sk_low" or "sk_high".
	Evidence string
	LowHz    float64 // occupied band, offsets from the capture centre
	HighHz   float64
	OffsetHz float64
	// JN is the interference power over the noise power in the capture
	// bandwidth, linear (for pulses: in-pulse peak).
	JN float64
	// Start and End bound the activity within the block, in capture
	// samples (End exclusive); zero End means the whole block.
	Start, End int64

	Tones       []ToneParam
	Sweep       *SweepParams
	Pulse       *PulseParams
	FloorRiseDB float64

	// sidelobes[i], for a pulse train, is its average power spectral
	// density over the noise's at i·sidelobeStep hertz from OffsetHz (see
	// Pulse.spectralDensity), and pulseRate its pulses per second. They
	// let the classifier tell the train's own sidelobes and lines from
	// narrow emitters beside it. sidelobes is the detector's scratch
	// memory: valid during the block only.
	sidelobes    []float32
	sidelobeStep float64
	pulseRate    float64
	// keyed, for a CW or wideband finding, says that the emitter was
	// switched on or off inside the block (its transients spread).
	keyed bool
	// JNLowerBound says JN is only a lower bound (a low-bit quantizer was
	// saturated by the emitter).
	JNLowerBound bool
}

// SweepParams describe a swept tone.
type SweepParams struct {
	PeriodS  float64
	LowHz    float64
	HighHz   float64
	RateHzS  float64
	Shape    string
	Coherent float64 // folded coherence, 0..1
	// SpanHz is the whole span swept: HighHz − LowHz, or, when the sweep
	// reaches beyond the capture's band (Beyond), rate × period (a
	// sawtooth) or rate × period/2 (a triangle), LowHz..HighHz being the
	// part of it seen in the band.
	SpanHz float64
	Beyond bool
	// Power is the sweep's power while present (full scale 1) and Duty
	// the share of its period it is present in the band, from the fold;
	// Even says the fold's magnitude is even where it is present.
	Power, Duty float64
	Even        bool
	// Fit is the correlation of the folded profile with its shape's
	// template (1: a clean ramp or triangle).
	Fit float64
	// Slow marks a sweep slower than a block, seen as a ramp (Swept.ramp):
	// PeriodS is 0 unless the block held two flybacks; FlybackAt are the
	// capture samples of those it held, for the event's period.
	Slow      bool
	FlybackAt []int64
}

// PulseParams describe a pulse train.
type PulseParams struct {
	WidthS       float64
	PRIS         float64
	Pulses       int
	PairSpacingS float64
	DutyCycle    float64
	// Groups are the arrival times (capture samples) of the pulses, or of
	// the first pulse of each pair, so that the event's PRI can be fitted
	// over all its blocks.
	Groups []int64
	// Channels are the carrier offsets of an emitter hopping from pulse to
	// pulse (empty for one carrier).
	Channels []float64
}

// exclude marks the bins no detector looks at: the DC bin of
// direct-conversion front ends (±DCExcludeHz/2) and the configured masks.
// They depend only on the configuration and the capture's centre, so the
// pipeline computes them once per capture.
func exclusions(ex []bool, n int, fs float64, cfg *Config, center float64, hasCenter bool) {
	f := Features{N: n, Fs: fs}
	dc := f.Bin(0)
	halfDC := int(math.Ceil(cfg.DCExcludeHz / (fs / float64(n)) / 2))
	for k := 0; k < n; k++ {
		off := f.Offset(k)
		x := k >= dc-halfDC && k <= dc+halfDC
		for _, m := range cfg.Masks {
			lo, hi := m.LowHz, m.HighHz
			if m.Absolute {
				if !hasCenter {
					continue
				}
				lo, hi = lo-center, hi-center
			}
			if off >= lo && off <= hi {
				x = true
			}
		}
		ex[k] = x
	}
}

// thresholdCache keeps thresholds that depend only on the numbers of
// frames.
type thresholdCache struct {
	bins map[[2]int]float64
}

// bin is the excess-power threshold on a bin's ratio to the floor: a mean
// of m exponential frames over a floor averaged from e frames (e = 0: a
// floor taken as exact). The ratio of two such means of the same power is
// F-distributed, F(2m, 2e) (ratio of independent χ² over their degrees of
// freedom); with an exact floor it is Gamma(m, 1/m). The threshold is the
// (1 − pfa) quantile, so a baseline learned from little data widens it
// rather than raising false alarms.
func (t *thresholdCache) bin(m int, e float64, pfa float64) float64 {
	if t.bins == nil {
		t.bins = map[[2]int]float64{}
	}
	m = max(m, 1)
	// Beyond 10⁶ frames the floor is as good as exact; round the rest so
	// that the cache stays small.
	ei := int(math.Round(e))
	if ei > 1e6 {
		ei = 0
	}
	key := [2]int{m, ei}
	if v, ok := t.bins[key]; ok {
		return v
	}
	var v float64
	if ei <= 0 {
		v = distuv.Gamma{Alpha: float64(m), Beta: float64(m)}.Quantile(1 - pfa)
	} else {
		v = distuv.F{D1: 2 * float64(m), D2: 2 * float64(ei)}.Quantile(1 - pfa)
	}
	t.bins[key] = v
	return v
}

// medianOf returns the median of v without reordering it (it allocates a
// copy; per-block code uses medianScratch).
func medianOf(v []float64) float64 {
	var s []float64
	return medianScratch(&s, v)
}

// medianScratch returns the median of v, using *scratch (grown as needed)
// for a copy, by quickselect: O(len(v)) expected and no allocation once
// the scratch is large enough.
func medianScratch(scratch *[]float64, v []float64) float64 {
	n := len(v)
	if n == 0 {
		return 0
	}
	if cap(*scratch) < n {
		*scratch = make([]float64, n)
	}
	c := (*scratch)[:n]
	copy(c, v)
	hi := selectK(c, n/2)
	if n%2 == 1 {
		return hi
	}
	// The lower middle is the largest of the elements left of n/2.
	lo := c[0]
	for _, x := range c[1 : n/2] {
		lo = max(lo, x)
	}
	return (lo + hi) / 2
}

// selectK reorders c so that c[k] is its k-th smallest element, everything
// before it no larger and everything after no smaller (Hoare's quickselect
// with a median-of-three pivot), and returns c[k].
func selectK(c []float64, k int) float64 {
	lo, hi := 0, len(c)-1
	for lo < hi {
		mid := lo + (hi-lo)/2
		if c[mid] < c[lo] {
			c[mid], c[lo] = c[lo], c[mid]
		}
		if c[hi] < c[lo] {
			c[hi], c[lo] = c[lo], c[hi]
		}
		if c[hi] < c[mid] {
			c[hi], c[mid] = c[mid], c[hi]
		}
		pivot := c[mid]
		i, j := lo, hi
		for i <= j {
			for c[i] < pivot {
				i++
			}
			for c[j] > pivot {
				j--
			}
			if i <= j {
				c[i], c[j] = c[j], c[i]
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
			return c[k]
		}
	}
	return c[k]
}

// excess is the interference power in bin k: what the bin holds above the
// noise reference.
func (in *BlockInput) excess(k int) float64 { return max(in.F.PSD[k]-in.Floor[k], 0) }

// bandPower sums the excess over bins lo..hi (inclusive, centred indices).
func (in *BlockInput) bandPower(lo, hi int) float64 {
	var s float64
	for k := max(lo, 0); k <= min(hi, in.F.N-1); k++ {
		if !in.Excluded[k] {
			s += in.excess(k)
		}
	}
	return s
}
