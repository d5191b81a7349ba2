package report

import (
	"math"

	"quietband/detect"
	"quietband/ingest"
)

// Bounds of a capture summary: whatever the capture length, an Observer
// keeps at most this much.
const (
	// MaxRows is the most time rows of the spectrogram grid.
	MaxRows = 400
	// MaxCols is the most frequency columns of the spectrogram grid.
	MaxCols = 512
	// MaxEnvelope is the most points of the power envelope.
	MaxEnvelope = 1000
	// MaxPulses is the most pulse arrival times kept (the rest are
	// counted in Summary.PulsesSeen).
	MaxPulses = 4096
)

// skMinFrames is the fewest frames for which the pipeline computes SK
// (below it the estimator reports 1 and no thresholds).
const skMinFrames = 16

// Observer is a detect.BlockObserver that builds a bounded Summary of one
// capture from the pipeline's single FFT pass: a spectrogram grid
// decimated to at most MaxRows × MaxCols, the mean PSD and noise reference,
// per-bin spectral kurtosis, the power envelope and the pulse arrival
// times. It keeps no reference to the block's slices.
//
// Use one Observer per capture (or call Begin again to start over); it is
// not safe for concurrent use.
type Observer struct {
	s    *Summary
	grid []float64 // linear power sums, Rows × Cols
	nrow []int     // frames summed into each row

	psdSum, floorSum []float64
	psdFrames        int
	floorBlocks      int

	skM             int // frames per block of the SK accumulation
	skSum           []float64
	skBlocks        int
	envSum, envPeak []float64
	envN            []int
}

// Summary is what an Observer kept of one capture. Frequencies are offsets
// from the capture centre; times are seconds from its first sample.
type Summary struct {
	SampleRate float64
	CenterHz   float64
	HasCenter  bool
	Samples    int64
	FFTSize    int // N, bins per frame

	// Grid is the spectrogram: Rows × Cols values in dBFS per bin
	// (10·log10 of the mean normalized power P_i(k) of the bins and frames
	// averaged into the cell), row-major. Row r covers frames
	// r·RowFrames … (r+1)·RowFrames−1, column c covers centred bins
	// c·ColBins … (c+1)·ColBins−1. A row no frame reached is NaN.
	Grid      []float64
	Rows      int
	Cols      int
	RowFrames int
	ColBins   int

	// PSD is the mean over all frames of P_i(k) per centred bin, and
	// Floor the mean noise reference the detectors compared it with (the
	// site baseline when HasBaseline, otherwise the flat floor from the
	// block's median bin), without any wideband rise folded in.
	PSD         []float64
	Floor       []float64
	HasBaseline bool
	Excluded    []bool // bins no detector looks at (DC, masks)

	// SKMax and SKMean are the per-bin maximum and mean of the spectral
	// kurtosis over the blocks of SKFrames frames; SKThreshold the lower
	// and upper thresholds for that block size. SKBlocks is 0 when the
	// capture has no block of at least 16 frames.
	SKMax, SKMean []float64
	SKThreshold   [2]float64
	SKFrames      int
	SKBlocks      int

	// EnvMean is the mean frame power Σ_k P_i(k) and EnvPeak the largest
	// sample power |x|² over EnvFrames consecutive frames per point, in
	// linear full-scale units.
	EnvMean, EnvPeak []float64
	EnvFrames        int

	// Pulses are the arrival times (capture samples) of the detected
	// pulses or pulse pairs, at most MaxPulses of the PulsesSeen.
	Pulses     []int64
	PulsesSeen int
	// PairsSeen counts, of PulsesSeen, the arrivals of pulse pairs (two
	// pulses each), so that the picture's count and the event's pulses
	// (which counts both of a pair) say the same.
	PairsSeen int
}

// NewObserver returns an Observer; Begin prepares it for a capture.
func NewObserver() *Observer { return &Observer{} }

// Begin implements detect.BlockObserver: it sizes the summary for capture
// c, analysed in blocks of blockLen samples with frames of fftSize.
func (o *Observer) Begin(c *ingest.Capture, blockLen, fftSize int) {
	if fftSize <= 0 {
		panic("report: Begin with a non-positive FFT size")
	}
	center, has := c.CenterHz()
	frames := int(c.Samples / int64(fftSize))
	rowFrames := max(1, (frames+MaxRows-1)/MaxRows)
	rows := max(1, (frames+rowFrames-1)/rowFrames)
	cols := min(MaxCols, fftSize)
	for fftSize%cols != 0 {
		cols--
	}
	envFrames := max(1, (frames+MaxEnvelope-1)/MaxEnvelope)
	envN := max(1, (frames+envFrames-1)/envFrames)
	o.s = &Summary{SampleRate: c.SampleRate, CenterHz: center, HasCenter: has, Samples: c.Samples,
		FFTSize: fftSize, Rows: rows, Cols: cols, RowFrames: rowFrames, ColBins: fftSize / cols,
		EnvFrames: envFrames, SKThreshold: [2]float64{math.NaN(), math.NaN()}}
	o.grid = make([]float64, rows*cols)
	o.nrow = make([]int, rows)
	o.psdSum = make([]float64, fftSize)
	o.floorSum = make([]float64, fftSize)
	o.s.Excluded = make([]bool, fftSize)
	o.psdFrames, o.floorBlocks = 0, 0
	o.skM, o.skBlocks = 0, 0
	o.skSum = make([]float64, fftSize)
	o.s.SKMax = make([]float64, fftSize)
	o.envSum = make([]float64, envN)
	o.envPeak = make([]float64, envN)
	o.envN = make([]int, envN)
}

