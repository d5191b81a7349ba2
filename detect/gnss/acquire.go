package gnss

import (
	"errors"
	"fmt"
	"math"
	"math/cmplx"
	"slices"

	"gonum.org/v1/gonum/mathext"

	"quietband/ingest/gpsca"
)

// Defaults of AcqConfig.
const (
	// DefaultDopplerMaxHz is the default one-sided geometric Doppler
	// range: the ±4.9 kHz of a static user plus a little (REFERENCES §4).
	DefaultDopplerMaxHz = 5000
	// DefaultClockMaxHz is the default one-sided receiver clock offset
	// searched on top of the geometric range while the site's offset is
	// unknown: 10 kHz, about 6 ppm at L1 (a 2 ppm TCXO gives 3.2 kHz, a
	// recorder without one several times that; REFERENCES §12.5).
	DefaultClockMaxHz = 10000
	// DefaultCoherentMs is the default coherent integration time in code
	// periods (milliseconds).
	DefaultCoherentMs = 1
	// DefaultNonCoherent is the default number of coherent blocks summed
	// non-coherently.
	DefaultNonCoherent = 10
	// DefaultPfa is the default overall false-alarm probability of one PRN
	// search (all Doppler bins and code cells of one PRN together).
	DefaultPfa = 1e-3
)

// gridPerMs is the number of integrate-and-dump cells per millisecond (per
// code period) onto which a snapshot is binned: 4096 cells, about 4 per
// chip, so that every sample rate maps onto power-of-two FFTs.
const gridPerMs = 4096

// lagsPerMs is the number of code-lag cells per millisecond searched:
// 2048, about two per chip (half-chip cells). The lags are the even cells
// of the 4096-cell grid after the correlation spectrum has been cut to its
// central half, |f| < 1.024 MHz, the C/A main lobe (see Acquire).
const lagsPerMs = gridPerMs / 2

// ErrL1NotInBand reports that GPS L1 does not lie inside the usable band of a
// capture. Errors returned for that reason wrap it and start with "skipped:".
var ErrL1NotInBand = errors.New("capture does not contain GPS L1")

// l1Guard is the half-width in hertz of the C/A main lobe plus a margin: L1
// must lie at least this far inside the Nyquist band (fs/2) of the capture.
const l1Guard = 1.1e6

// minSampleRate is the lowest usable complex sample rate: the C/A main lobe
// null-to-null width, 2 · 1.023 MHz.
const minSampleRate = 2 * gpsca.ChipRate

// checkBand returns the offset L1 − centerHz, or an error wrapping
// ErrL1NotInBand if L1 lies outside ±(fs/2 − 1.1 MHz) of the centre.
func checkBand(fs, centerHz float64) (float64, error) {
	if !(fs >= minSampleRate) || math.IsInf(fs, 0) {
		return 0, fmt.Errorf("gnss: sample rate %g S/s is below the %g S/s needed for the C/A main lobe", fs, minSampleRate)
	}
	if math.IsNaN(centerHz) || math.IsInf(centerHz, 0) {
		return 0, fmt.Errorf("gnss: invalid capture centre %v Hz", centerHz)
	}
	off := gpsca.L1 - centerHz
	if lim := fs/2 - l1Guard; math.Abs(off) > lim {
		return 0, fmt.Errorf("skipped: capture centre %.6f MHz does not contain GPS L1 (offset %+.3f MHz, usable ±%.3f MHz at %.3f MS/s): %w",
			centerHz/1e6, off/1e6, max(lim, 0)/1e6, fs/1e6, ErrL1NotInBand)
	}
	return off, nil
}

// AcqConfig configures an Acquirer. Zero fields take their defaults.
type AcqConfig struct {
	// PRNs lists the satellites searched (default 1–32).
	PRNs []int
	// DopplerMaxHz is the one-sided geometric Doppler range (default
	// 5000 Hz).
	DopplerMaxHz float64
	// ClockMaxHz is the one-sided receiver clock offset range added to
	// DopplerMaxHz (default 10 000 Hz; negative: none). Acquire searches
	// ±(DopplerMaxHz + ClockMaxHz); AcquireAround searches a narrower
	// window of the same grid once the site's clock offset is known.
	ClockMaxHz float64
	// DopplerStepHz is the Doppler bin spacing. The default is 1/(2T) for a
	// coherent time T, 500 Hz at T = 1 ms: inside the 2/(3T) bin width of
	// Kaplan & Hegarty 2006 (from memory), with a worst-case loss of
	// sinc²(π·250 Hz·1 ms) = −0.91 dB (REFERENCES §4).
	DopplerStepHz float64
	// CoherentMs is the coherent integration time T in milliseconds
	// (default 1).
	CoherentMs int
	// NonCoherent is the number K of coherent blocks summed in power
	// (default 10, so a 10 ms snapshot at T = 1 ms).
	NonCoherent int
	// Pfa is the overall false-alarm probability of one PRN search
	// (default 1e-3); the per-cell probability is Pfa/N_cells.
	Pfa float64
}

// withDefaults returns c with zero fields set to their defaults, or an error
// for invalid values.
func (c AcqConfig) withDefaults() (AcqConfig, error) {
	if c.PRNs == nil {
		c.PRNs = make([]int, 32)
		for i := range c.PRNs {
			c.PRNs[i] = i + 1
		}
	} else {
		c.PRNs = slices.Clone(c.PRNs)
	}
	if len(c.PRNs) == 0 {
		return c, errors.New("gnss: AcqConfig.PRNs is empty")
	}
	seen := map[int]bool{}
	for _, p := range c.PRNs {
		if _, _, ok := gpsca.Taps(p); !ok {
			return c, fmt.Errorf("gnss: AcqConfig.PRNs: PRN %d has no C/A code", p)
		}
		if seen[p] {
			return c, fmt.Errorf("gnss: AcqConfig.PRNs: PRN %d listed twice", p)
		}
		seen[p] = true
	}
	if c.CoherentMs == 0 {
		c.CoherentMs = DefaultCoherentMs
	}
	if c.CoherentMs < 1 || c.CoherentMs > 20 {
		return c, fmt.Errorf("gnss: AcqConfig.CoherentMs %d outside 1..20", c.CoherentMs)
	}
	if c.NonCoherent == 0 {
		c.NonCoherent = DefaultNonCoherent
	}
	if c.NonCoherent < 1 {
		return c, fmt.Errorf("gnss: AcqConfig.NonCoherent %d < 1", c.NonCoherent)
	}
	if c.DopplerMaxHz == 0 {
		c.DopplerMaxHz = DefaultDopplerMaxHz
	}
	if !(c.DopplerMaxHz > 0) || c.DopplerMaxHz > 50e3 {
		return c, fmt.Errorf("gnss: AcqConfig.DopplerMaxHz %g outside (0, 50000]", c.DopplerMaxHz)
	}
	switch {
	case c.ClockMaxHz == 0:
		c.ClockMaxHz = DefaultClockMaxHz
	case c.ClockMaxHz < 0:
		c.ClockMaxHz = 0
	case math.IsNaN(c.ClockMaxHz):
		return c, fmt.Errorf("gnss: AcqConfig.ClockMaxHz is NaN")
	}
	if c.DopplerMaxHz+c.ClockMaxHz > 50e3 {
		return c, fmt.Errorf("gnss: AcqConfig.DopplerMaxHz + ClockMaxHz = %g Hz exceeds 50000", c.DopplerMaxHz+c.ClockMaxHz)
	}
	T := float64(c.CoherentMs) * 1e-3
	if c.DopplerStepHz == 0 {
		c.DopplerStepHz = 1 / (2 * T)
	}
	if !(c.DopplerStepHz > 0) || c.DopplerStepHz > 2/(3*T) {
		return c, fmt.Errorf("gnss: AcqConfig.DopplerStepHz %g outside (0, 2/(3T) = %g]", c.DopplerStepHz, 2/(3*T))
	}
	if c.Pfa == 0 {
		c.Pfa = DefaultPfa
	}
	if !(c.Pfa > 0 && c.Pfa < 1) {
		return c, fmt.Errorf("gnss: AcqConfig.Pfa %g outside (0, 1)", c.Pfa)
	}
	return c, nil
}

