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
	// DefaultDopplerMaxHz is the default one-sided Doppler search range: the
	// ±4.9 kHz of a static user plus a little oscillator error
	// (REFERENCES §4).
	DefaultDopplerMaxHz = 5000
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

// gridPerMs is the number of code-phase cells per millisecond (per code
// period) on which the acquisition correlates: 4096 cells, i.e. 4 cells per
// chip (about 0.25 chip per cell).
const gridPerMs = 4096

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
	// DopplerMaxHz is the one-sided Doppler search range (default 5000 Hz).
	DopplerMaxHz float64
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
	prn     int
	code    [gpsca.CodeLength]int8
	replica []complex64 // conj(FFT(binned code replica)), length nGrid

	// Per-search results: the largest normalized cell S/σ̂²_row.
	best     float64
	bestDop  int
	bestCell int
	bestNbr  [3]float64 // S/σ̂² at bestCell−1, bestCell, bestCell+1 in the best row
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
	nGrid   int     // cells per coherent block: coh · gridPerMs
	fa      float64 // cell rate, gridPerMs · 1 kHz
	dops    []float64
	gamma   float64
	pfaCell float64

	plan       transformer
	prns       []prnState
	grid       []complex64 // binned, L1-centred snapshot, nBlock·nGrid
	spectra    []complex64 // per-Doppler spectra of all blocks, nBlock·nGrid
	work       []complex64
	row        []float64
	msBuf      []int8 // one millisecond of code samples for the refinement
	modelChips []int8 // code samples of a detection model, nSamples
	prompts    []complex128
	nSamples   int // input samples consumed: ⌈nBlock·nGrid·fs/fa⌉

	// rowHook, if set (by tests), sees every accumulated Doppler row S(f_D, ·).
	rowHook func(prn, dop int, row []float64)
	// keepCrossCorr (tests only) disables rejectCrossCorrelation.
	keepCrossCorr bool
}

