package gnss

import (
	"fmt"
	"math"
	"slices"

	"quietband/ingest/gpsca"
)

// Satellite is the tracking result for one satellite over a capture.
type Satellite struct {
	// System is the GNSS constellation, "GPS".
	System string
	// PRN is the satellite's C/A code number.
	PRN int
	// CN0dBHz is the estimated carrier-to-noise density ratio in dB-Hz.
	CN0dBHz float64
	// DopplerHz is the mean tracked carrier frequency minus L1 over the
	// estimation interval.
	DopplerHz float64
	// CodePhaseChips is the code phase in chips, in [0, 1023), at the
	// tracker's start sample (the snapshot start given to NewTracker),
	// refined by the delay-locked loop.
	CodePhaseChips float64
}

// Tracking loop schedule (per 1 ms code epoch, first-order loops).
//
// The frequency-locked loop updates f_D ← f_D + k_f·Δf with the
// bit-insensitive discriminator Δf = atan(Im D / Re D)/(2πT), D =
// P_k·conj(P_{k−1}); the delay-locked loop advances the code NCO by k_c·τ̂
// chips over the next epoch, τ̂ = (1 − δ)·(|E| − |L|)/(|E| + |L|), the
// normalized non-coherent early-minus-late amplitude discriminator for early
// and late replicas ±δ = ±¼ chip from the prompt, which equals the code error
// τ for the ideal triangle correlation at |τ| < δ and keeps its sign up to
// |τ| < 1 + δ. The narrow spacing halves the code-jitter variance of a
// ±½ chip pair (the variance is proportional to the spacing), which matters
// here because the prompt power loss E[(1 − |τ|)²] ≈ 1 − 2E|τ| biases C/N0
// low. A first-order loop with gain k per update T has the noise bandwidth
// B_L = k/(4T(1 − k/2)) (standard discrete-loop result): the gains below step
// down from about 40 Hz (FLL) and 26 Hz (DLL) during pull-in to about 4 Hz
// and 2.5 Hz.
var trackSchedule = []struct {
	untilEpoch int
	kf, kc     float64
}{
	{20, 0.15, 0.1},
	{60, 0.05, 0.03},
	{math.MaxInt, 0.015, 0.01},
}

// settleEpochs is the number of code epochs after the start of tracking
// that are left out of the C/N0 and Doppler estimates while the loops pull
// in from the acquisition values.
const settleEpochs = 60

// minEpochs is the fewest prompts for which Result reports a satellite.
const minEpochs = 50

// Code-rate check window (see CodeRates): the epochs of the pull-in after
// the first few, while the delay-locked loop is fast enough to follow a
// code Doppler error of up to about 20 chips/s (the ±15 kHz of a
// spectrum inverted the wrong way round, 2·15 kHz/1540) with a lag of at
// most 0.2 chip (steady-state error rate/(k_c·1 kHz) of a first-order
// loop).
const (
	rateFrom = 5
	rateTo   = settleEpochs
)

// Lock monitor: a channel whose signal is strong (an estimated S/N per
// prompt of at least lockMinSNR, 37 dB-Hz) has lost it when the mean
// power of its last lockWindow prompts falls below lockFraction of the
// mean over the estimate so far (S + N). With S/N ≥ 5 the mean of
// eight prompts of a locked signal stays above (S + N)·0.5 with
// probability better than 1 − 10⁻⁶, and a lost one (power N ≤ (S + N)/6)
// falls below 0.3·(S + N) (Gamma(8) tails, computed). Losing every
// satellite at the same sample is the mark of a sample drop or gap
// (REFERENCES §12.7), which the Meter reports.
const (
	lockWindow   = 8
	lockRing     = 16 // prompts kept per channel, for freezeAt
	lockMinSNR   = 5
	lockFraction = 0.3
	// lockSpreadMs is the largest spread (ms) of the strong channels'
	// loss samples that counts as one shared loss: each is placed within
	// an epoch or two (see freeze).
	lockSpreadMs = 3
)

// freeze marks the channel lost at the first prompt of its last
// lockWindow from which every prompt is below half the locked mean power
// S + N, and takes those prompts out of the estimate (all but the
// current one, which was not added).
func (c *channel) freeze() {
	s, n, _ := c.est.Powers()
	first := lockWindow - 1 // chronological index in the window
	for j := lockWindow - 1; j >= 0; j-- {
		if c.recent[c.ring(j)] >= 0.5*(s+n) {
			break
		}
		first = j
	}
	for j := first; j < lockWindow-1; j++ {
		c.est.remove(c.recent[c.ring(j)])
		c.fdSum -= c.recentFd[c.ring(j)]
	}
	c.lostAt = c.recentStart[c.ring(first)]
	c.corrAtLoss = c.corrChips
}

// corr returns the DLL's total correction, frozen when the loss was
// found (after it the loop follows noise).
func (c *channel) corr() float64 {
	if c.lostAt >= 0 {
		return c.corrAtLoss
	}
	return c.corrChips
}

// doppler returns the mean Doppler over the estimate's prompts, or the
// loop's current value before there are any.
func (c *channel) doppler() float64 {
	if c.est.N() > 0 {
		return c.fdSum / float64(c.est.N())
	}
	return c.fd
}

