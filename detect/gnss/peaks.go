package gnss

import (
	"math"
	"slices"

	"quietband/ingest/gpsca"
)

// Second correlation peaks (spoofing and meaconing indicators, REFERENCES
// §11.3, §11.5).
//
// Every visible satellite gives one correlation peak per PRN. A spoofer's
// counterfeit signal, a matched-power copy or a meacon's delayed
// re-radiation of the band adds a second one for the same PRN, at another
// code phase (and, for a counterfeit, another Doppler): auxiliary peak
// tracking (REFERENCES §11.3; Jafarnia-Jahromi et al. 2012, IJNO art.
// 127072, list it among the techniques) looks for it over the whole search
// grid. Each copy keeps its own peak height when the copies are at least
// about 1.5 chips apart (the band-limited correlation has fallen to
// −0.005 at 1.5 chips for a 2 MHz band, REFERENCES §11.3), so the second
// peak's power relative to the first is the copies' power ratio.
//
// Multipath lives within ±1.5 chips of the direct signal, later and weaker
// (REFERENCES §11.5: reflections stay below about 1.5 chips, ground bounce
// a few hundredths), so the search leaves the 4 lag cells on either side
// of the strongest peak alone (excludeCells: ⌈1.5 chips⌉ of half-chip
// cells, 2.0 chips), with one exception: a weaker peak 0.9–3 chips
// *before* the strongest. Nothing
// physical arrives before the direct signal; a weaker early peak is the
// authentic signal beside a stronger delayed copy (a meacon 1–1.5 µs late
// is 1–1.5 chips late). It is found by a two-path fit of the correlation
// power profile around the strongest peak (nearPath), in the spirit of the
// maximum-likelihood correlation-fit monitor of Gross, Humphreys et al.
// (2019, IEEE TAES; REFERENCES §11.1).
//
// Cost: the search keeps, for each Doppler row whose maximum passed the
// detection threshold, its largest cell outside ±1.5 chips of the maximum
// (one more pass over those rows only), and, for each PRN, the block
// correlations around its best cell (a copy when the best improves). The
// second-peak candidates, their refinement and the cross-correlation test
// run only for PRNs that have one, so a capture without second peaks costs
// the same and gives the same results as before.

// Peak is one correlation peak of a PRN.
type Peak struct {
	// CodePhaseChips is the code phase at the snapshot's first sample (the
	// chip received there), in [0, 1023).
	CodePhaseChips float64
	// DopplerHz is the carrier frequency minus L1, refined from the
	// prompts (see Acquire).
	DopplerHz float64
	// SNR is λ̂, the signal power over the noise power of one coherent
	// block correlation (C/N0·T): λ̂ = S/(K·σ̂²) − 1 at the peak, with S
	// interpolated at the peak's code phase and corrected for the
	// Doppler bin's loss sinc²(π·Δf·T) (REFERENCES §4).
	SNR float64
}

// ProfileSegment is the correlation power of one PRN against code phase
// around a peak, in one Doppler row: PowerDB[i] = 10·log10(S/(K·σ̂²)) at
// StartChips + i·StepChips, S the non-coherent sum of the K block
// correlations interpolated at that lag (0 dB is the noise, a peak of SNR
// λ reads 10·log10(1 + λ)). Lags are counted as arrival delay relative to
// the PRN's first (strongest) peak, in chips: a later arrival is positive.
type ProfileSegment struct {
	DopplerHz  float64
	StartChips float64
	StepChips  float64
	PowerDB    []float32
}

// Correlation is what the search saw of one acquired PRN: its strongest
// peak and, when there is one, a second peak that is neither noise, nor
// multipath, nor a cross-correlation or autocorrelation sidelobe of a
// stronger signal (see Acquirer.Correlations).
type Correlation struct {
	PRN   int
	First Peak
	// Second is nil when no second peak was found.
	Second *Peak
	// SecondDB is 10·log10 of the second peak's SNR over the first's
	// (≤ 0: the first is the strongest).
	SecondDB float64
	// DelayChips is the second peak's arrival delay relative to the
	// first, in chips, in (−511.5, 511.5]: positive when it arrives later
	// (its code phase is smaller). A meacon's copy is the later, stronger
	// peak: the authentic signal is then a second peak with a negative
	// delay.
	DelayChips float64
	// Near says that the second peak lies 0.9–3 chips before the first
	// and was separated from it by the two-path fit (nearPath) rather
	// than found on its own.
	Near bool
	// Profile is the correlation power around the first peak (and around
	// the second, in its own Doppler row, when it lies outside the
	// first's segment): for the analyst's report.
	Profile []ProfileSegment
}