// Acquired is one satellite found by Acquirer.Acquire.
type Acquired struct {
	// PRN is the satellite's C/A code number.
	PRN int
	// DopplerHz is the carrier frequency minus L1 (so the Doppler shift plus
	// any receiver oscillator error), refined below the bin spacing.
	DopplerHz float64
	// CodePhaseChips is the code phase in chips, in [0, 1023), at the first
	// sample of the snapshot: the received chip there is chip
	// ⌊CodePhaseChips⌋ (0-based) of the PRN's code.
	CodePhaseChips float64
	// PeakMetric is the largest cell of the search grid divided by the
	// estimated noise power per coherent block; under H0 each cell is
	// Gamma(K, 1) distributed.
	PeakMetric float64
	// Threshold is the detection threshold γ the metric was compared with.
	Threshold float64
}

// prnState is the per-PRN part of an Acquirer.
type prnState struct {
	prn  int
	code [gpsca.CodeLength]int8
	// replica holds conj(FFT(binned code replica)) at the nLag central
	// frequency bins j = −nLag/2 … nLag/2 − 1, in that (centred) order.
	replica []complex64

	// Per-search results: the largest normalized cell S/σ̂²_row.
	best     float64
	bestDop  int
	bestCell int        // in quarter-chip cells, 0…4095 (see refineRow)
	bestNbr  [3]float64 // S/σ̂² at bestCell−1, bestCell, bestCell+1 in the best row
	// candidate[d]: screened row d passed the screen and is computed exactly.
	candidate []bool

	// For the second-peak search (peaks.go): the rows whose maximum
	// passed γ (keepHot), and the block correlations around the best
	// cell (prof, K·profLen, centred on lag cell profC of row profDop,
	// whose noise is profSig).
	hot     []hotRow
	prof    []complex64
	profDop int
	profC   int
	profSig float64
}

// Acquirer searches snapshots for GPS L1 C/A signals by parallel code-phase
// search. It is built once per (configuration, sample rate, centre) and
// reused; Acquire does not allocate apart from its result. An Acquirer is
// not safe for concurrent use.
type Acquirer struct {
	cfg      AcqConfig
	fs       float64
	offsetHz float64 // L1 − centre

	nBlock  int     // coherent blocks K
	coh     int     // code periods per coherent block
	nGrid   int     // grid cells per coherent block: coh · gridPerMs
	nLag    int     // correlation length per coherent block: coh · lagsPerMs
	fa      float64 // cell rate, gridPerMs · 1 kHz
	dops    []float64
	gamma   float64
	pfaCell float64

	// Doppler bin d is f_D = bases[dopBase[d]] + dopShift[d]·binHz: a base
	// frequency wiped off in the time domain plus a whole number of FFT
	// bins (binHz = 1/T) applied as a shift of the block spectra.
	bases    []float64
	dopBase  []int
	dopShift []int
	pad      int // largest |dopShift|

	// Screening of the half-bin rows (see Acquire): anchors are the rows of
	// base 0 in ascending order; halfAfter[i] is the half-bin row between
	// anchors[i−1] and anchors[i] (−1 if there is none), screened[d] marks
	// such rows, gammaScreen is the screen threshold.
	base0       int
	anchors     []int
	halfAfter   []int
	screened    []bool
	gammaScreen float64
	// Per search (see AcquireAround): window[d] marks the Doppler rows of
	// the window asked for, active[d] those searched for the current batch
	// of PRNs, screenNow[d] the half-bin rows screened in it. batch is the
	// number of PRNs per batch of Acquire (acqBatch; tests set len(prns):
	// one batch).
	window, active, screenNow []bool
	batch                     int
	kept                      []Acquired  // scratch of the final check
	zPrev, zCur               []complex64 // z_k of two adjacent anchor rows, nBlock·nLag each

	plan       transformer // forward, nGrid points
	lagPlan    transformer // inverse, nLag points
	prns       []prnState
	grid       []complex64   // binned, L1-centred snapshot, nBlock·nGrid
	block      []complex64   // one wiped block, nGrid
	spectra    []complex64   // centred block spectra of one base, nBlock·specLen
	specLen    int           // nLag + 2·pad
	specBase   int           // base index held in spectra, −1 if none
	specs      [][]complex64 // the spectra of each base, computed once per grid
	specOK     []bool        // specs[b] holds base b of the current grid
	work       []complex64
	prod       []complex64 // Y·R* product, input of the inverse FFT
	zRow       []complex64 // z_k of the row being searched, nBlock·nLag
	row, row2  []float64
	modelChips []int8 // code samples of a detection model, nSamples
	prompts    []complex128
	nSamples   int // input samples consumed: ⌈nBlock·nGrid·fs/fa⌉

	// rowHook, if set (by tests), sees every accumulated Doppler row S(f_D, ·):
	// screened rows are then all computed exactly, for the hook only.
	rowHook func(prn, dop int, row []float64)
	// exhaustive (tests only) computes and uses every row exactly.
	exhaustive bool
	// keepCrossCorr (tests only) disables rejectCrossCorrelation.
	keepCrossCorr bool

	// Second peaks of the last search (see Correlations); gammaNear is
	// the threshold of an early path (nearPath).
	corr      []Correlation
	gammaNear float64
	shape     corrTable // the correlation shape, built on first use (corrShape)
}