// ring returns the ring index of the j-th prompt (chronologically) of the
// last lockWindow ones, the current one being j = lockWindow − 1.
func (c *channel) ring(j int) int {
	return (c.epoch - (lockWindow - 1) + j + lockRing) % lockRing
}

// freezeAt marks a channel lost from sample at, the loss shared by the
// strong channels (see Tracker.commonLoss), and takes out of its estimate
// the prompts of the ring that began at or after it.
func (c *channel) freezeAt(at int64) {
	if c.lostAt >= 0 {
		return
	}
	if c.epoch > settleEpochs {
		for j := range min(lockRing, c.epoch-settleEpochs) {
			k := (c.epoch - 1 - j + lockRing) % lockRing
			if c.recentStart[k] >= at {
				c.est.remove(c.recent[k])
				c.fdSum -= c.recentFd[k]
			}
		}
	}
	c.lostAt = at
	c.corrAtLoss = c.corrChips
}

// lost applies the lock monitor to the channel's recent prompts.
func (c *channel) lost() bool {
	if c.epoch < settleEpochs+lockWindow || c.est.N() < 2*lockWindow {
		return false
	}
	s, n, ok := c.est.Powers()
	if !ok || s < lockMinSNR*n {
		return false
	}
	var sum float64 // over the last lockWindow prompts
	for j := range lockWindow {
		sum += c.recent[c.ring(j)]
	}
	return sum/lockWindow < lockFraction*(s+n)
}

// Fixed-point formats: carrier phase in cycles·2^64, code phase in
// chips·2^32.
const (
	codeOne     = uint64(1) << 32
	elSpacing   = 0.25        // early/late offset δ from the prompt, chips
	quarterChip = codeOne / 4 // δ in chips·2^32
	codePeriod  = uint64(gpsca.CodeLength) << 32
	carrierBits = 12 // carrier table index bits
)

// carrierTable[k] = e^{−j2πk/4096}: the local carrier conjugate, indexed by
// the top bits of a phase accumulator.
var carrierTable = func() (t [1 << carrierBits]complex64) {
	for k := range t {
		s, c := math.Sincos(-2 * math.Pi * float64(k) / float64(len(t)))
		t[k] = complex(float32(c), float32(s))
	}
	return t
}()

// Carrier groups: the local carrier is held constant over groups of G
// consecutive chips, G = min(16, ⌊0.02·R_c/|f_D|⌋) (at least 1), so that
// the carrier turns by at most 0.02 cycle over a group. A signal at f_D
// then keeps the amplitude sinc(f_D·G/R_c) ≥ sinc(0.02), a power loss of at
// most 0.0057 dB (the mean of e^{j2πf_D t} over the group, computed);
// G = 4 at 5 kHz, G = 1 above 20.5 kHz.
const (
	maxGroupChips = 16
	groupCycles   = 0.02
)

// chunkLen is the number of input samples the front end adds to the prefix
// buffer per pass.
const chunkLen = 8192

// channel is the tracking state of one satellite.
type channel struct {
	prn int
	// ext[i] = c_{(i−1) mod 1023} for i = 0…1024: chip j is ext[j+1] and
	// its predecessor ext[j], for j = 0…1023, without wrapping.
	ext [gpsca.CodeLength + 2]float64
	// trans[i] are the chip edges j = 0…1023 where the code changes,
	// c_{j−1} ≠ c_j (indices mod 1023), ascending, followed by a sentinel;
	// wt[i] = c_{j−1} − c_j = ±2 is the change.
	trans  [gpsca.CodeLength + 2]int32
	wt     [gpsca.CodeLength + 2]float64
	trans0 int // index of the first transition after chip edge 0

	// Code NCO: phase cp0 (chips·2^32) at sample n0, advancing cs per sample;
	// the carrier NCO (Doppler only, L1 − fc is removed by the front end):
	// phase ph0 (cycles·2^64) at n0, advancing ps per sample. n0 is the
	// first sample of the current epoch, where 0 ≤ cp0 < cs, unless the
	// epoch is partial.
	n0      int64
	cp0, cs uint64
	ph0, ps uint64
	// Chip edge times: edge j + x of the epoch (j whole, x = −¼, 0, ¼) is
	// at t = j·spc + (x·2^32 − cp0)/cs samples after n0, spc = 2^32/cs, and
	// its first sample is b = n0 + ⌊t⌋ + 1 = n0 + ⌊j·spc + o_x⌋ with the
	// offsets oE, oP, oL (see edges). rEnd = b(1023) − n0, exact.
	spc        float64
	oE, oP, oL float64
	rEnd       int64
	group      int // chips per carrier group
	fd         float64

	initPhase float64 // code phase at the start sample, chips
	corrChips float64 // total DLL correction, chips

	epoch   int  // completed epochs
	partial bool // the current epoch did not start on a code epoch

	// Progress through the epoch: the current carrier group starts at chip
	// edge g0, sample nP = b(g0), where the input prefix sum is sP; open
	// tells whether its opening term is in; ti indexes the next transition;
	// aE, aP, aL are the group's unrotated sums.
	g0, ti           int
	open             bool
	nP               int64
	sP               complex128
	aE, aP, aL       complex128
	eAcc, pAcc, lAcc complex128
	prev             complex128
	havePrev         bool

	est   MomentCN0
	fdSum float64

	// Lock monitor (see lockWindow): the last lockRing prompt powers
	// and the sample where each epoch began; lostAt is the first sample
	// of the window in which lock was lost (−1 while locked), after which
	// the estimates are frozen.
	corrAtLoss  float64 // corrChips when the loss was found
	recent      [lockRing]float64
	recentFd    [lockRing]float64
	recentStart [lockRing]int64
	lostAt      int64

	// Code-rate regression over epochs rateFrom … rateTo − 1: least-squares
	// sums of the code phase φ_k = corrChips + τ̂_k (chips, relative to
	// the carrier-aided NCO) against the epoch index k (see CodeRates).
	rate   lineFit
	fdRate float64 // Doppler estimate at the end of the regression

	// The same regression from epoch rateFrom to the end of the lock
	// (see ChannelState.DriftErr): the epochs of the last lockRing are
	// held in drift* until no loss of lock can reach back to them.
	drift      lineFit
	driftPhi   [lockRing]float64
	driftStart [lockRing]int64
	driftOK    [lockRing]bool
}