// Profile window kept per PRN: the block correlations at the lag cells
// within ±profHalf of the best cell (±9 chips, so that the two-path fit
// and the report's picture, ±4.5 chips, have the interpolation's 8 taps
// on either side).
const (
	profHalf = 18
	profLen  = 2*profHalf + 1
)

// Second-peak search settings.
const (
	// nearMinChips, nearMaxChips: the range of early-path delays the
	// two-path fit searches, in chips. A meacon 1 µs late is 1.02 chips
	// late (1 chip = 0.978 µs, REFERENCES §11.5); multipath is later,
	// never earlier. The range reaches past the far search's exclusion
	// (excludeCells, 4 lag cells = 2.0 chips) so that no delay falls
	// between the two; a fit that ends on its upper edge is left to the
	// far search.
	nearMinChips = 0.9
	nearMaxChips = 3.0
	// nearFloorDB is the weakest early path, relative to the strongest,
	// that the fit may report: the mean correlation shape (corrShape)
	// departs from the search's correlation by up to −11 dB of the peak
	// within a chip of it and −15 dB at 1 chip, at 4 MS/s
	// (TestCorrShape: the correlation is not quite the same at every
	// code phase), and from a PRN's own by its autocorrelation
	// sidelobes, −23.9 dB (65/1023, Gold 1967; REFERENCES §1.3). A meacon
	// re-radiates at most a few dB over the authentic signals (2–6 dB in
	// the cases; REFERENCES §11.1 models 0–10 dB): the authentic
	// signal is then 10 dB weaker at most.
	nearFloorDB = -10
	// nearSigmas: the early path's power must stand this many standard
	// errors of the weighted fit above zero.
	nearSigmas = 5
	// pairStronger: a signal is considered as the source of a second
	// peak's cross-correlation when its SNR is at least this many times
	// the second peak's (the factor of rejectCrossCorrelation).
	pairStronger = xcStronger
)

// hotRow is a Doppler row whose normalized maximum passed the detection
// threshold: its maximum (v1 at lag cell c1) and its largest cell outside
// ±1.5 chips of it (v2 at c2), both normalized by the row's noise.
type hotRow struct {
	dop    int
	c1, c2 int
	v1, v2 float64
	sigma2 float64
}

// keepHot records row d of PRN p (normalized maximum v at lag cell c,
// noise σ̂² sigma2) when v passes γ: the search for second peaks
// (Correlations) needs every such row's two largest separated cells.
func (a *Acquirer) keepHot(p *prnState, d int, row []float64, v float64, c int, sigma2 float64) {
	if !(v > a.gamma) {
		return
	}
	c2, v2 := -1, -1.0
	start := c + excludeCells + 1
	for i := range lagsPerMs - 2*excludeCells - 1 {
		j := (start + i) & (lagsPerMs - 1)
		if row[j] > v2 {
			c2, v2 = j, row[j]
		}
	}
	p.hot = append(p.hot, hotRow{dop: d, c1: c, v1: v, c2: c2, v2: v2 / sigma2, sigma2: sigma2})
}

// keepProfile copies the block correlations of row d (z, as correlate
// leaves them) at the lag cells within ±profHalf of lag cell c into dst
// (K·profLen), block by block, with each block's code-Doppler lag shift
// undone as in the row: dst[k·profLen + j] is z_k at row cell
// c − profHalf + j.
func (a *Acquirer) keepProfile(dst []complex64, d, c int, z []complex64) {
	fd := a.dops[d]
	for k := range a.nBlock {
		w := z[k*a.nLag : k*a.nLag+lagsPerMs]
		sh := a.lagShift(k, fd)
		out := dst[k*profLen : (k+1)*profLen]
		for j := range out {
			out[j] = w[(c-profHalf+j+sh)&(lagsPerMs-1)]
		}
	}
}