// NewAcquirer returns an Acquirer for complex-baseband snapshots sampled at
// fs samples per second and centred at centerHz. It returns an error
// wrapping ErrL1NotInBand (text "skipped: …") if L1 lies outside
// ±(fs/2 − 1.1 MHz) of the centre, and an error for invalid configuration.
//
// Building precomputes, for every PRN, the conjugated FFT of the code
// replica on the acquisition grid (Borre et al. 2007, ch. 6), kept at the
// central half of the bins, so that each search costs one forward FFT per
// block and base frequency (two for the default 500 Hz grid) plus one
// half-length inverse FFT per PRN, Doppler bin and block.
func NewAcquirer(cfg AcqConfig, fs, centerHz float64) (*Acquirer, error) {
	off, err := checkBand(fs, centerHz)
	if err != nil {
		return nil, err
	}
	cfg, err = cfg.withDefaults()
	if err != nil {
		return nil, err
	}
	a := &Acquirer{
		cfg:      cfg,
		fs:       fs,
		offsetHz: off,
		nBlock:   cfg.NonCoherent,
		coh:      cfg.CoherentMs,
		nGrid:    cfg.CoherentMs * gridPerMs,
		nLag:     cfg.CoherentMs * lagsPerMs,
		fa:       gridPerMs * 1e3,
		specBase: -1,
	}
	half := int(math.Ceil((cfg.DopplerMaxHz+cfg.ClockMaxHz)/cfg.DopplerStepHz - 1e-9))
	for i := -half; i <= half; i++ {
		a.dops = append(a.dops, float64(i)*cfg.DopplerStepHz)
	}
	// Split every Doppler bin into a base frequency in [−binHz/2, binHz/2)
	// and a whole number of spectrum bins: the wipe e^{−j2π·s·binHz·t} of a
	// block of length T = 1/binHz is the circular shift Y[m] → Y[m + s] of
	// its DFT (times a constant phase), so the bins sharing a base share the
	// forward FFTs.
	binHz := 1e3 / float64(cfg.CoherentMs)
	for _, fd := range a.dops {
		s := int(math.Floor(fd/binHz + 0.5))
		b := fd - float64(s)*binHz
		bi := slices.IndexFunc(a.bases, func(v float64) bool { return math.Abs(v-b) < 1e-6 })
		if bi < 0 {
			bi = len(a.bases)
			a.bases = append(a.bases, b)
		}
		a.dopBase = append(a.dopBase, bi)
		a.dopShift = append(a.dopShift, s)
		a.pad = max(a.pad, s, -s)
	}
	// Cells: Doppler bins × the quarter-chip lags of one code period, the
	// 2048 lag cells and the 2048 between them, of which refineRow looks at
	// the two next to each row's maximum, the likeliest to exceed γ.
	nCells := float64(len(a.dops) * gridPerMs)
	a.pfaCell = cfg.Pfa / nCells
	a.gamma = DetectionThreshold(a.nBlock, a.pfaCell)
	a.gammaScreen = float64(a.nBlock) + screenFraction*(a.gamma-float64(a.nBlock))
	a.gammaNear = DetectionThreshold(a.nBlock, cfg.Pfa/nearCells)

	// Anchor rows (base 0, whole bins) and the half-bin rows between
	// adjacent ones.
	a.base0 = slices.IndexFunc(a.bases, func(v float64) bool { return v == 0 })
	a.screened = make([]bool, len(a.dops))
	a.active = make([]bool, len(a.dops))
	a.window = make([]bool, len(a.dops))
	a.batch = acqBatch
	a.screenNow = make([]bool, len(a.dops))
	for d := range a.dops {
		if a.dopBase[d] == a.base0 {
			a.anchors = append(a.anchors, d)
		}
	}
	a.halfAfter = make([]int, len(a.anchors))
	for i, d := range a.anchors {
		a.halfAfter[i] = -1
		if i == 0 || a.dopShift[d] != a.dopShift[a.anchors[i-1]]+1 {
			continue
		}
		mid := a.dops[d] - binHz/2
		h := slices.IndexFunc(a.dops, func(v float64) bool { return math.Abs(v-mid) < 1e-6 })
		if h >= 0 {
			a.halfAfter[i] = h
			a.screened[h] = true
		}
	}

	a.plan = newTransformer(a.nGrid)
	a.lagPlan = newTransformer(a.nLag)
	a.nSamples = int(math.Ceil(float64(a.nBlock*a.nGrid) * fs / a.fa))
	a.specLen = a.nLag + 2*a.pad
	a.grid = make([]complex64, a.nBlock*a.nGrid)
	a.block = make([]complex64, a.nGrid)
	a.specs = make([][]complex64, len(a.bases))
	for b := range a.specs {
		a.specs[b] = make([]complex64, a.nBlock*a.specLen)
	}
	a.specOK = make([]bool, len(a.bases))
	a.spectra = a.specs[0]
	a.work = make([]complex64, a.nLag)
	a.prod = make([]complex64, a.nLag)
	a.zRow = make([]complex64, a.nBlock*a.nLag)
	a.zPrev = make([]complex64, a.nBlock*a.nLag)
	a.zCur = make([]complex64, a.nBlock*a.nLag)
	a.row = make([]float64, lagsPerMs)
	a.row2 = make([]float64, lagsPerMs)
	a.modelChips = make([]int8, a.nSamples)
	a.prompts = make([]complex128, a.nBlock*a.coh)

	// Code replica binned exactly like the data: the cell value is the mean
	// of the code over the input samples falling into the cell (0 for an
	// empty cell), which keeps the binned correlation equal to the
	// full-rate one wherever a cell lies inside one chip.
	nIn := int(math.Ceil(float64(a.nGrid) * fs / a.fa))
	chips := make([]int8, nIn)
	count := make([]float32, a.nGrid)
	rep := make([]complex64, a.nGrid)
	a.prns = make([]prnState, len(cfg.PRNs))
	for i, prn := range cfg.PRNs {
		p := &a.prns[i]
		p.prn = prn
		p.code, _ = gpsca.Code(prn) // validated in withDefaults
		p.candidate = make([]bool, len(a.dops))
		p.hot = make([]hotRow, 0, len(a.dops))
		p.prof = make([]complex64, a.nBlock*profLen)
		gpsca.Sample(chips, &p.code, fs, gpsca.ChipRate, 0)
		clear(rep)
		clear(count)
		for n, c := range chips {
			g := a.cellOf(n)
			if g >= a.nGrid {
				break
			}
			rep[g] += complex(float32(c), 0)
			count[g]++
		}
		for g := range rep {
			if count[g] > 0 {
				rep[g] /= complex(count[g], 0)
			}
		}
		a.plan.Forward(rep, rep)
		p.replica = make([]complex64, a.nLag)
		for i := range p.replica {
			v := rep[(i-a.nLag/2+a.nGrid)%a.nGrid]
			p.replica[i] = complex(real(v), -imag(v))
		}
	}
	return a, nil
}

// cellOf returns the grid cell of input sample n: ⌊n·fa/fs⌋.
func (a *Acquirer) cellOf(n int) int { return int(float64(n) * a.fa / a.fs) }

// SnapshotLen returns the number of samples Acquire needs:
// K·T·fs rounded up.
func (a *Acquirer) SnapshotLen() int { return a.nSamples }

// Threshold returns the detection threshold γ on the normalized metric,
// PeakMetric > γ (see DetectionThreshold).
func (a *Acquirer) Threshold() float64 { return a.gamma }

// DopplerBins returns the Doppler bin centres searched, in hertz (a copy).
func (a *Acquirer) DopplerBins() []float64 { return slices.Clone(a.dops) }

// DetectionThreshold returns the threshold γ on a sum S of k independent
// unit-mean exponential cell powers (S ~ Gamma(k, 1) under H0, square-law
// detection of complex Gaussian noise) for a per-cell false-alarm
// probability pfaCell:
//
//	P_fa = Q(k, γ) = e^{−γ} Σ_{i=0}^{k−1} γ^i / i!
//
// where Q is the regularized upper incomplete gamma function, inverted with
// gonum's mathext.GammaIncRegCompInv. For k = 1 this is γ = ln(1/P_fa)
// (REFERENCES §4, standard square-law detection theory). It panics if k < 1
// or pfaCell is not in (0, 1).
func DetectionThreshold(k int, pfaCell float64) float64 {
	if k < 1 || !(pfaCell > 0 && pfaCell < 1) {
		panic(fmt.Sprintf("gnss: DetectionThreshold(%d, %g): invalid arguments", k, pfaCell))
	}
	return mathext.GammaIncRegCompInv(float64(k), pfaCell)
}