// lineFit holds the least-squares sums of a straight line y = a + b·k.
type lineFit struct {
	n, k, y, kk, ky, yy float64
}

func (f *lineFit) add(k, y float64) {
	f.n++
	f.k += k
	f.y += y
	f.kk += k * k
	f.ky += k * y
	f.yy += y * y
}

// slope returns the fitted b and its variance from the residuals
// (ordinary least squares); ok is false with fewer than ten points.
func (f *lineFit) slope() (b, v float64, ok bool) {
	n := f.n
	if n < 10 {
		return 0, 0, false
	}
	skk := f.kk - f.k*f.k/n
	sky := f.ky - f.k*f.y/n
	syy := f.yy - f.y*f.y/n
	if !(skk > 0) {
		return 0, 0, false
	}
	b = sky / skk
	res := max(syy-b*sky, 0) / (n - 2)
	return b, res / skk, true
}

// Tracker tracks a set of acquired satellites over consecutive sample blocks
// and estimates each one's C/N0. Memory is fixed by the number of
// satellites and the sample rate; Process does not allocate. A Tracker is
// not safe for concurrent use.
//
// For each satellite a code NCO running at ChipRate·(1 + f_D/L1) + DLL
// correction (carrier-aided: code Doppler f_D/1540 chips/s) defines early,
// prompt and late replicas (±¼ chip), and a carrier NCO the carrier
// conjugate e^{−jφ}. The correlations Σ x·c(t)·e^{−jφ} are dumped on every
// replica code epoch (every 1023 chips, ≈ 1 ms) whatever the block
// boundaries, feeding the loops (see trackSchedule) and, after
// settleEpochs, the moment C/N0 estimator (MomentCN0) and the Doppler
// average. The 1 ms prompts keep the estimator insensitive to data bits and
// to residual frequency error: the coherent loss sinc²(πΔf·1 ms) is below
// 0.04 dB for |Δf| < 50 Hz, where a 20 ms sum would lose 3.9 dB at 25 Hz.
//
// The correlators run at the chip rate, not the sample rate. A front end
// shared by all satellites mixes the input to L1 (e^{−j2π(L1−fc)t}, from a
// 4096-entry table) and keeps the running sum S[n] = Σ_{m<n} x[m]
// (complex128). A replica c_X is constant between its change points, so by
// summation by parts its correlation over a span [g0, g1) of code phase is
//
//	X = c_X(g1⁻)·S[b(g1)] − c_X(g0)·S[b(g0)] + Σ_j (c_{j−1} − c_j)·S[b(j + x)],
//
// b(φ) being the first sample whose code NCO phase reaches φ chips (the
// same sample-to-chip assignment as a per-sample correlator), j running
// over the code transitions inside the span (about 511 per period), and
// x = −¼, 0, +¼ for the early, prompt and late replica. That is three
// look-ups per transition, about 1.6 per chip, in place of three
// multiply-adds per sample. The carrier is applied once per group of chips
// (see groupCycles), at the group's middle sample, from the same table;
// it costs at most 0.0057 dB of signal power for |f_D| ≤ 20 kHz
// (sinc²(f_D/R_c) with single-chip groups beyond, 0.034 dB at 50 kHz).
// TestTrackCorrelator checks the result against the per-sample sums.
type Tracker struct {
	fs       float64
	offsetHz float64
	start    int64 // first sample: phase origin of the front-end mixer
	next     int64 // next sample index expected
	ch       []channel

	conj     bool         // conjugate the input (an inverted spectrum), see SetConjugate
	mixStep  uint64       // (L1 − fc)/fs in cycles·2^64 per sample; 0: no mixing
	pre      []complex128 // pre[i] = S[bufStart + i]
	nPre     int          // valid entries of pre
	bufStart int64
	sum      complex128 // S[bufStart + nPre − 1]
	// The sum before the current group of four samples and the sum within
	// it (see frontEnd).
	base, part complex128

	// shared is the sample of a loss of lock shared by every strong
	// channel (see commonLoss), −1 if none.
	shared int64

	// epochHook, if set (by tests), sees every complete epoch before the
	// loop updates, with the channel's NCO state of that epoch.
	epochHook func(c *channel)
}