// lanczosTab holds the interpolation weights of profPower for the
// fractions i/16 of a lag cell: the Lanczos kernel sinc(d)·sinc(d/8) at
// d = j − 7 − i/16 for the 16 samples ⌊u⌋ − 7 … ⌊u⌋ + 8, scaled to unit
// sum (the kernel of oddPower is the fraction ½; Duchon 1979).
var lanczosTab = func() (t [16][2 * halfTaps]float64) {
	sinc := func(x float64) float64 {
		if x == 0 {
			return 1
		}
		return math.Sin(math.Pi*x) / (math.Pi * x)
	}
	for i := range t {
		var sum float64
		for j := range t[i] {
			d := float64(j-halfTaps+1) - float64(i)/16
			t[i][j] = sinc(d) * sinc(d/halfTaps)
			sum += t[i][j]
		}
		for j := range t[i] {
			t[i][j] /= sum
		}
	}
	return t
}()

// profPower returns S(u) = Σ_k |ẑ_k(u)|² of a profile window (K·profLen
// block correlations) at window position u, a multiple of 1/16 cell, ẑ_k
// interpolated from the lag cells by the Lanczos kernel (the correlation
// is band-limited to the lag cells' Nyquist band, see oddPower). u must
// lie within [halfTaps − 1, profLen − halfTaps − 1].
func profPower(prof []complex64, k int, u float64) float64 {
	q := int(math.Round(u * 16))
	w := &lanczosTab[q&15]
	base := q>>4 - halfTaps + 1
	var sum float64
	for b := range k {
		blk := prof[b*profLen+base : b*profLen+base+2*halfTaps]
		var re, im float64
		for i, v := range blk {
			re += float64(real(v)) * w[i]
			im += float64(imag(v)) * w[i]
		}
		sum += re*re + im*im
	}
	return sum
}

// profPeak returns the window position within ±0.75 cell of u0 where
// profPower is largest (on a 1/16-cell grid) and that power.
func profPeak(prof []complex64, k int, u0 float64) (u, s float64) {
	s = -1
	for i := -12; i <= 12; i++ {
		x := u0 + float64(i)/16
		if v := profPower(prof, k, x); v > s {
			u, s = x, v
		}
	}
	return u, s
}

// cellChips is the width of one lag cell in chips.
const cellChips = float64(gpsca.CodeLength) / lagsPerMs

// corrTable is the normalized correlation of a C/A signal with its
// replica against the lag x in lag cells, as the search sees it (see
// Acquirer.corrShape), tabulated every 1/shapeRes cell up to shapeCells
// cells; at interpolates it linearly (0 beyond, |x| taken).
type corrTable []float64

const (
	shapeRes   = 32 // table points per lag cell
	shapeCells = 24 // table extent, lag cells
)

func (h corrTable) at(x float64) float64 {
	x = math.Abs(x) * shapeRes
	i := int(x)
	if i >= len(h)-1 {
		return 0
	}
	f := x - float64(i)
	return h[i]*(1-f) + h[i+1]*f
}

// corrShape returns the correlation shape of the search (built on first
// use and kept): h(x) = Σ_m S(m)·cos(2π·m·x/N_lag) / Σ_m S(m), S(m) the
// mean over the configured PRNs of the binned replicas' power |R(m)|² at
// the N_lag bins the search keeps (|f| < 1.024 MHz, Acquire step 3). For
// a signal whose code phase falls on a lag cell that is its exact
// correlation up to each code's line structure, which the mean smooths
// out: the code spectrum's envelope sinc²(f/R_c), cut to the search band
// (where the ideal triangle 1 − |τ| turns round at its top, h(0.2 chip)
// = 0.92), widened by the binning of samples into cells and, at sample
// rates near 4 MS/s, by the code's sidelobes aliased into the band.
// TestCorrShape compares it with the search's correlation of noise-free
// signals at every code phase.
func (a *Acquirer) corrShape() corrTable {
	if a.shape != nil {
		return a.shape
	}
	n := a.nLag
	spec := make([]float64, n) // centred: bin i − n/2
	for _, p := range a.prns {
		for i, v := range p.replica {
			spec[i] += float64(real(v)*real(v) + imag(v)*imag(v))
		}
	}
	var norm float64
	for _, v := range spec {
		norm += v
	}
	h := make(corrTable, shapeCells*shapeRes+2)
	for j := range h {
		x := float64(j) / shapeRes
		// Σ_i S_i·cos(2π(i − n/2)x/n) by a rotating phasor, restarted
		// from the exact angle every 256 bins.
		var sum float64
		for i0 := 0; i0 < n; i0 += 256 {
			ph := 2 * math.Pi * float64(i0-n/2) * x / float64(n)
			c, sn := math.Cos(ph), math.Sin(ph)
			dc, ds := math.Cos(2*math.Pi*x/float64(n)), math.Sin(2*math.Pi*x/float64(n))
			for i := i0; i < min(i0+256, n); i++ {
				sum += spec[i] * c
				c, sn = c*dc-sn*ds, c*ds+sn*dc
			}
		}
		h[j] = sum / norm
	}
	a.shape = h
	return h
}