// Acquire searches the first SnapshotLen samples of x for every configured
// PRN and returns the detected satellites in ascending PRN order, appended
// to dst[:0] (if dst is nil a new slice is allocated). It returns an error
// if x is shorter than SnapshotLen.
//
// Method (Borre et al. 2007, ch. 6, parallel code-phase search):
//
//  1. The snapshot is mixed by e^{−j2π(L1−fc)t} and integrated-and-dumped
//     onto a grid of 4096 cells per millisecond (cell c holds the sum of the
//     input samples n with ⌊n·4.096 MHz/fs⌋ = c), which handles any fs,
//     including rates that are not multiples of 1.023 MHz, with power-of-two
//     FFTs; at fs ≤ 4.096 MS/s no sample is combined with another.
//  2. Each coherent block y_k is wiped by e^{−j2πbt} for the few base
//     frequencies b of the Doppler grid (0 and −500 Hz by default) and
//     transformed once, Y_k = FFT(y_k). Doppler bin f_D = b + s/T is the
//     spectrum shifted by s bins, Y_k[m + s] (a wipe by a whole number of
//     cycles per block is a circular shift of its DFT), shared by all PRNs.
//  3. The product with the PRN's conj(FFT(r)) is kept at the central half
//     of the bins, |f| < 1.024 MHz (the C/A main lobe, 90 % of its power:
//     the band-limited matched filter), and transformed back by a
//     half-length IFFT: z_k(τ) = Σ_{|m|<N/4} Y_k[m+s]·R*[m]·e^{j2πmτ/(N/2)}
//     is the circular correlation, low-pass filtered, at the even lags of
//     the grid: 2048 lag cells per millisecond, half-chip cells
//     (REFERENCES §4 counts its cells the same way, 2046 per millisecond).
//     The cut halves the inverse transforms, which dominate the cost. The
//     two quarter-chip lags next to each row's maximum are interpolated
//     from the lag cells (refineRow), so that a peak between two cells
//     loses no more than on a 4096-lag grid: the mean code-phase and filter
//     loss is −0.89 dB at 4 MS/s and −0.64 dB at 10 MS/s, against −1.10 and
//     −0.60 dB for a full-band 4096-lag search and −1.11 and −0.88 dB for
//     the lag cells alone (computed by evaluating the correlators of a
//     noise-free code at 64 code offsets).
//  4. S(f_D, τ) = Σ_k |z_k(τ)|² over K blocks (non-coherent sum), with the
//     lag of block k shifted by the code Doppler f_D/1540 chips/s. The rows
//     at whole bins, f_D = s/T (the anchors), are computed for every PRN. A
//     half-bin row, f_D = (s + ½)/T, is first interpolated from its two
//     anchors, Σ_k |z_{k,s}(τ) − z_{k,s+1}(τ)|² (see searchAnchors), and
//     computed exactly only if the interpolation's normalized maximum
//     exceeds γ_s = K + 0.6·(γ − K): the interpolation keeps at least 81 %
//     of the exact row's SNR, so a signal that would cross γ in that row
//     crosses γ_s there with a wide margin, while a noise-only row passes
//     with probability 1 − (1 − Q(K, γ_s))^2048 ≈ 0.1. That saves about
//     40 % of the inverse transforms; only exact rows enter the decision.
//     Against the exhaustive search on the same captures (computed, 100
//     captures of six satellites at 4 MS/s per level) the screened search
//     found the same satellites at 38 and 40 dB-Hz and missed 1 of 161 at
//     35 dB-Hz and 2 of 443 at 36.5 dB-Hz, near the detection threshold.
//  5. The noise power σ̂² per block and cell is estimated for each Doppler
//     row as the mean of S/K over the row without the lags within ±1.5
//     chips of the row's maximum (per row, because a narrowband interferer
//     leaks into the correlation through the code's 1 kHz line spectrum,
//     REFERENCES §1.3, with a power that depends on its offset from each
//     Doppler bin). Under H0, S/σ̂² ≈ Gamma(K, 1); the PRN is
//     detected if max S/σ̂² > γ, γ = DetectionThreshold(K, Pfa/N_cells)
//     with N_cells = Doppler bins × 4096 quarter-chip cells (REFERENCES §4:
//     overall P_FA ≈ N_cells · P_fa, a union bound, conservative for
//     correlated cells and for the cells not evaluated). Detections
//     explained by a stronger satellite's cross-correlation are removed
//     (see rejectCrossCorrelation).
//  6. Refinement: the code phase by parabolic interpolation of S over the
//     peak cell and its two neighbours; the Doppler from the mean phase
//     rotation between consecutive 1 ms prompts at the peak,
//     Δf = arg Σ P_{m+1}·conj(P_m) / (2π·1 ms), which is unambiguous for
//     |Δf| < 500 Hz (half the bin spacing is 250 Hz); a data-bit
//     transition flips one product of the K·T − 1 and is outvoted.
//  7. Batches, while the receiver clock is unknown (the ±(DopplerMaxHz +
//     ClockMaxHz) search): the PRNs are searched eight at a time
//     (acqBatch); once some are detected, the next batches search only
//     the Dopplers a common receiver clock and geometric Dopplers within
//     ±DopplerMaxHz allow (boundWindow), and the search is done again
//     without cutting if the final detections call for rows a batch
//     skipped (covered). That is about a third less work
//     (BenchmarkAcquire32PRN_10ms wide: 46 → 30 ms at 10 MS/s, measured),
//     with the same detections (TestAcquireBatches). AcquireAround, the
//     narrow search, searches its whole window for every PRN, so that a
//     copy of a signal at another Doppler (a spoofer's) is still seen.
func (a *Acquirer) Acquire(dst []Acquired, x []complex64) ([]Acquired, error) {
	batch := len(a.prns)
	if a.cfg.ClockMaxHz > 0 {
		batch = a.batch
	}
	return a.search(dst, x, 0, math.Inf(1), batch)
}

// AcquireAround is Acquire restricted to the Doppler bins within
// centerHz ± halfWidthHz of the grid (at least the bin nearest centerHz):
// the narrow search once the site's clock offset is known. The threshold
// γ stays the one of the whole grid (DetectionThreshold with N_cells of
// every bin), so a satellite inside the window gets the same decision as
// in the full search and the records do not depend on which search ran.
func (a *Acquirer) AcquireAround(dst []Acquired, x []complex64, centerHz, halfWidthHz float64) ([]Acquired, error) {
	return a.search(dst, x, centerHz, halfWidthHz, len(a.prns))
}