// NewTracker returns a Tracker for the given satellites in a capture sampled
// at fs and centred at centerHz. start is the sample index (in the
// numbering used by Process) at which each Acquired.CodePhaseChips holds,
// usually the first sample of the acquisition snapshot. It returns an error
// wrapping ErrL1NotInBand if L1 is outside the capture band and an error for
// a satellite without a C/A code.
func NewTracker(fs, centerHz float64, sats []Acquired, start int64) (*Tracker, error) {
	off, err := checkBand(fs, centerHz)
	if err != nil {
		return nil, err
	}
	// History kept in the prefix buffer: a channel needs the sums from the
	// start of its current carrier group on, at most maxGroupChips + ¼
	// chips (the code rate is at least 0.9·ChipRate for any accepted
	// Doppler and DLL correction), plus margin.
	hist := int(math.Ceil((maxGroupChips+0.5)*fs/(0.9*gpsca.ChipRate))) + 4
	t := &Tracker{
		fs: fs, offsetHz: off, start: start, next: start,
		ch:       make([]channel, len(sats)),
		mixStep:  phaseStep(off / fs),
		shared:   -1,
		pre:      make([]complex128, chunkLen+hist),
		nPre:     1,
		bufStart: start,
	}
	for i, s := range sats {
		code, err := gpsca.Code(s.PRN)
		if err != nil {
			return nil, fmt.Errorf("gnss: tracker: %w", err)
		}
		if math.IsNaN(s.DopplerHz) || math.Abs(s.DopplerHz) > 50e3 || math.IsNaN(s.CodePhaseChips) || math.IsInf(s.CodePhaseChips, 0) {
			return nil, fmt.Errorf("gnss: tracker: PRN %d: invalid start values Doppler %v Hz, code phase %v chips", s.PRN, s.DopplerHz, s.CodePhaseChips)
		}
		c := &t.ch[i]
		c.prn = s.PRN
		for i := range c.ext {
			c.ext[i] = float64(code[(i+gpsca.CodeLength-1)%gpsca.CodeLength])
		}
		n := 0
		for j := 0; j <= gpsca.CodeLength; j++ {
			if w := c.ext[j] - c.ext[j+1]; w != 0 {
				c.trans[n], c.wt[n] = int32(j), w
				n++
			}
		}
		c.trans[n] = 2 * gpsca.CodeLength
		if c.trans[0] == 0 {
			c.trans0 = 1
		}
		c.initPhase = gpsca.WrapChips(s.CodePhaseChips)
		c.n0 = start
		c.cp0 = uint64(c.initPhase * float64(codeOne))
		if c.cp0 >= codePeriod {
			c.cp0 = 0
		}
		c.partial = c.cp0 != 0
		c.nP, c.ti = start, c.trans0
		c.fd = s.DopplerHz
		c.lostAt = -1
		t.setSteps(c, 0)
	}
	return t, nil
}

// SetConjugate makes the tracker correlate conj(x) instead of x: the
// capture's spectrum is inverted (I and Q swapped, or a high-side LO;
// REFERENCES §12.2), so conj(x) is the upright signal, L1 at −(L1 − fc)
// in x. The satellites given to NewTracker must then carry the Doppler of
// the upright signal. Call it before the first Process.
func (t *Tracker) SetConjugate(conj bool) { t.conj = conj }

// phaseStep returns f cycles per sample (|f| < ½) as a cycles·2^64 step.
func phaseStep(f float64) uint64 { return uint64(int64(math.Round(f * (1 << 63) * 2))) }

// setSteps sets the carrier and code NCO increments from the channel's
// Doppler estimate, with corr chips of DLL correction spread over the next
// code epoch.
func (t *Tracker) setSteps(c *channel, corr float64) {
	c.ps = phaseStep(c.fd / t.fs)
	rate := gpsca.CodeRate(c.fd) * (1 + corr/gpsca.CodeLength)
	c.cs = uint64(math.Round(rate / t.fs * float64(codeOne)))
	c.edges()
	c.group = maxGroupChips
	if f := math.Abs(c.fd); f*maxGroupChips > groupCycles*rate {
		c.group = max(1, int(groupCycles*rate/f))
	}
}