// excessProfile returns P_j = Σ_k |z_k(j)|²/σ̂² − K for every cell of a
// profile window: each lag cell's power over the noise, summed over the
// K blocks (under noise alone P_j + K is Gamma(K, 1), REFERENCES §4).
func excessProfile(prof []complex64, k int, sigma2 float64) (p [profLen]float64) {
	for j := range p {
		var s float64
		for b := range k {
			v := prof[b*profLen+j]
			s += float64(real(v)*real(v) + imag(v)*imag(v))
		}
		p[j] = s/sigma2 - float64(k)
	}
	return p
}

// linearAt interpolates p linearly at position u (0 outside).
func linearAt(p *[profLen]float64, u float64) float64 {
	i := int(math.Floor(u))
	if i < 0 || i+1 >= profLen {
		return 0
	}
	f := u - float64(i)
	return p[i]*(1-f) + p[i+1]*f
}

// nearScreen reports whether a profile window (row noise σ̂² sigma2,
// strongest peak near window position u1) may hold an earlier path
// 0.9–3 chips before the peak (see nearPath): some point there exceeds
// its mirror image after the peak by half the early path's detection
// margin, gammaNear − K. The correlation shape is even, so a single path
// leaves the difference at noise level; multipath makes the late side
// the larger.
func nearScreen(prof []complex64, k int, sigma2, u1, gammaNear float64) bool {
	if !(sigma2 > 0) {
		return false
	}
	p := excessProfile(prof, k, sigma2)
	margin := gammaNear - float64(k)
	for d := nearMinChips / cellChips; d <= nearMaxChips/cellChips; d += 0.25 {
		if linearAt(&p, u1-d)-linearAt(&p, u1+d) > margin/2 {
			return true
		}
	}
	return false
}