// search is AcquireAround with the PRNs searched batch at a time (see
// Acquire, step 7).
func (a *Acquirer) search(dst []Acquired, x []complex64, centerHz, halfWidthHz float64, batch int) ([]Acquired, error) {
	dst = dst[:0]
	if len(x) < a.nSamples {
		return dst, fmt.Errorf("gnss: snapshot has %d samples, acquisition needs %d (%d ms at %g S/s)",
			len(x), a.nSamples, a.nBlock*a.coh, a.fs)
	}
	if math.IsNaN(centerHz) || math.IsNaN(halfWidthHz) {
		return dst, fmt.Errorf("gnss: invalid Doppler window %v ± %v Hz", centerHz, halfWidthHz)
	}
	near, any := 0, false
	for d, f := range a.dops {
		a.window[d] = math.Abs(f-centerHz) <= halfWidthHz
		any = any || a.window[d]
		if math.Abs(f-centerHz) < math.Abs(a.dops[near]-centerHz) {
			near = d
		}
	}
	if !any {
		a.window[near] = true
	}
	a.bin(x)
	for i := range a.prns {
		p := &a.prns[i]
		p.best = -1
		clear(p.candidate)
		p.hot = p.hot[:0]
	}
	// The PRNs in batches; after each, the window of the next is cut to
	// the Dopplers the detections so far allow (see boundWindow).
	if batch <= 0 {
		batch = len(a.prns)
	}
	copy(a.active, a.window)
	narrowed := false
	for b0 := 0; b0 < len(a.prns); b0 += batch {
		ps := a.prns[b0:min(b0+batch, len(a.prns))]
		a.searchPRNs(ps)
		n := len(dst)
		for i := range ps {
			if r, ok := a.decide(&ps[i], x); ok {
				dst = append(dst, r)
			}
		}
		if len(dst) > n && b0+batch < len(a.prns) {
			narrowed = a.boundWindow(dst) || narrowed
		}
	}
	if narrowed {
		// The batches searched after a cut must have covered every
		// Doppler the final detections allow; if not (a detection found
		// later contradicts an earlier cut: a cross-correlation peak, a
		// Doppler beyond DopplerMaxHz), search again without cutting, so
		// that the result is the one of the whole window.
		kept := append(a.kept[:0], dst...)
		if !a.keepCrossCorr && len(kept) > 1 {
			kept = a.rejectCrossCorrelation(kept)
			a.bin(x) // the tests overwrote the data grid
		}
		a.kept = kept
		if !a.covered(kept) {
			return a.search(dst, x, centerHz, halfWidthHz, len(a.prns))
		}
	}
	// Second peaks first: they need the data grid, which the
	// cross-correlation tests overwrite.
	a.correlations(dst, x)
	if !a.keepCrossCorr {
		dst = a.rejectCrossCorrelation(dst)
		a.corr = slices.DeleteFunc(a.corr, func(c Correlation) bool {
			return !slices.ContainsFunc(dst, func(r Acquired) bool { return r.PRN == c.PRN })
		})
	}
	slices.SortFunc(dst, func(u, v Acquired) int { return u.PRN - v.PRN })
	return dst, nil
}

// acqBatch is the number of PRNs searched before the Doppler window is cut
// to what their detections allow (boundWindow). Eight of 32: a sky of
// four or more satellites puts one in the first batch about two times in
// three (computed: 1 − C(24,4)/C(32,4) = 0.70 for four), and the later
// three quarters of the PRNs are then searched over a window about 10 kHz
// narrower than the ±15 kHz of a site whose clock is unknown.
const acqBatch = 8

// searchPRNs computes the rows of the current window (a.active) for the
// PRNs ps: the anchor rows with the screens of the half-bin rows between
// them, then the other rows, exact except screened rows that failed the
// screen.
func (a *Acquirer) searchPRNs(ps []prnState) {
	clear(a.screenNow)
	a.transform(a.base0)
	for i := range ps {
		a.searchAnchors(&ps[i])
	}
	for b := range a.bases {
		if b == a.base0 {
			continue
		}
		for d := range a.dops {
			if a.dopBase[d] != b || !a.active[d] {
				continue
			}
			if a.specBase != b {
				a.transform(b)
			}
			for i := range ps {
				p := &ps[i]
				use := !a.screenNow[d] || p.candidate[d] || a.exhaustive
				if use || a.rowHook != nil {
					a.correlate(p, d, nil, use, -1)
				}
			}
		}
	}
}

// boundWindow cuts the window of the next batches to the Dopplers the
// detections det allow and reports whether it cut anything. A detection
// i with Doppler D_i = g_i + c (geometric Doppler |g_i| ≤ DopplerMaxHz =
// D_max, receiver clock offset c, as in Meter's narrow window) bounds the
// clock to [D_i − D_max, D_i + D_max]; the detections together to
// [lo, hi] = [max D_i − D_max, min D_i + D_max], and every satellite's
// Doppler to [lo − D_max, hi + D_max], widened by a Doppler step for the
// bins' spacing and the fine Doppler's error. Only detections within
// 6 dB (xcStronger) of the strongest count: a weaker one may be a
// cross-correlation peak of a stronger signal at another Doppler
// (rejectCrossCorrelation, which needs the data grid, runs at the end,
// and covered checks the cut against its result). If they contradict
// each other (lo > hi), the window stays as it is.
func (a *Acquirer) boundWindow(det []Acquired) bool {
	strongest := 0.0
	for _, r := range det {
		strongest = max(strongest, a.lambda(r))
	}
	lo, hi, ok := a.clockBound(det, strongest/xcStronger)
	if !ok {
		return false
	}
	cut := false
	for d, f := range a.dops {
		in := a.window[d] && a.allows(f, lo, hi)
		if a.active[d] && !in {
			cut = true
		}
		a.active[d] = a.active[d] && in
	}
	return cut
}

// lambda is a detection's λ̂ = S/σ̂²/K − 1, its SNR estimate.
func (a *Acquirer) lambda(r Acquired) float64 { return r.PeakMetric/float64(a.nBlock) - 1 }

// clockBound returns the clock bound [lo, hi] of boundWindow for the
// detections det whose λ̂ is at least minLambda; ok is false if there
// are none or they contradict each other.
func (a *Acquirer) clockBound(det []Acquired, minLambda float64) (lo, hi float64, ok bool) {
	lo, hi = math.Inf(-1), math.Inf(1)
	for _, r := range det {
		if a.lambda(r) >= minLambda {
			lo, hi = max(lo, r.DopplerHz-a.cfg.DopplerMaxHz), min(hi, r.DopplerHz+a.cfg.DopplerMaxHz)
		}
	}
	return lo, hi, lo <= hi
}

// allows reports whether a satellite's Doppler can be f when the clock
// lies in [lo, hi]: within DopplerMaxHz of it, widened by a step.
func (a *Acquirer) allows(f, lo, hi float64) bool {
	m := a.cfg.DopplerMaxHz + a.cfg.DopplerStepHz
	return f >= lo-m && f <= hi+m
}

// covered reports whether every row of the window that the detections
// det allow (boundWindow's rule) was searched for every PRN: the rows
// still active at the end were searched by all batches.
func (a *Acquirer) covered(det []Acquired) bool {
	lo, hi, ok := a.clockBound(det, math.Inf(-1))
	for d, f := range a.dops {
		if a.window[d] && !a.active[d] && (!ok || a.allows(f, lo, hi)) {
			return false
		}
	}
	return true
}

// xcStronger: only detections with λ̂ at least 4× (6 dB) larger are
// considered as cross-correlation sources (see rejectCrossCorrelation).
const xcStronger = 4