// Process consumes the next block of samples; firstSample is the index of
// block[0] in the capture. Blocks may have any length. A block that starts
// after the expected sample leaves a gap: the oscillators are advanced over
// it and the epochs it touches are discarded. Samples before the expected
// one (overlap, or samples before the start given to NewTracker) are
// skipped. The result does not depend on how the capture is cut into
// blocks.
func (t *Tracker) Process(block []complex64, firstSample int64) {
	if firstSample < t.next {
		skip := t.next - firstSample
		if skip >= int64(len(block)) {
			return
		}
		block = block[skip:]
		firstSample = t.next
	}
	if gap := firstSample - t.next; gap > 0 {
		for i := range t.ch {
			t.skipTo(&t.ch[i], firstSample)
		}
		t.bufStart, t.nPre = firstSample, 1
		t.pre[0] = t.sum
		t.base, t.part = t.sum, 0
	}
	t.next = firstSample + int64(len(block))
	for len(block) > 0 {
		t.compact()
		m := min(len(block), len(t.pre)-t.nPre)
		if m == 0 {
			panic("gnss: tracker prefix buffer full")
		}
		t.frontEnd(block[:m], firstSample)
		block, firstSample = block[m:], firstSample+int64(m)
		for i := range t.ch {
			t.run(&t.ch[i])
		}
		t.commonLoss()
	}
}

// commonLoss freezes every channel when the strong ones have all lost
// lock at the same time (at least two, within lockSpreadMs): the capture
// lost samples there (REFERENCES §12.7), so the weak channels' prompts
// after it are noise too, although their own monitor cannot tell. Those
// prompts, as far back as the ring reaches, leave their estimates.
func (t *Tracker) commonLoss() {
	if t.shared >= 0 {
		return
	}
	var lo, hi int64 = math.MaxInt64, -1
	lost := 0
	for i := range t.ch {
		c := &t.ch[i]
		switch {
		case c.lostAt >= 0:
			lost++
			lo, hi = min(lo, c.lostAt), max(hi, c.lostAt)
		case c.strong():
			return // a strong satellite kept its lock
		}
	}
	if lost < 2 || float64(hi-lo) > lockSpreadMs*1e-3*t.fs {
		return
	}
	var at []int64
	for i := range t.ch {
		if c := &t.ch[i]; c.lostAt >= 0 {
			at = append(at, c.lostAt)
		}
	}
	slices.Sort(at)
	t.shared = at[len(at)/2]
	for i := range t.ch {
		t.ch[i].freezeAt(t.shared)
	}
}

// strong reports whether the channel's estimate so far has the S/N per
// prompt the lock monitor watches (lockMinSNR).
func (c *channel) strong() bool {
	if c.est.N() < 2*lockWindow {
		return false
	}
	s, n, ok := c.est.Powers()
	return ok && s >= lockMinSNR*n
}

// SharedLoss returns the sample where every strongly tracked satellite
// lost lock at once (see commonLoss), and whether that happened.
func (t *Tracker) SharedLoss() (int64, bool) { return t.shared, t.shared >= 0 }

// compact drops the prefix entries no channel needs any more: those before
// the start of every running channel's current chip.
func (t *Tracker) compact() {
	need := t.bufStart + int64(t.nPre) - 1
	for i := range t.ch {
		if c := &t.ch[i]; !c.partial && c.nP < need {
			need = c.nP
		}
	}
	if drop := int(need - t.bufStart); drop > 0 {
		copy(t.pre, t.pre[drop:t.nPre])
		t.nPre -= drop
		t.bufStart = need
	}
}

// frontEnd mixes x (whose first sample has index first) to L1 and appends
// its running sums to the prefix buffer.
//
// The running sum is formed in groups of four samples aligned on the
// sample index, S = base + ((v0 + v1) + v2) + v3 with base the sum before
// the group, so that the serial dependency is one addition per four samples
// and the rounding, hence the result, does not depend on how the input is
// cut into blocks.
func (t *Tracker) frontEnd(x []complex64, first int64) {
	pre := t.pre[t.nPre : t.nPre+len(x)]
	base, part := t.base, t.part
	pos := int((first - t.start) & 3)
	step := t.mixStep
	ph := uint64(first-t.start) * step
	conj := t.conj
	mix := func(v complex64) complex128 {
		if conj {
			v = complex(real(v), -imag(v))
		}
		if step == 0 {
			return complex128(v)
		}
		lo := carrierTable[ph>>(64-carrierBits)]
		ph += step
		return complex(float64(real(v)*real(lo)-imag(v)*imag(lo)), float64(real(v)*imag(lo)+imag(v)*real(lo)))
	}
	add := func(i int, v complex128) {
		if pos == 0 {
			part = v
		} else {
			part += v
		}
		if pos == 3 {
			base += part
			pre[i] = base
		} else {
			pre[i] = base + part
		}
		pos = (pos + 1) & 3
	}
	i := 0
	for ; i < len(x) && pos != 0; i++ {
		add(i, mix(x[i]))
	}
	n4 := i + (len(x)-i)&^3
	if step == 0 && !conj {
		for ; i < n4; i += 4 {
			q := pre[i : i+4 : i+4]
			v := x[i : i+4 : i+4]
			p0 := complex128(v[0])
			p1 := p0 + complex128(v[1])
			p2 := p1 + complex128(v[2])
			p3 := p2 + complex128(v[3])
			q[0], q[1], q[2] = base+p0, base+p1, base+p2
			base += p3
			q[3] = base
		}
	} else {
		for ; i < n4; i += 4 {
			q := pre[i : i+4 : i+4]
			v := x[i : i+4 : i+4]
			p0 := mix(v[0])
			p1 := p0 + mix(v[1])
			p2 := p1 + mix(v[2])
			p3 := p2 + mix(v[3])
			q[0], q[1], q[2] = base+p0, base+p1, base+p2
			base += p3
			q[3] = base
		}
	}
	for ; i < len(x); i++ {
		add(i, mix(x[i]))
	}
	t.base, t.part = base, part
	if len(pre) > 0 {
		t.sum = pre[len(pre)-1]
	}
	t.nPre += len(x)
}