// nearPath fits two paths to a profile window (row noise σ̂² sigma2,
// strongest peak at window position u1) and returns the earlier, weaker
// one when there is one: the authentic signal 0.9–3 chips before a
// stronger delayed copy.
//
// With P_j the excess power of lag cell j (excessProfile), two paths at
// positions a (the later, stronger) and b = a − d give
// E[P_j] = A·h(j − a)² + B·h(j − b)² + D·h(j − a)·h(j − b), h the
// search's correlation shape (Acquirer.corrShape), A and B the paths'
// powers summed over the blocks and D twice the real part of their
// summed cross product (their relative carrier phase). P_j + K is a sum
// of K non-central exponential cells, of variance K + 2·E[P_j] (in σ̂²
// units, REFERENCES §4), so the cells near a strong peak are far noisier
// than the rest: the fit weighs each cell by 1/(K + 2·A₀·h(j − u1)²), A₀
// the single-path power at u1 (weighted least squares). For each (a, d)
// on a 1/16-cell grid (a within ±½ cell of u1, d over 0.9–3 chips) A, B
// and D follow over the cells from u1 − ½ − 3 chips − 4 to u1 + ½ + 4
// (the same cells and weights for every trial, so that residuals
// compare); the trial with the smallest weighted residual wins.
//
// It returns the strongest path's window position, the early path's
// delay relative to it (cells, negative), its power over the strongest's
// (B/A) and its excess power B; ok is false when there is none: B must exceed gammaNear − K and
// nearSigmas standard errors of the fit (the diagonal of the inverse
// normal matrix), be smaller than A (the stronger is the later one) and
// not below nearFloorDB of it, and the fit must not end on an edge of
// the delay range.
func nearPath(h corrTable, prof []complex64, k int, sigma2, u1, gammaNear float64) (main, delayCells, ratio, excess float64, ok bool) {
	if !(sigma2 > 0) {
		return 0, 0, 0, 0, false
	}
	p := excessProfile(prof, k, sigma2)
	dMin, dMax := nearMinChips/cellChips, nearMaxChips/cellChips
	lo := max(0, int(math.Ceil(u1-0.5-dMax-4)))
	hi := min(profLen-1, int(math.Floor(u1+0.5+4)))
	kf := float64(k)
	a0 := max(linearAt(&p, u1), 0)
	var wt [profLen]float64
	for j := lo; j <= hi; j++ {
		g := h.at(float64(j) - u1)
		wt[j] = 1 / (kf + 2*a0*g*g)
	}
	best := math.Inf(1)
	var bA, bB, seB float64
	for ia := -8; ia <= 8; ia++ {
		a := u1 + float64(ia)/16
		for id := 0; ; id++ {
			d := dMin + float64(id)/16
			if d > dMax+1e-9 {
				break
			}
			b := a - d
			// Weighted normal equations of the three-term fit.
			var m [3][3]float64
			var r [3]float64
			var yy float64
			for j := lo; j <= hi; j++ {
				ha, hb := h.at(float64(j)-a), h.at(float64(j)-b)
				u := [3]float64{ha * ha, hb * hb, ha * hb}
				y, w := p[j], wt[j]
				for x := range 3 {
					r[x] += w * u[x] * y
					for z := range 3 {
						m[x][z] += w * u[x] * u[z]
					}
				}
				yy += w * y * y
			}
			c, ok := solve3(m, r)
			if !ok {
				continue
			}
			// Residual Σw(y − u·c)² = yy − 2c·r + c·M·c.
			res := yy
			for x := range 3 {
				res -= 2 * c[x] * r[x]
				for z := range 3 {
					res += c[x] * m[x][z] * c[z]
				}
			}
			if res < best {
				best, bA, bB = res, c[0], c[1]
				main, delayCells = a, -d
				// Var(B̂) = (M⁻¹)_BB: the cofactor of M_BB over det M.
				det := m[0][0]*(m[1][1]*m[2][2]-m[1][2]*m[2][1]) - m[0][1]*(m[1][0]*m[2][2]-m[1][2]*m[2][0]) +
					m[0][2]*(m[1][0]*m[2][1]-m[1][1]*m[2][0])
				seB = math.Sqrt(max((m[0][0]*m[2][2]-m[0][2]*m[2][0])/det, 0))
			}
		}
	}
	// A fit on either edge of the range is a path outside it (the far
	// search takes the farther ones).
	if -delayCells < dMin+0.1 || -delayCells > dMax-0.1 {
		return 0, 0, 0, 0, false
	}
	margin := gammaNear - kf
	if !(bA > 0 && bB > margin && bB > nearSigmas*seB && bB < bA && dB(bB/bA) >= nearFloorDB) {
		return 0, 0, 0, 0, false
	}
	return main, delayCells, bB / bA, bB, true
}

// solve3 solves m·c = r by Cramer's rule; ok is false for a singular m.
func solve3(m [3][3]float64, r [3]float64) (c [3]float64, ok bool) {
	det := func(a [3][3]float64) float64 {
		return a[0][0]*(a[1][1]*a[2][2]-a[1][2]*a[2][1]) -
			a[0][1]*(a[1][0]*a[2][2]-a[1][2]*a[2][0]) +
			a[0][2]*(a[1][0]*a[2][1]-a[1][1]*a[2][0])
	}
	d := det(m)
	if !(math.Abs(d) > 1e-12*math.Abs(m[0][0]*m[1][1]*m[2][2])) || d == 0 {
		return c, false
	}
	for x := range 3 {
		t := m
		for y := range 3 {
			t[y][x] = r[y]
		}
		c[x] = det(t) / d
	}
	return c, true
}

// sincSq is sinc²(x) = (sin πx/πx)².
func sincSq(x float64) float64 {
	if x == 0 {
		return 1
	}
	s := math.Sin(math.Pi*x) / (math.Pi * x)
	return s * s
}