// rejectCrossCorrelation removes detections explained by the
// cross-correlation of their code with a much stronger detected signal.
//
// The C/A Gold codes cross-correlate at −23.9 dB (65/1023) at equal
// Doppler (Gold 1967; REFERENCES §1.3) and somewhat higher at Doppler
// differences that are multiples of 1 kHz (Kaplan & Hegarty 2006, from
// memory: about −21 dB), so a satellite above about 50 dB-Hz puts peaks of
// λ ≈ 1–2 per millisecond into other PRNs' grids, which with the noise can
// cross the threshold. With λ̂ = PeakMetric/K − 1 the estimated per-block
// SNR of a detection (E[S/σ²] = K(1 + λ)), each detection w is checked
// against every detection s with λ̂_s ≥ 4·λ̂_w: a noise-free model of s
// (its code at the detected code phase and code rate, its carrier at the
// detected Doppler) is binned onto the grid and passed through the search
// twice, giving P_w, the power it produces in w's detection cell (w's
// Doppler bin, code lag and replica), and P_s, the power in its own cell.
// The cross-correlation it predicts in w's cell is X = K·λ̂_s·P_w/P_s
// (in units of σ², like the metric); w is rejected when it would not pass
// the threshold without it, PeakMetric − X ≤ γ (signal, cross-correlation
// and noise add in power on average). A genuine satellite's cell sees the
// strong code at a random lag, about 1/1023 of its power, so the test
// seldom removes one.
func (a *Acquirer) rejectCrossCorrelation(det []Acquired) []Acquired {
	if len(det) < 2 {
		return det
	}
	k := float64(a.nBlock)
	lam := func(d Acquired) float64 { return d.PeakMetric/k - 1 }
	var rejected uint64 // bit i: det[i] rejected (at most 37 PRNs)
	for i, w := range det {
		pw := &a.prns[slices.Index(a.cfg.PRNs, w.PRN)]
		for _, s := range det {
			if s.PRN == w.PRN || lam(s) < xcStronger*lam(w) {
				continue
			}
			ps := &a.prns[slices.Index(a.cfg.PRNs, s.PRN)]
			a.modelGrid(ps, s)
			own := a.cellPower(ps, ps.bestDop, ps.bestCell)
			cross := a.cellPower(pw, pw.bestDop, pw.bestCell)
			if own > 0 && w.PeakMetric-k*lam(s)*cross/own <= a.gamma {
				rejected |= 1 << i
				break
			}
		}
	}
	out := det[:0]
	for i, w := range det {
		if rejected&(1<<i) == 0 {
			out = append(out, w)
		}
	}
	return out
}

// modelGrid overwrites a.grid (the data grid is no longer needed once the
// search is done) with the noise-free, unit-amplitude, L1-centred
// model of detection d (code of p), binned like the data.
func (a *Acquirer) modelGrid(p *prnState, d Acquired) {
	clear(a.grid)
	a.specBase = -1
	clear(a.specOK)
	chips := a.modelChips
	gpsca.Sample(chips, &p.code, a.fs, gpsca.CodeRate(d.DopplerHz), d.CodePhaseChips)
	rot := newRotator(d.DopplerHz/a.fs, 0)
	for n := 0; n < len(chips); {
		rot.reset(float64(n))
		for end := min(n+1024, len(chips)); n < end; n++ {
			g := a.cellOf(n)
			if g >= len(a.grid) {
				return
			}
			a.grid[g] += rot.next() * complex(float32(chips[n]), 0)
		}
	}
}

// cellPower returns S(f_D, cell) of PRN p for Doppler bin dop and
// quarter-chip cell computed over the current a.grid, with the code-Doppler
// lag shift of correlate.
func (a *Acquirer) cellPower(p *prnState, dop, cell int) float64 {
	if a.specBase != a.dopBase[dop] {
		a.transform(a.dopBase[dop])
	}
	fd := a.dops[dop]
	z := a.zRow
	for k := range a.nBlock {
		a.blockCorrelation(z[k*a.nLag:(k+1)*a.nLag], p, k, a.dopShift[dop])
	}
	if cell&1 == 1 {
		return a.oddPower(z, fd, cell>>1)
	}
	var sum float64
	for k := range a.nBlock {
		v := z[k*a.nLag+(cell>>1+a.lagShift(k, fd))&(lagsPerMs-1)]
		sum += float64(real(v)*real(v) + imag(v)*imag(v))
	}
	return sum
}

// halfTaps is the number of lag cells on each side of a quarter-chip lag
// used to interpolate it (see oddPower).
const halfTaps = 8

// halfKernel holds the weights of the lag cells c − 7 … c + 8 for the
// value at c + ½: the Lanczos kernel sinc(d)·sinc(d/8) at the offsets
// d = −7.5 … 7.5 (Duchon 1979, "Lanczos filtering in one and two
// dimensions", J. Appl. Meteor. 18(8):1016–1022), scaled to unit sum.
var halfKernel = func() (w [2 * halfTaps]float32) {
	sinc := func(x float64) float64 { return math.Sin(math.Pi*x) / (math.Pi * x) }
	var sum float64
	v := make([]float64, len(w))
	for i := range v {
		d := float64(i) - halfTaps + 0.5
		v[i] = sinc(d) * sinc(d/halfTaps)
		sum += v[i]
	}
	for i := range w {
		w[i] = float32(v[i] / sum)
	}
	return w
}()

// oddPower returns S at the quarter-chip lag c + ½ of a row (between lag
// cells c and c + 1) from the block correlations z (z_k at z[k·nLag:])
// of Doppler bin fd: Σ_k |ẑ_k(c + ½)|², ẑ_k interpolated by halfKernel.
// z_k is band-limited to the Nyquist band of the lag cells (Acquire, step
// 3), so the sampling theorem interpolates it from them. Its noise is
// low-pass too (spectrum |R|², the C/A main lobe), and the interpolated
// cell keeps 0.995 of the noise power σ² of a lag cell (computed from the
// noise autocorrelation of the binned replica at 4 MS/s), so it is
// Gamma(K, 1) distributed like the lag cells under H0.
func (a *Acquirer) oddPower(z []complex64, fd float64, c int) float64 {
	var sum float64
	for k := range a.nBlock {
		w := z[k*a.nLag : k*a.nLag+lagsPerMs]
		base := c + a.lagShift(k, fd) - (halfTaps - 1)
		var re, im float32
		for i, h := range halfKernel {
			v := w[(base+i)&(lagsPerMs-1)]
			re += real(v) * h
			im += imag(v) * h
		}
		sum += float64(re*re + im*im)
	}
	return sum
}

// lagShift returns the cell shift that undoes the code Doppler of block k
// (see correlate): row[c] collects lag c + lagShift(k, fd).
func (a *Acquirer) lagShift(k int, fd float64) int {
	drift := float64(k*a.coh) * 1e-3 * fd / gpsca.CarrierToCodeRatio // chips
	shift := int(math.Round(drift * float64(lagsPerMs) / gpsca.CodeLength))
	return ((-shift)%lagsPerMs + lagsPerMs) % lagsPerMs
}

// bin mixes x to L1-centred baseband and integrates it onto the grid.
func (a *Acquirer) bin(x []complex64) {
	clear(a.grid)
	a.specBase = -1
	clear(a.specOK)
	rot := newRotator(-a.offsetHz/a.fs, 0)
	for n := 0; n < a.nSamples; {
		// Renormalize the rotator from the exact phase every 1024 samples.
		end := min(n+1024, a.nSamples)
		rot.reset(float64(n))
		for ; n < end; n++ {
			g := a.cellOf(n)
			if g >= len(a.grid) {
				n = a.nSamples
				break
			}
			v := x[n]
			c := rot.next()
			a.grid[g] += complex(real(v)*real(c)-imag(v)*imag(c), real(v)*imag(c)+imag(v)*real(c))
		}
	}
}