// skipTo moves a channel's oscillators to sample n after a gap and marks
// its epoch partial.
func (t *Tracker) skipTo(c *channel, n int64) {
	d := n - c.n0
	p := float64(c.cp0)/float64(codeOne) + float64(d)*float64(c.cs)/float64(codeOne)
	c.cp0 = uint64(gpsca.WrapChips(p) * float64(codeOne))
	if c.cp0 >= codePeriod {
		c.cp0 = 0
	}
	c.ph0 += uint64(d) * c.ps
	c.n0 = n
	c.partial = true
	c.havePrev = false
	c.edges()
}

// edges sets the chip edge times of the current epoch from the code NCO.
func (c *channel) edges() {
	inv := 1 / float64(c.cs)
	cp := float64(c.cp0)
	c.spc = float64(codeOne) * inv
	c.oE = (-float64(quarterChip)-cp)*inv + 1
	c.oP = -cp*inv + 1
	c.oL = (float64(quarterChip)-cp)*inv + 1
	c.rEnd = c.boundary(codePeriod) - c.n0
}

// boundary returns the first sample at or after n0 whose code phase
// reaches th (chips·2^32), by the exact integer test of the code NCO.
func (c *channel) boundary(th uint64) int64 {
	if th <= c.cp0 {
		return c.n0
	}
	return c.n0 + int64((th-c.cp0+c.cs-1)/c.cs)
}

// beginEpoch starts a new epoch at sample n (the boundary where the code
// phase reaches a full period), where the prefix sum is s.
func (c *channel) beginEpoch(n int64, s complex128) {
	d := uint64(n - c.n0)
	c.cp0 = c.cp0 + d*c.cs - codePeriod
	c.ph0 += d * c.ps
	c.n0 = n
	c.g0, c.ti, c.open, c.nP, c.sP = 0, c.trans0, false, n, s
	c.edges()
	c.aE, c.aP, c.aL = 0, 0, 0
	c.eAcc, c.pAcc, c.lAcc = 0, 0, 0
}

// run advances one channel through the prefix buffer, dumping at every
// code epoch.
func (t *Tracker) run(c *channel) {
	base := t.bufStart
	pre := t.pre[:t.nPre]
	end := base + int64(len(pre)) - 1 // last boundary with a prefix sum
	for {
		if c.partial {
			// Nothing of a partial epoch is used: jump to its end.
			n := c.boundary(codePeriod)
			if n > end {
				return
			}
			c.beginEpoch(n, pre[n-base])
			c.partial, c.havePrev = false, false
			continue
		}
		if !c.chips(pre, base, end) {
			return
		}
		t.dump(c)
	}
}