// pairCand is a second-peak candidate during correlations.
type pairCand struct {
	det    int // index of the PRN's detection
	p      *prnState
	dop    int // Doppler row
	cell   int // quarter-chip cell of the peak
	metric float64
	gamma  float64 // the threshold it had to pass
	first  Peak    // the PRN's first peak, refined
	peak   Peak
	ratio  float64 // SNR over the first's
	delay  float64 // chips, relative to the first
	near   bool
	prof   []complex64 // its own row's window (far candidates)
	sigma2 float64     // its row's noise (far candidates)
	u      float64     // its window position (far candidates)
	u1     float64     // the first peak's window position
}

// Correlations returns the PRNs of the last search (Acquire or
// AcquireAround) that showed a second correlation peak, with both peaks
// and the correlation profile around them, in ascending PRN order. The
// slice is the Acquirer's and valid until the next search.
//
// A second peak is either (REFERENCES §11.3, §11.5):
//   - far: the largest cell of the whole search grid (every Doppler row
//     computed exactly) outside ±1.5 chips of the first peak's code
//     phase, above the detection threshold γ; or
//   - near: an earlier, weaker path 0.9–3 chips before the first peak,
//     found by the two-path fit of nearPath, above γ_near =
//     DetectionThreshold(K, Pfa/64) for the 64 quarter-chip cells of
//     that range and its neighbours (the same false-alarm budget over far
//     fewer cells).
//
// A candidate is then tested against cross-correlation and sidelobes:
// every detected peak (first or second, of any PRN, its own first
// included) whose SNR is at least four times the candidate's is modelled
// noise-free (as in rejectCrossCorrelation) and the power each predicts in
// the candidate's cell, X = K·λ̂_s·P_c/P_s, is summed; the candidate is
// kept when its metric minus that sum still passes its threshold. The
// C/A codes' cross-correlation reaches −23.9 dB (Gold 1967) and more at
// Doppler offsets of whole kilohertz (REFERENCES §1.3), and a strong
// signal's own autocorrelation sidelobes (±65/1023) at other lags and its
// Doppler sidelobes in other rows reach the same levels: a 55 dB-Hz
// spoofer would otherwise fill its own grid with second peaks.
func (a *Acquirer) Correlations() []Correlation { return a.corr }

