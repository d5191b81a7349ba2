package detect

import (
	"math"
	"sort"

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

	// Floor is the per-bin noise reference: the learned baseline PSD, or
	// (before there is one) a flat floor from the block's median bin.
	Floor []float64
	// NoisePower is Σ Floor: the noise power in the capture bandwidth.
	NoisePower  float64
	HasBaseline bool
	// Rise is the linear wideband floor rise folded into Floor (1 when
	// none); NoisePower/Rise is the thermal noise power.
	Rise float64
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
}

// SweepParams describe a swept tone.
type SweepParams struct {
	PeriodS  float64
	LowHz    float64
	HighHz   float64
	RateHzS  float64
	Shape    string
	Coherent float64 // folded coherence, 0..1
}

// PulseParams describe a pulse train.
type PulseParams struct {
	WidthS       float64
	PRIS         float64
	Pulses       int
	PairSpacingS float64
	DutyCycle    float64
	FirstS       float64 // first pulse start, seconds into the block
	// Groups are the arrival times (capture samples) of the pulses, or of
	// the first pulse of each pair, so that the event's PRI can be fitted
	// over all its blocks.
	Groups []int64
}

// prepare fills the references shared by all detectors. floor is the
// baseline PSD (nil when there is none).
func (in *BlockInput) prepare(floor []float64, cfg *Config, center float64, hasCenter bool, thr *thresholdCache) {
	f := in.F
	n := f.N
	in.Cfg = cfg
	if len(in.Ratio) != n {
		in.Ratio = make([]float64, n)
		in.Excluded = make([]bool, n)
		in.Floor = make([]float64, n)
	}
	in.HasBaseline = floor != nil
	if floor != nil {
		copy(in.Floor, floor)
	} else {
		// A flat floor from the median bin: the median of Gamma(M,1/M) is
		// about 1 − 1/(3M) of its mean (Wilson–Hilferty).
		med := medianOf(f.PSD) / (1 - 1/(3*float64(max(f.Frames, 1))))
		for k := range in.Floor {
			in.Floor[k] = med
		}
	}
	in.NoisePower, in.Rise = 0, 1
	for k := range in.Floor {
		in.NoisePower += in.Floor[k]
	}
	dc := f.Bin(0)
	halfDC := int(math.Ceil(cfg.DCExcludeHz / (f.Fs / float64(n)) / 2))
	for k := 0; k < n; k++ {
		off := f.Offset(k)
		ex := k >= dc-halfDC && k <= dc+halfDC
		for _, m := range cfg.Masks {
			lo, hi := m.LowHz, m.HighHz
			if m.Absolute {
				if !hasCenter {
					continue
				}
				lo, hi = lo-center, hi-center
			}
			if off >= lo && off <= hi {
				ex = true
			}
		}
		in.Excluded[k] = ex
		if in.Floor[k] > 0 {
			in.Ratio[k] = f.PSD[k] / in.Floor[k]
		} else {
			in.Ratio[k] = 1
		}
	}
	in.BinThreshold = thr.bin(f.Frames, cfg.BinPfa)
}

// thresholdCache keeps thresholds that depend only on the number of frames.
type thresholdCache struct {
	bins map[int]float64
}

func (t *thresholdCache) bin(m int, pfa float64) float64 {
	if t.bins == nil {
		t.bins = map[int]float64{}
	}
	if v, ok := t.bins[m]; ok {
		return v
	}
	g := distuv.Gamma{Alpha: float64(max(m, 1)), Beta: float64(max(m, 1))}
	v := g.Quantile(1 - pfa)
	t.bins[m] = v
	return v
}

// medianOf returns the median of v without reordering it.
func medianOf(v []float64) float64 {
	if len(v) == 0 {
		return 0
	}
	c := append([]float64(nil), v...)
	sort.Float64s(c)
	if len(c)%2 == 1 {
		return c[len(c)/2]
	}
	return (c[len(c)/2-1] + c[len(c)/2]) / 2
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

// raiseFloor scales the noise reference by a wideband floor rise (dB) and
// recomputes the ratios, so that narrow detectors see only what stands
// above the raised floor.
func (in *BlockInput) raiseFloor(db float64) {
	g := math.Pow(10, db/10)
	in.Rise = g
	in.NoisePower *= g
	for k := range in.Floor {
		in.Floor[k] *= g
		if in.Floor[k] > 0 {
			in.Ratio[k] = in.F.PSD[k] / in.Floor[k]
		}
	}
}