// chips accumulates the channel's correlators as far as the prefix sums
// reach (pre[i] = S[base + i], up to sample end) and reports whether the
// epoch is complete.
//
// A replica that is constant between its change points reduces to them by
// summation by parts: over a carrier group spanning code phase [g0, g1),
//
//	X = c_X(g1⁻)·S[b(g1)] − c_X(g0)·S[b(g0)] + Σ_j (c_{j−1} − c_j)·S[b(j + x)],
//
// the sum running over the code transitions j whose change point j + x
// lies inside the group, x = −¼ for the early replica (chip ⌊φ + ¼⌋), 0 for
// the prompt and +¼ for the late one. So each transition costs three
// prefix look-ups and each group edge one to three, about 1.6 look-ups per
// chip and satellite, whatever the sample rate.
func (c *channel) chips(pre []complex128, base, end int64) bool {
	ext, trans, wt := &c.ext, &c.trans, &c.wt
	off := c.n0 - base
	lim := end - c.n0
	spc, oE, oP, oL := c.spc, c.oE, c.oP, c.oL
	g0, ti, open, group := c.g0, c.ti, c.open, c.group
	r0 := c.nP - c.n0
	s0r, s0i := real(c.sP), imag(c.sP)
	aEr, aEi, aPr, aPi, aLr, aLi := real(c.aE), imag(c.aE), real(c.aP), imag(c.aP), real(c.aL), imag(c.aL)
	done := false
	for {
		if !open {
			// Opening terms −c_X(g0)·S[b(g0)], and the late change at
			// g0 + ¼ if the code changes at g0.
			if w := ext[g0] - ext[g0+1]; w != 0 {
				r := int64(float64(g0)*spc + oL)
				if r > lim {
					break
				}
				s := pre[r+off]
				aLr += w * real(s)
				aLi += w * imag(s)
			}
			cg0, cg0m := ext[g0+1], ext[g0]
			aEr -= cg0 * s0r
			aEi -= cg0 * s0i
			aPr -= cg0 * s0r
			aPi -= cg0 * s0i
			aLr -= cg0m * s0r
			aLi -= cg0m * s0i
			open = true
		}
		g1 := min(g0+group, gpsca.CodeLength)
		// Transitions inside the group.
		for {
			j := int(trans[ti])
			if j >= g1 {
				break
			}
			fj := float64(j) * spc
			rL := int64(fj + oL)
			if rL > lim {
				break
			}
			rE, rP := int64(fj+oE), int64(fj+oP)
			w := wt[ti]
			sE, sP, sL := pre[rE+off], pre[rP+off], pre[rL+off]
			aEr += w * real(sE)
			aEi += w * imag(sE)
			aPr += w * real(sP)
			aPi += w * imag(sP)
			aLr += w * real(sL)
			aLi += w * imag(sL)
			ti++
		}
		if int(trans[ti]) < g1 {
			break // out of samples
		}
		// Closing terms c_X(g1⁻)·S[b(g1)], and the early change at g1 − ¼
		// if the code changes at g1.
		r1 := c.rEnd
		if g1 < gpsca.CodeLength {
			r1 = int64(float64(g1)*spc + oP)
		}
		if r1 > lim {
			break
		}
		s1 := pre[r1+off]
		if w := ext[g1] - ext[g1+1]; w != 0 {
			s := pre[int64(float64(g1)*spc+oE)+off]
			aEr += w * real(s)
			aEi += w * imag(s)
			if trans[ti] == int32(g1) {
				ti++
			}
		}
		cg1, cg1m := ext[g1+1], ext[g1]
		aEr += cg1 * real(s1)
		aEi += cg1 * imag(s1)
		aPr += cg1m * real(s1)
		aPi += cg1m * imag(s1)
		aLr += cg1m * real(s1)
		aLi += cg1m * imag(s1)
		// Carrier at the group's middle sample.
		lo := carrierTable[(c.ph0+uint64((r0+r1)/2)*c.ps)>>(64-carrierBits)]
		hr, hi := float64(real(lo)), float64(imag(lo))
		c.eAcc += complex(aEr*hr-aEi*hi, aEr*hi+aEi*hr)
		c.pAcc += complex(aPr*hr-aPi*hi, aPr*hi+aPi*hr)
		c.lAcc += complex(aLr*hr-aLi*hi, aLr*hi+aLi*hr)
		aEr, aEi, aPr, aPi, aLr, aLi = 0, 0, 0, 0, 0, 0
		g0, r0, s0r, s0i, open = g1, r1, real(s1), imag(s1), false
		if g1 == gpsca.CodeLength {
			done = true
			break
		}
	}
	c.g0, c.ti, c.open = g0, ti, open
	c.nP, c.sP = r0+c.n0, complex(s0r, s0i)
	c.aE, c.aP, c.aL = complex(aEr, aEi), complex(aPr, aPi), complex(aLr, aLi)
	return done
}

// dump closes one complete code epoch: loop updates, estimator
// accumulation and the start of the next epoch.
func (t *Tracker) dump(c *channel) {
	if t.epochHook != nil {
		t.epochHook(c)
	}
	p, e, l := c.pAcc, c.eAcc, c.lAcc
	kf, kc := 0.0, 0.0
	for _, s := range trackSchedule {
		if c.epoch < s.untilEpoch {
			kf, kc = s.kf, s.kc
			break
		}
	}
	const T = 1e-3
	if c.havePrev {
		d := p * complex(real(c.prev), -imag(c.prev))
		if real(d) != 0 {
			c.fd += kf * math.Atan(imag(d)/real(d)) / (2 * math.Pi * T)
		}
	}
	corr, phi, phiOK := 0.0, 0.0, false
	if ae, al := abs(e), abs(l); ae+al > 0 {
		tau := (1 - elSpacing) * (ae - al) / (ae + al)
		corr = kc * tau
		phi, phiOK = c.corrChips+tau, true
		if c.epoch >= rateFrom && c.epoch < rateTo {
			c.rate.add(float64(c.epoch), phi)
			c.fdRate = c.fd
		}
	}
	c.corrChips += corr
	if c.epoch >= settleEpochs && c.lostAt < 0 {
		pw := real(p)*real(p) + imag(p)*imag(p)
		i := c.epoch % lockRing
		c.recent[i], c.recentFd[i], c.recentStart[i] = pw, c.fd, c.n0
		if c.lost() {
			c.freeze()
		} else {
			c.est.Add(p)
			c.fdSum += c.fd
		}
	}
	if c.epoch >= rateFrom {
		// The entry leaving the ring is epoch − lockRing: no loss of
		// lock found from now on reaches back to it (see freezeAt).
		i := c.epoch % lockRing
		if c.epoch >= rateFrom+lockRing {
			c.driftCommit(&c.drift, c.epoch-lockRing)
		}
		c.driftPhi[i], c.driftStart[i], c.driftOK[i] = phi, c.n0, phiOK
	}
	c.prev, c.havePrev = p, true
	c.epoch++
	c.beginEpoch(c.nP, c.sP)
	t.setSteps(c, corr)
}