// transform fills a.spectra with the spectra of every block wiped by
// e^{−j2πbt}, b = a.bases[base] and t the centre time of each cell, in
// centred order: a.spectra[k·specLen + i] is bin i − nLag/2 − pad of
// block k, so that the nLag central bins shifted by s start at pad + s.
func (a *Acquirer) transform(base int) {
	a.spectra, a.specBase = a.specs[base], base
	if a.specOK[base] {
		return
	}
	a.specOK[base] = true
	rot := newRotator(-a.bases[base]/a.fa, 0.5)
	h := a.nLag/2 + a.pad
	for k := range a.nBlock {
		blk := a.grid[k*a.nGrid : (k+1)*a.nGrid]
		out := a.block
		if a.bases[base] == 0 {
			copy(out, blk)
		} else {
			for g, v := range blk {
				if g&1023 == 0 {
					rot.reset(float64(k*a.nGrid + g))
				}
				c := rot.next()
				out[g] = complex(real(v)*real(c)-imag(v)*imag(c), real(v)*imag(c)+imag(v)*real(c))
			}
		}
		a.plan.Forward(out, out)
		spec := a.spectra[k*a.specLen : (k+1)*a.specLen]
		copy(spec[:h], out[a.nGrid-h:])
		copy(spec[h:], out)
	}
	a.specBase = base
}

// blockCorrelation sets w (length nLag) to z_k for PRN p, block k and a
// spectrum shift of s bins: the inverse nLag-point FFT of the central nLag
// bins of Y_k[m + s]·R*[m], laid out in FFT order (non-negative bins first).
func (a *Acquirer) blockCorrelation(w []complex64, p *prnState, k, s int) []complex64 {
	h := a.nLag / 2
	win := a.spectra[k*a.specLen+a.pad+s:][:a.nLag]
	mulTo(a.prod[h:], win[:h], p.replica[:h])
	mulTo(a.prod[:h], win[h:], p.replica[h:])
	return a.lagPlan.Inverse(w, a.prod)
}

// useVector selects the AVX forms of mulTo, addPower and addDiffPower
// (vec_amd64.s) where the CPU has them. They perform the same float32 and
// float64 operations in the same order, so the results are the same
// (TestVectorKernels); tests turn it off to compare.
var useVector = hasVector

// mulTo sets dst[i] = x[i]·y[i].
func mulTo(dst, x, y []complex64) {
	x, y = x[:len(dst)], y[:len(dst)]
	if useVector {
		n := mulToVector(dst, x, y)
		dst, x, y = dst[n:], x[n:], y[n:]
	}
	for i, u := range x {
		v := y[i]
		dst[i] = complex(real(u)*real(v)-imag(u)*imag(v), real(u)*imag(v)+imag(u)*real(v))
	}
}

// screenFraction sets the screen threshold of the half-bin rows,
// γ_s = K + 0.6·(γ − K) (see Acquire). In the paired Monte Carlo of
// Acquire, 0.65 computes half as many half-bin rows (about 2 ms less per
// search) but missed 1 of 581 satellites at 38 dB-Hz, 0.7 missed 4; 0.6
// missed none.
const screenFraction = 0.6

// searchAnchors computes the anchor rows of PRN p exactly (their base
// spectra are in a.spectra) and screens the half-bin rows between them:
// with the correlations of the previous anchor row (f_D − 1/(2T)) in
// a.zPrev, correlate forms the interpolated half-bin row h in a.row2 while
// it computes the next one (f_D + 1/(2T)), and h becomes a candidate of p
// if the interpolated row's normalized maximum exceeds a.gammaScreen.
//
// For a block of N cells, z_s(τ) is bin s of the DFT along the block of
// y[n]·r*[n − τ], and the DFT at the half bin s + ½ is interpolated from
// its two neighbours by X(s + ½) ≈ (−jπ/4)·(X(s) − X(s + 1)), which is exact
// for a tone at s + ½ (computed from the Dirichlet kernel). The constant
// drops out of the normalized metric, so the interpolated row is
// Σ_k |z_s − z_{s+1}|². Against the exact half-bin row it keeps, for a tone
// at s + δ, the SNR fraction (sin πδ/(4δ(1 − δ)))²/(π²/8)/sinc²(δ − ½):
// at least 0.81 (at δ = ½, −0.91 dB), 0.89 at δ = ¼ or ¾ (computed).
//
// Only the rows of the current window (a.active) are searched; a half-bin
// row is screened only if both its anchors are in the window (screenNow),
// otherwise it is computed exactly.
func (a *Acquirer) searchAnchors(p *prnState) {
	prevDone := false
	for i, d := range a.anchors {
		if !a.active[d] {
			prevDone = false
			continue
		}
		h := a.halfAfter[i]
		if h >= 0 {
			a.screenNow[h] = prevDone && a.active[h]
			if !a.screenNow[h] {
				h = -1
			}
		}
		a.correlate(p, d, a.zCur, true, h)
		if h >= 0 {
			if m, _, ok := rowPeak(a.row2, a.nBlock); ok && m > a.gammaScreen {
				p.candidate[h] = true
			}
		}
		a.zPrev, a.zCur = a.zCur, a.zPrev
		prevDone = true
	}
}

// addDiffPower adds |u[i] − v[i]|² to dst[i].
func addDiffPower(dst []float64, u, v []complex64) {
	u, v = u[:len(dst)], v[:len(dst)]
	if useVector {
		n := addDiffPowerVector(dst, u, v)
		dst, u, v = dst[n:], u[n:], v[n:]
	}
	for i, x := range u {
		y := v[i]
		re, im := real(x)-real(y), imag(x)-imag(y)
		dst[i] += float64(re*re + im*im)
	}
}

// correlate accumulates S for one PRN and Doppler bin (whose base spectra
// are in a.spectra) and, if use, updates the PRN's running statistics. If
// z is not nil, it receives every block's correlation z_k at z[k·nLag:].
func (a *Acquirer) correlate(p *prnState, d int, z []complex64, use bool, h int) {
	fd := a.dops[d]
	row, row2 := a.row, a.row2
	clear(row)
	if h >= 0 {
		clear(row2)
	}
	if z == nil && use {
		z = a.zRow
	}
	// Code Doppler: the received code runs fd/1540 chips/s fast, so in block
	// k the correlation peak sits k·T·fd/1540 chips earlier in lag; shift it
	// back by the nearest whole cell.
	for k := range a.nBlock {
		w := a.work
		if z != nil {
			w = z[k*a.nLag : (k+1)*a.nLag]
		}
		a.blockCorrelation(w, p, k, a.dopShift[d])
		shift := a.lagShift(k, fd)
		// Lags τ and τ + 2048 are identical for a coherent block of several
		// code periods, so only one period of lags is used:
		// row[c] += |w[(c + shift) mod 2048]|².
		addPower(row[:lagsPerMs-shift], w[shift:lagsPerMs])
		addPower(row[lagsPerMs-shift:], w[:shift])
		if h >= 0 {
			u := a.zPrev[k*a.nLag : k*a.nLag+lagsPerMs]
			sh := a.lagShift(k, a.dops[h])
			addDiffPower(row2[:lagsPerMs-sh], u[sh:], w[sh:lagsPerMs])
			addDiffPower(row2[lagsPerMs-sh:], u[:sh], w[:sh])
		}
	}
	if a.rowHook != nil {
		a.rowHook(p.prn, d, row)
	}
	if !use {
		return
	}
	a.refineRow(p, d, row, z)
}