// NewAcquirer returns an Acquirer for complex-baseband snapshots sampled at
// fs samples per second and centred at centerHz. It returns an error
// wrapping ErrL1NotInBand (text "skipped: …") if L1 lies outside
// ±(fs/2 − 1.1 MHz) of the centre, and an error for invalid configuration.
//
// Building precomputes, for every PRN, the conjugated FFT of the code
// replica on the acquisition grid (Borre et al. 2007, ch. 6), so that each
// search costs one forward FFT per Doppler bin and block plus one inverse
// FFT per PRN, Doppler bin and block.
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
		fa:       gridPerMs * 1e3,
	}
	half := int(math.Ceil(cfg.DopplerMaxHz/cfg.DopplerStepHz - 1e-9))
	for i := -half; i <= half; i++ {
		a.dops = append(a.dops, float64(i)*cfg.DopplerStepHz)
	}
	// Cells: Doppler bins × distinct code phases (one code period of lags).
	nCells := float64(len(a.dops) * gridPerMs)
	a.pfaCell = cfg.Pfa / nCells
	a.gamma = DetectionThreshold(a.nBlock, a.pfaCell)

	a.plan = newTransformer(a.nGrid)
	a.nSamples = int(math.Ceil(float64(a.nBlock*a.nGrid) * fs / a.fa))
	a.grid = make([]complex64, a.nBlock*a.nGrid)
	a.spectra = make([]complex64, a.nBlock*a.nGrid)
	a.work = make([]complex64, a.nGrid)
	a.row = make([]float64, gridPerMs)
	a.msBuf = make([]int8, int(math.Ceil(fs*1e-3))+1)
	a.modelChips = make([]int8, a.nSamples)
	a.prompts = make([]complex128, a.nBlock*a.coh)

	// Code replica binned exactly like the data: the cell value is the mean
	// of the code over the input samples falling into the cell (0 for an
	// empty cell), which keeps the binned correlation equal to the
	// full-rate one wherever a cell lies inside one chip.
	nIn := int(math.Ceil(float64(a.nGrid) * fs / a.fa))
	chips := make([]int8, nIn)
	count := make([]float32, a.nGrid)
	a.prns = make([]prnState, len(cfg.PRNs))
	for i, prn := range cfg.PRNs {
		p := &a.prns[i]
		p.prn = prn
		p.code, _ = gpsca.Code(prn) // validated in withDefaults
		gpsca.Sample(chips, &p.code, fs, gpsca.ChipRate, 0)
		rep := make([]complex64, a.nGrid)
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
		for g, v := range rep {
			rep[g] = complex(real(v), -imag(v))
		}
		p.replica = rep
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
//  2. For each Doppler bin f_D, each coherent block y_k is wiped by
//     e^{−j2πf_D t}, transformed once, Y_k = FFT(y_k), and shared by all
//     PRNs: z_k = IFFT(Y_k · conj(FFT(r))) is the circular correlation with
//     the PRN's replica r at every code lag.
//  3. S(f_D, τ) = Σ_k |z_k(τ)|² over K blocks (non-coherent sum), with the
//     lag of block k shifted by the code Doppler f_D/1540 chips/s.
//  4. The noise power σ̂² per block and cell is estimated for each Doppler
//     row as the mean of S/K over the row without the lags within ±1.5
//     chips of the row's maximum (per row, because a narrowband interferer
//     leaks into the correlation through the code's 1 kHz line spectrum,
//     REFERENCES §1.3, with a power that depends on its offset from each
//     Doppler bin). Under H0, S/σ̂² ≈ Gamma(K, 1); the PRN is
//     detected if max S/σ̂² > γ, γ = DetectionThreshold(K, Pfa/N_cells)
//     with N_cells = Doppler bins × 4096 code cells (REFERENCES §4: overall
//     P_FA ≈ N_cells · P_fa, a union bound, conservative for correlated
//     cells). Detections explained by a stronger satellite's
//     cross-correlation are removed (see rejectCrossCorrelation).
//  5. Refinement: the code phase by parabolic interpolation of S over the
//     peak cell and its two neighbours; the Doppler from the mean phase
//     rotation between consecutive 1 ms prompts at the peak,
//     Δf = arg Σ P_{m+1}·conj(P_m) / (2π·1 ms), which is unambiguous for
//     |Δf| < 500 Hz (half the bin spacing is 250 Hz); a data-bit
//     transition flips one product of the K·T − 1 and is outvoted.
func (a *Acquirer) Acquire(dst []Acquired, x []complex64) ([]Acquired, error) {
	dst = dst[:0]
	if len(x) < a.nSamples {
		return dst, fmt.Errorf("gnss: snapshot has %d samples, acquisition needs %d (%d ms at %g S/s)",
			len(x), a.nSamples, a.nBlock*a.coh, a.fs)
	}
	a.bin(x)
	for i := range a.prns {
		p := &a.prns[i]
		p.best = -1
	}
	for d, fd := range a.dops {
		a.wipeAndTransform(fd)
		for i := range a.prns {
			a.correlate(&a.prns[i], d, fd)
		}
	}
	for i := range a.prns {
		if r, ok := a.decide(&a.prns[i], x); ok {
			dst = append(dst, r)
		}
	}
	if !a.keepCrossCorr {
		dst = a.rejectCrossCorrelation(dst)
	}
	slices.SortFunc(dst, func(u, v Acquired) int { return u.PRN - v.PRN })
	return dst, nil
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

// cellPower returns S(f_D, cell) of PRN p for Doppler bin dop computed over
// the current a.grid, with the code-Doppler lag shift of correlate.
func (a *Acquirer) cellPower(p *prnState, dop, cell int) float64 {
	fd := a.dops[dop]
	a.wipeAndTransform(fd)
	var sum float64
	for k := range a.nBlock {
		spec := a.spectra[k*a.nGrid : (k+1)*a.nGrid]
		w := a.work
		for g, v := range spec {
			w[g] = v * p.replica[g]
		}
		a.plan.Inverse(w, w)
		v := w[(cell+a.lagShift(k, fd))&(gridPerMs-1)]
		sum += float64(real(v)*real(v) + imag(v)*imag(v))
	}
	return sum
}

// lagShift returns the cell shift that undoes the code Doppler of block k
// (see correlate): row[c] collects lag c + lagShift(k, fd).
func (a *Acquirer) lagShift(k int, fd float64) int {
	drift := float64(k*a.coh) * 1e-3 * fd / gpsca.CarrierToCodeRatio // chips
	shift := int(math.Round(drift * float64(gridPerMs) / gpsca.CodeLength))
	return ((-shift)%gridPerMs + gridPerMs) % gridPerMs
}

// bin mixes x to L1-centred baseband and integrates it onto the grid.
func (a *Acquirer) bin(x []complex64) {
	clear(a.grid)
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

// wipeAndTransform fills a.spectra with the FFTs of every block wiped by
// e^{−j2πf_D t}, t being the centre time of each cell.
func (a *Acquirer) wipeAndTransform(fd float64) {
	rot := newRotator(-fd/a.fa, 0.5)
	for k := range a.nBlock {
		blk := a.grid[k*a.nGrid : (k+1)*a.nGrid]
		out := a.spectra[k*a.nGrid : (k+1)*a.nGrid]
		rot.reset(float64(k * a.nGrid))
		for g, v := range blk {
			if g&1023 == 0 {
				rot.reset(float64(k*a.nGrid + g))
			}
			c := rot.next()
			out[g] = complex(real(v)*real(c)-imag(v)*imag(c), real(v)*imag(c)+imag(v)*real(c))
		}
		a.plan.Forward(out, out)
	}
}

// correlate accumulates S for one PRN and Doppler bin and updates the PRN's
// running statistics.
func (a *Acquirer) correlate(p *prnState, d int, fd float64) {
	row := a.row
	clear(row)
	// Code Doppler: the received code runs fd/1540 chips/s fast, so in block
	// k the correlation peak sits k·T·fd/1540 chips earlier in lag; shift it
	// back by the nearest whole cell.
	for k := range a.nBlock {
		spec := a.spectra[k*a.nGrid : (k+1)*a.nGrid]
		w := a.work
		for g, v := range spec {
			r := p.replica[g]
			w[g] = complex(real(v)*real(r)-imag(v)*imag(r), real(v)*imag(r)+imag(v)*real(r))
		}
		a.plan.Inverse(w, w)
		shift := a.lagShift(k, fd)
		// Lags τ and τ + 4096 are identical for a coherent block of several
		// code periods, so only one period of lags is used:
		// row[c] += |w[(c + shift) mod 4096]|².
		addPower(row[:gridPerMs-shift], w[shift:gridPerMs])
		addPower(row[gridPerMs-shift:], w[:shift])
	}
	if a.rowHook != nil {
		a.rowHook(p.prn, d, row)
	}
	bestC, bestV := 0, -1.0
	var sum float64
	for c, v := range row {
		sum += v
		if v > bestV {
			bestC, bestV = c, v
		}
	}
	sigma2 := rowNoise(row, sum, bestC, a.nBlock)
	if !(sigma2 > 0) {
		return
	}
	if v := bestV / sigma2; v > p.best {
		p.best, p.bestDop, p.bestCell = v, d, bestC
		m := gridPerMs - 1
		p.bestNbr = [3]float64{row[(bestC-1)&m] / sigma2, v, row[(bestC+1)&m] / sigma2}
	}
}

// rowNoise returns the noise power per block and cell of one Doppler row
// S(f_D, ·) with the given sum: the mean of S/K over the row without the
// lags within ±1.5 chips of the row's maximum at peak.
func rowNoise(row []float64, sum float64, peak, k int) float64 {
	for dc := -excludeCells; dc <= excludeCells; dc++ {
		sum -= row[(peak+dc)&(gridPerMs-1)]
	}
	return sum / float64((gridPerMs-2*excludeCells-1)*k)
}

// addPower adds |w[i]|² to dst[i].
func addPower(dst []float64, w []complex64) {
	w = w[:len(dst)]
	for i, v := range w {
		dst[i] += float64(real(v)*real(v) + imag(v)*imag(v))
	}
}

// excludeCells is the half-width, in cells, of the code-lag region around
// the peak left out of the noise estimate: 1.5 chips.
const excludeCells = (3*gridPerMs + 2*gpsca.CodeLength - 1) / (2 * gpsca.CodeLength) // ⌈1.5 · 4096/1023⌉ = 7

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
	rate := gpsca.CodeRate(fd)
	fc := a.offsetHz + fd
	ms := len(a.prompts)
	var start int
	for m := range ms {
		end := int(math.Round(float64(m+1) * 1e-3 * a.fs))
		end = min(end, len(x))
		n := end - start
		buf := a.msBuf[:n]
		gpsca.Sample(buf, &p.code, a.fs, rate, phase+float64(start)*rate/a.fs)
		rot := newRotator(-fc/a.fs, 0)
		var acc complex128
		for i := 0; i < n; {
			rot.reset(float64(start + i))
			e := min(i+1024, n)
			for ; i < e; i++ {
				c := rot.next()
				v := complex128(x[start+i]) * complex(float64(buf[i]), 0)
				acc += v * complex128(c)
			}
		}
		a.prompts[m] = acc
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