// driftCommit adds epoch j of the drift ring to f if it has a code phase
// and began before the loss of lock, if any.
func (c *channel) driftCommit(f *lineFit, j int) {
	i := j % lockRing
	if c.driftOK[i] && (c.lostAt < 0 || c.driftStart[i] < c.lostAt) {
		f.add(float64(j), c.driftPhi[i])
	}
}

// Result returns the current estimates, one per satellite with at least 50
// prompts after the pull-in interval and a valid moment estimate, in the
// order given to NewTracker.
//
// Noise floor: without a signal, the S² estimate 2U − M4 of MomentCN0 has
// mean 0 and standard deviation 2N²/√K (delta method with the exponential
// moments of |noise|², computed), so a channel that has lost its satellite
// reads S/N = √h/(1 − √h) with h ≈ 2z/√K: up to about 33 dB-Hz at the
// 1e-3 level (z = 3.09) with the K ≈ 190 prompts of 0.25 s, 29 dB-Hz with
// the K ≈ 940 of 1 s. Readings below that floor mean "no usable signal".
func (t *Tracker) Result() []Satellite {
	var out []Satellite
	for i := range t.ch {
		c := &t.ch[i]
		if c.est.N() < minEpochs {
			continue
		}
		cn0, ok := c.est.CN0dB(1e-3)
		if !ok {
			continue
		}
		out = append(out, Satellite{
			System:         "GPS",
			PRN:            c.prn,
			CN0dBHz:        cn0,
			DopplerHz:      c.doppler(),
			CodePhaseChips: gpsca.WrapChips(c.initPhase + c.corr()),
		})
	}
	return slices.Clip(out)
}

// ChannelState is the state of one tracking channel (see Tracker.Channels).
type ChannelState struct {
	PRN int
	// Epochs is the number of code epochs (≈ 1 ms) dumped so far.
	Epochs int
	// Prompts is the number of prompts in the C/N0 estimate (epochs after
	// the pull-in).
	Prompts int
	// DopplerHz is the mean carrier Doppler over the C/N0 estimate's
	// prompts, or the loop's current value before there are any.
	DopplerHz float64
	// CodePhaseChips is the code phase at the tracker's start sample,
	// refined by the delay-locked loop so far.
	CodePhaseChips float64
	// CodeRateErr is the code Doppler measured over the pull-in minus the
	// carrier-aided one, f_D/1540 chips/s (REFERENCES §11.4), in chips/s:
	// the slope of a least-squares line through the code phase the loop
	// followed, φ_k = (DLL corrections up to epoch k) + τ̂_k, over epochs
	// 5 … 59. CodeRateVar is its variance from the line's residuals, and
	// CodeRateDopplerHz the carrier Doppler at the end of that window.
	// CodeRateVar is 0 when fewer than ten epochs were seen.
	CodeRateErr, CodeRateVar, CodeRateDopplerHz float64
	// DriftErr is the same line's slope fitted from epoch 5 to the
	// last epoch in lock (DriftEpochs epochs), DriftVar its variance:
	// the code's drift against the carrier-aided NCO over the whole
	// track, 0 within its standard error for a satellite's signal (see
	// Meter: a correlation that stands still in the receiver's time
	// drifts by −f_D/1540 chips/s). DriftVar is 0 with fewer than ten
	// epochs.
	DriftErr, DriftVar float64
	DriftEpochs        int
	// CN0dBHz is the moment estimate over the prompts so far
	// (MomentCN0.CN0dB), when CN0OK.
	CN0dBHz float64
	CN0OK   bool
	// LostAt is the first sample of the window of prompts in which the
	// lock monitor found the signal lost (see lockWindow), −1 while
	// locked; the estimates stop there.
	LostAt int64
}

// Channels returns the state of every channel, in the order given to
// NewTracker.
func (t *Tracker) Channels() []ChannelState {
	out := make([]ChannelState, len(t.ch))
	for i := range t.ch {
		c := &t.ch[i]
		st := ChannelState{PRN: c.prn, Epochs: c.epoch, Prompts: c.est.N(), DopplerHz: c.doppler(),
			CodePhaseChips: gpsca.WrapChips(c.initPhase + c.corr()), CodeRateDopplerHz: c.fdRate, LostAt: c.lostAt}
		st.CN0dBHz, st.CN0OK = c.est.CN0dB(1e-3)
		// An epoch is one code period, 1 ms·(1 − f_D/L1): 1 ms within
		// 10⁻⁵, so chips per epoch are 10³ chips/s.
		if b, v, ok := c.rate.slope(); ok {
			st.CodeRateErr, st.CodeRateVar = b*1e3, v*1e6
		}
		drift := c.drift
		for j := max(rateFrom, c.epoch-lockRing); j < c.epoch; j++ {
			c.driftCommit(&drift, j)
		}
		if b, v, ok := drift.slope(); ok {
			st.DriftErr, st.DriftVar, st.DriftEpochs = b*1e3, v*1e6, int(drift.n)
		}
		out[i] = st
	}
	return out
}