// refineRow finds the maximum of row d (its block correlations in z) on
// quarter-chip cells and updates the PRN's running statistics. Besides the
// 2048 lag cells (the even quarter-chip cells) it evaluates the two
// quarter-chip lags next to the row's maximum by interpolation
// (oddPower): the half-chip lag grid alone loses up to 0.8 dB more (a
// peak half-way between two cells; 0.24 dB more on average at 10 MS/s,
// computed, see Acquire), which the two extra cells recover.
func (a *Acquirer) refineRow(p *prnState, d int, row []float64, z []complex64) {
	v, bestC, ok := rowPeak(row, a.nBlock)
	if !ok {
		return
	}
	sigma2 := row[bestC] / v
	a.keepHot(p, d, row, v, bestC, sigma2)
	m := lagsPerMs - 1
	fd := a.dops[d]
	lo := a.oddPower(z, fd, (bestC-1)&m) / sigma2 // cell 2·bestC − 1
	hi := a.oddPower(z, fd, bestC) / sigma2       // cell 2·bestC + 1
	cell, nbr := 2*bestC, [3]float64{lo, v, hi}
	switch {
	case hi > v && hi >= lo:
		cell, nbr = 2*bestC+1, [3]float64{v, hi, row[(bestC+1)&m] / sigma2}
	case lo > v:
		cell, nbr = (2*bestC-1)&(gridPerMs-1), [3]float64{row[(bestC-1)&m] / sigma2, lo, v}
	}
	// Ties go to the lower Doppler bin whatever order the bins are searched in.
	if nbr[1] > p.best || nbr[1] == p.best && d < p.bestDop {
		p.best, p.bestDop, p.bestCell, p.bestNbr = nbr[1], d, cell, nbr
		a.keepProfile(p.prof, d, bestC, z)
		p.profDop, p.profC, p.profSig = d, bestC, sigma2
	}
}

// rowPeak returns the normalized maximum S/σ̂² of a row and its cell, with
// σ̂² from rowNoise; ok is false if σ̂² is not positive.
func rowPeak(row []float64, k int) (v float64, cell int, ok bool) {
	bestV := -1.0
	var sum float64
	for c, x := range row {
		sum += x
		if x > bestV {
			cell, bestV = c, x
		}
	}
	sigma2 := rowNoise(row, sum, cell, k)
	if !(sigma2 > 0) {
		return 0, 0, false
	}
	return bestV / sigma2, cell, true
}

// rowNoise returns the noise power per block and cell of one Doppler row
// S(f_D, ·) with the given sum: the mean of S/K over the row without the
// lags within ±1.5 chips of the row's maximum at peak.
func rowNoise(row []float64, sum float64, peak, k int) float64 {
	for dc := -excludeCells; dc <= excludeCells; dc++ {
		sum -= row[(peak+dc)&(lagsPerMs-1)]
	}
	return sum / float64((lagsPerMs-2*excludeCells-1)*k)
}

// addPower adds |w[i]|² to dst[i].
func addPower(dst []float64, w []complex64) {
	w = w[:len(dst)]
	if useVector {
		n := addPowerVector(dst, w)
		dst, w = dst[n:], w[n:]
	}
	for i, v := range w {
		dst[i] += float64(real(v)*real(v) + imag(v)*imag(v))
	}
}

// excludeCells is the half-width, in lag cells, of the code-lag region
// around the peak left out of the noise estimate: at least 1.5 chips.
const excludeCells = (3*lagsPerMs + 2*gpsca.CodeLength - 1) / (2 * gpsca.CodeLength) // ⌈1.5 · 2048/1023⌉ = 4

// decide applies the detection test to one PRN and refines a detection.
func (a *Acquirer) decide(p *prnState, x []complex64) (Acquired, bool) {
	metric := p.best
	if !(metric > a.gamma) {
		return Acquired{}, false
	}
	// Parabolic interpolation of the peak lag.
	y0, y1, y2 := p.bestNbr[0], p.bestNbr[1], p.bestNbr[2]
	delta := 0.0
	if den := y0 - 2*y1 + y2; den < 0 {
		delta = 0.5 * (y0 - y2) / den
		delta = max(-0.5, min(0.5, delta))
	}
	lag := (float64(p.bestCell) + delta) * gpsca.CodeLength / gridPerMs // chips
	// z(τ) = Σ_m y[m+τ]·r*[m] peaks where y[m] = r[m−τ]: the chip received
	// at t = 0 is chip −τ of the replica.
	phase := gpsca.WrapChips(-lag)
	fd := a.dops[p.bestDop]
	fd += a.fineDoppler(p, x, fd, phase)
	return Acquired{
		PRN:            p.prn,
		DopplerHz:      fd,
		CodePhaseChips: phase,
		PeakMetric:     metric,
		Threshold:      a.gamma,
	}, true
}

// fineDoppler returns the residual frequency from the phase rotation of
// consecutive 1 ms prompts over the snapshot (see Acquire).
func (a *Acquirer) fineDoppler(p *prnState, x []complex64, fd, phase float64) float64 {
	// Code NCO in chips·2^32 per sample (the tracker's format).
	step := uint64(math.Round(gpsca.CodeRate(fd) / a.fs * float64(codeOne)))
	cp := uint64(phase * float64(codeOne))
	if cp >= codePeriod {
		cp = 0
	}
	// Carrier conjugate from the tracker's table and phase accumulator.
	ps := phaseStep((a.offsetHz + fd) / a.fs)
	ms := len(a.prompts)
	var start int
	for m := range ms {
		end := min(int(math.Round(float64(m+1)*1e-3*a.fs)), len(x))
		var re, im float64
		for n, v := range x[start:end] {
			s := float32(p.code[cp>>32])
			if cp += step; cp >= codePeriod {
				cp -= codePeriod
			}
			c := carrierTable[(uint64(start+n)*ps)>>(64-carrierBits)]
			re += float64((real(v)*real(c) - imag(v)*imag(c)) * s)
			im += float64((real(v)*imag(c) + imag(v)*real(c)) * s)
		}
		a.prompts[m] = complex(re, im)
		start = end
	}
	var s complex128
	for m := 1; m < ms; m++ {
		s += a.prompts[m] * cmplx.Conj(a.prompts[m-1])
	}
	if s == 0 {
		return 0
	}
	return cmplx.Phase(s) / (2 * math.Pi * 1e-3)
}

// rotator generates e^{j2π(f·(n+off))} for consecutive n, f in cycles per
// sample, by complex multiplication, re-anchored from the exact phase by
// reset.
type rotator struct {
	f, off float64
	cur    complex128
	step   complex128
}

func newRotator(f, off float64) rotator {
	s, c := math.Sincos(2 * math.Pi * f)
	return rotator{f: f, off: off, step: complex(c, s)}
}

// reset sets the next output to e^{j2πf(n+off)}.
func (r *rotator) reset(n float64) {
	ph := math.Mod(r.f*(n+r.off), 1)
	s, c := math.Sincos(2 * math.Pi * ph)
	r.cur = complex(c, s)
}

// next returns the current phasor as complex64 and advances one sample.
func (r *rotator) next() complex64 {
	v := r.cur
	r.cur *= r.step
	return complex64(v)
}