// correlations finds the second peaks of the detections det of the
// search just made on snapshot x (see Correlations) into a.corr. It runs
// before rejectCrossCorrelation, while the data grid is in place. A
// detection with no hot row besides its first peak's and no early path in
// its profile (the screen of nearPath) costs a few hundred operations and
// no allocation.
func (a *Acquirer) correlations(det []Acquired, x []complex64) {
	a.corr = a.corr[:0]
	k := a.nBlock
	var cands []pairCand
	for i, r := range det {
		p := &a.prns[slices.Index(a.cfg.PRNs, r.PRN)]
		// The first peak's window position: its refined lag (decide) in
		// lag cells, relative to the window's start, on the 1/16 grid of
		// profPower.
		lag := gpsca.WrapChips(-r.CodePhaseChips) / cellChips
		u0 := math.Round((profHalf+wrapCells(lag-float64(p.profC)))*16) / 16
		var first Peak
		var u1 float64
		done := false
		firstPeak := func() {
			if !done {
				var s1 float64
				u1, s1 = profPeak(p.prof, k, u0)
				first = Peak{CodePhaseChips: gpsca.WrapChips(-(float64(p.profC) + u1 - profHalf) * cellChips),
					DopplerHz: r.DopplerHz, SNR: a.snr(s1, p.profSig, r.DopplerHz-a.dops[p.profDop])}
				done = true
			}
		}
		// Near: an earlier, weaker path. The fit places both paths: the
		// first peak's position from the acquisition (decide) is pulled
		// towards the early one when they overlap.
		if nearScreen(p.prof, k, p.profSig, u0, a.gammaNear) {
			firstPeak()
			if um, dl, ratio, excess, ok := nearPath(a.corrShape(), p.prof, k, p.profSig, u1, a.gammaNear); ok {
				first.CodePhaseChips = gpsca.WrapChips(-(float64(p.profC) + um - profHalf) * cellChips)
				dc := dl * cellChips
				pk := Peak{CodePhaseChips: gpsca.WrapChips(first.CodePhaseChips - dc), DopplerHz: r.DopplerHz,
					SNR: first.SNR * ratio}
				cell := int(math.Round(2*(lag+dl))) & (gridPerMs - 1)
				cands = append(cands, pairCand{det: i, p: p, dop: p.profDop, cell: cell, metric: float64(k) + excess,
					gamma: a.gammaNear, first: first, peak: pk, ratio: ratio, delay: dc, near: true, u1: um})
				continue
			}
		}
		// Far: the best hot cell outside ±1.5 chips of the first peak.
		c0 := int(math.Round(lag)) & (lagsPerMs - 1)
		far := func(c int) bool { return c >= 0 && cellDist(c, c0) > excludeCells }
		bi, bv, bc := -1, a.gamma, -1
		for hi, h := range p.hot {
			switch {
			case far(h.c1) && h.v1 > bv:
				bi, bv, bc = hi, h.v1, h.c1
			case far(h.c2) && h.v2 > bv:
				bi, bv, bc = hi, h.v2, h.c2
			}
		}
		if bi < 0 {
			continue
		}
		firstPeak()
		c := a.refineFar(p, p.hot[bi], bc, bv, x, first)
		c.det, c.u1, c.first = i, u1, first
		cands = append(cands, c)
	}
	if len(cands) == 0 {
		return
	}
	keep := a.testCandidates(cands, det)
	for j := range cands {
		cd := &cands[j]
		if !keep[j] {
			continue
		}
		p := cd.p
		r := det[cd.det]
		pk, first := cd.peak, cd.first
		c := Correlation{PRN: r.PRN, First: first, Second: &pk, SecondDB: dB(cd.ratio), DelayChips: cd.delay, Near: cd.near}
		lo := -4.5
		if cd.near {
			lo = max(cd.delay-2.5, -5.5)
		}
		c.Profile = []ProfileSegment{segment(p.prof, k, p.profSig, cd.u1, lo, 4.5, first.DopplerHz)}
		if !cd.near {
			s := segment(cd.prof, k, cd.sigma2, cd.u, -4.5, 4.5, pk.DopplerHz)
			s.StartChips += cd.delay
			c.Profile = append(c.Profile, s)
		}
		a.corr = append(a.corr, c)
	}
	slices.SortFunc(a.corr, func(u, v Correlation) int { return u.PRN - v.PRN })
}

// snr returns λ̂ = S/(K·σ̂²) − 1 of a peak of non-coherent power S in a row
// of noise σ̂², corrected for the coherent loss sinc²(π·Δf·T) of a peak
// Δf from the row's Doppler (REFERENCES §4).
func (a *Acquirer) snr(s, sigma2, df float64) float64 {
	T := float64(a.coh) * 1e-3
	return (s/(float64(a.nBlock)*sigma2) - 1) / sincSq(df*T)
}

// wrapCells wraps a lag difference in cells into [−1024, 1024).
func wrapCells(d float64) float64 {
	return math.Mod(math.Mod(d, lagsPerMs)+1.5*lagsPerMs, lagsPerMs) - 0.5*lagsPerMs
}

// cellDist is the circular distance between two lag cells.
func cellDist(a, b int) int {
	d := (a - b) & (lagsPerMs - 1)
	return min(d, lagsPerMs-d)
}

// segment returns the profile's power over the noise, in dB, every ¼ lag
// cell from lo to hi chips around window position u (a multiple of 1/16
// cell; arrival delay relative to u), within the window's interpolation
// range.
func segment(prof []complex64, k int, sigma2, u, lo, hi, dopplerHz float64) ProfileSegment {
	uMin, uMax := float64(halfTaps-1), float64(profLen-halfTaps-1)
	const step = 0.25
	s := ProfileSegment{DopplerHz: dopplerHz, StepChips: step * cellChips}
	started := false
	for i := int(math.Ceil(lo / cellChips / step)); float64(i)*step*cellChips <= hi+1e-9; i++ {
		x := float64(i) * step
		w := u + x
		if w < uMin || w > uMax {
			continue
		}
		if !started {
			s.StartChips, started = x*cellChips, true
		}
		v := profPower(prof, k, w) / (float64(k) * sigma2)
		s.PowerDB = append(s.PowerDB, float32(math.Round(10*dB(max(v, 1e-3)))/10))
	}
	return s
}