// Block implements detect.BlockObserver: it folds one block into the
// summary.
func (o *Observer) Block(in *detect.BlockInput, findings []detect.Finding) {
	s := o.s
	if s == nil {
		panic("report: Block before Begin")
	}
	f := in.F
	n := f.N
	if n != s.FFTSize {
		panic("report: block FFT size differs from Begin's")
	}
	first := int(f.Start / int64(n))
	for i := 0; i < f.Frames; i++ {
		fi := first + i
		row := f.FramePSD[i*n : (i+1)*n]
		if r := fi / s.RowFrames; r < s.Rows {
			cells := o.grid[r*s.Cols : (r+1)*s.Cols]
			for c := range cells {
				var sum float64
				for _, v := range row[c*s.ColBins : (c+1)*s.ColBins] {
					sum += float64(v)
				}
				cells[c] += sum
			}
			o.nrow[r]++
		}
		if e := fi / s.EnvFrames; e < len(o.envSum) {
			o.envSum[e] += f.FramePower[i]
			o.envN[e]++
			var peak float64
			for _, x := range in.Samples[i*n : (i+1)*n] {
				p := float64(real(x))*float64(real(x)) + float64(imag(x))*float64(imag(x))
				peak = max(peak, p)
			}
			o.envPeak[e] = max(o.envPeak[e], peak)
		}
	}
	if f.Frames > 0 {
		for k, v := range f.PSD {
			o.psdSum[k] += v * float64(f.Frames)
		}
		o.psdFrames += f.Frames
		rise := in.Rise
		if !(rise > 0) {
			rise = 1
		}
		for k, v := range in.Floor {
			o.floorSum[k] += v / rise
		}
		o.floorBlocks++
		s.HasBaseline = in.HasBaseline
		copy(s.Excluded, in.Excluded)
	}
	if f.Frames >= skMinFrames && f.Frames >= o.skM && len(in.SK) == n {
		if f.Frames > o.skM {
			// A larger block: SK and its thresholds depend on M, so only
			// blocks of the largest size are summarised.
			o.skM, o.skBlocks = f.Frames, 0
			clear(o.skSum)
			for k := range s.SKMax {
				s.SKMax[k] = math.Inf(-1)
			}
		}
		for k, v := range in.SK {
			o.skSum[k] += v
			s.SKMax[k] = max(s.SKMax[k], v)
		}
		o.skBlocks++
		s.SKThreshold = in.SKThreshold
	}
	for _, fd := range findings {
		if fd.Pulse == nil {
			continue
		}
		for _, g := range fd.Pulse.Groups {
			s.PulsesSeen++
			if fd.Pulse.PairSpacingS > 0 {
				s.PairsSeen++
			}
			if len(s.Pulses) < MaxPulses {
				s.Pulses = append(s.Pulses, g)
			}
		}
	}
}

// Summary finishes and returns the capture's summary (nil before Begin).
// The Observer must be given a new Begin before further blocks.
func (o *Observer) Summary() *Summary {
	s := o.s
	if s == nil {
		return nil
	}
	o.s = nil
	s.Grid = o.grid
	for r := 0; r < s.Rows; r++ {
		cells := s.Grid[r*s.Cols : (r+1)*s.Cols]
		den := float64(o.nrow[r] * s.ColBins)
		for c, v := range cells {
			if o.nrow[r] == 0 {
				cells[c] = math.NaN()
			} else {
				cells[c] = dB(v / den)
			}
		}
	}
	s.PSD, s.Floor = o.psdSum, o.floorSum
	for k := range s.PSD {
		if o.psdFrames > 0 {
			s.PSD[k] /= float64(o.psdFrames)
		}
		if o.floorBlocks > 0 {
			s.Floor[k] /= float64(o.floorBlocks)
		}
	}
	s.SKFrames, s.SKBlocks = o.skM, o.skBlocks
	if o.skBlocks > 0 {
		s.SKMean = o.skSum
		for k := range s.SKMean {
			s.SKMean[k] /= float64(o.skBlocks)
		}
	} else {
		s.SKMax = nil
	}
	s.EnvMean, s.EnvPeak = o.envSum, o.envPeak
	for e := range s.EnvMean {
		if o.envN[e] > 0 {
			s.EnvMean[e] /= float64(o.envN[e])
		} else {
			s.EnvMean[e], s.EnvPeak[e] = math.NaN(), math.NaN()
		}
	}
	o.grid, o.nrow, o.psdSum, o.floorSum, o.skSum = nil, nil, nil, nil, nil
	o.envSum, o.envPeak, o.envN = nil, nil, nil
	return s
}

// Offset is the frequency offset of centred bin k: (k − N/2)·fs/N, the
// engine's centred bin order (detect.Features.Offset).
func (s *Summary) Offset(k int) float64 {
	return float64(k-s.FFTSize/2) * s.SampleRate / float64(s.FFTSize)
}

// BinHz is the bin spacing fs/N.
func (s *Summary) BinHz() float64 { return s.SampleRate / float64(s.FFTSize) }

// FrameSeconds is the duration of one frame, N/fs.
func (s *Summary) FrameSeconds() float64 { return float64(s.FFTSize) / s.SampleRate }

// ColumnHz returns the band covered by spectrogram column c: from the
// lower edge of its first bin to the upper edge of its last.
func (s *Summary) ColumnHz(c int) (lo, hi float64) {
	df := s.BinHz()
	return s.Offset(c*s.ColBins) - df/2, s.Offset((c+1)*s.ColBins-1) + df/2
}

// RowSeconds returns the time span of spectrogram row r.
func (s *Summary) RowSeconds(r int) (t0, t1 float64) {
	d := float64(s.RowFrames) * s.FrameSeconds()
	return float64(r) * d, float64(r+1) * d
}

func dB(x float64) float64 {
	if !(x > 0) {
		return math.Inf(-1)
	}
	return 10 * math.Log10(x)
}