// refineFar refines a far second-peak candidate of PRN p at lag cell c of
// hot row h (normalized value v): the row is computed again (the data
// grid is still in place) for its block correlations, the code phase is
// taken at the largest interpolated power within ¾ cell, the Doppler from
// the prompts at that code phase (fineDoppler), and its SNR as for the
// first peak.
func (a *Acquirer) refineFar(p *prnState, h hotRow, c int, v float64, x []complex64, first Peak) pairCand {
	d := h.dop
	if a.specBase != a.dopBase[d] {
		a.transform(a.dopBase[d])
	}
	a.correlate(p, d, a.zRow, false, -1)
	prof := make([]complex64, a.nBlock*profLen)
	a.keepProfile(prof, d, c, a.zRow)
	u, s := profPeak(prof, a.nBlock, profHalf)
	lag := float64(c) + u - profHalf // lag cells
	phase := gpsca.WrapChips(-lag * cellChips)
	fd := a.dops[d]
	fd += a.fineDoppler(p, x, fd, phase)
	snr := a.snr(s, h.sigma2, fd-a.dops[d])
	delay := wrapChips(first.CodePhaseChips - phase) // a later arrival has the smaller code phase
	return pairCand{p: p, dop: d, cell: int(math.Round(2*lag)) & (gridPerMs - 1), metric: v, gamma: a.gamma,
		peak: Peak{CodePhaseChips: phase, DopplerHz: fd, SNR: snr}, ratio: snr / first.SNR, delay: delay,
		prof: prof, sigma2: h.sigma2, u: u}
}

// wrapChips wraps a code-phase difference into (−511.5, 511.5].
func wrapChips(d float64) float64 {
	d = math.Mod(d, gpsca.CodeLength)
	switch {
	case d > gpsca.CodeLength/2:
		d -= gpsca.CodeLength
	case d <= -gpsca.CodeLength/2:
		d += gpsca.CodeLength
	}
	return d
}

// testCandidates applies the cross-correlation and sidelobe test of
// Correlations to every candidate and reports which are kept. It
// overwrites the data grid (modelGrid), so it runs after every use of it.
func (a *Acquirer) testCandidates(cands []pairCand, det []Acquired) []bool {
	k := float64(a.nBlock)
	type source struct {
		p    *prnState
		acq  Acquired
		dop  int
		cell int
		snr  float64
		cand int // index in cands, −1 for a first peak
	}
	var srcs []source
	for _, r := range det {
		p := &a.prns[slices.Index(a.cfg.PRNs, r.PRN)]
		srcs = append(srcs, source{p: p, acq: r, dop: p.bestDop, cell: p.bestCell, snr: r.PeakMetric/k - 1, cand: -1})
	}
	for j, c := range cands {
		srcs = append(srcs, source{p: c.p, acq: Acquired{PRN: c.p.prn, DopplerHz: c.peak.DopplerHz, CodePhaseChips: c.peak.CodePhaseChips},
			dop: c.dop, cell: c.cell, snr: c.peak.SNR, cand: j})
	}
	pred := make([]float64, len(cands))
	for _, s := range srcs {
		var own float64
		for j := range cands {
			c := &cands[j]
			if s.cand == j || !(s.snr >= pairStronger*c.peak.SNR) {
				continue
			}
			// The own first peak of a near candidate is the fit's other
			// path: the fit has separated them already.
			if c.near && s.cand < 0 && s.p == c.p {
				continue
			}
			if own == 0 {
				a.modelGrid(s.p, s.acq)
				own = a.cellPower(s.p, s.dop, s.cell)
				if !(own > 0) {
					break
				}
			}
			pred[j] += k * s.snr * a.cellPower(c.p, c.dop, c.cell) / own
		}
	}
	keep := make([]bool, len(cands))
	for j, c := range cands {
		keep[j] = c.metric-pred[j] > c.gamma && c.peak.SNR > 0
	}
	return keep
}

// nearCells is the number of quarter-chip cells the early-path threshold
// γ_near is set for: the 0.9–3 chip range before the peak and its
// neighbours, within 16 chips (see Correlations).
const nearCells = 64
