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

// Fixed-point formats: carrier phase in cycles·2^64, code phase in
// chips·2^32.
const (
	codeOne     = uint64(1) << 32
	elSpacing   = 0.25        // early/late offset δ from the prompt, chips
	elOffset    = codeOne / 4 // δ in chips·2^32
	codePeriod  = uint64(gpsca.CodeLength) << 32
	carrierBits = 12 // carrier table index bits
)

// carrierTable[k] = e^{−j2πk/4096}: the local carrier conjugate, indexed by
// the top bits of the carrier phase accumulator.
var carrierTable = func() (t [1 << carrierBits]complex64) {
	for k := range t {
		s, c := math.Sincos(-2 * math.Pi * float64(k) / float64(len(t)))
		t[k] = complex(float32(c), float32(s))
	}
	return t
}()

// channel is the tracking state of one satellite.
type channel struct {
	prn int
	// ext[i] = code[(i − 1) mod 1023] for i = 0…1024, so the early, prompt
	// and late replicas are read without wrapping.
	ext [gpsca.CodeLength + 2]float32

	carrPhase, carrStep uint64 // cycles·2^64, per sample
	codePhase, codeStep uint64 // chips·2^32, per sample
	fd                  float64

	initPhase float64 // code phase at the start sample, chips
	corrChips float64 // total DLL correction, chips

	epoch   int  // completed epochs
	partial bool // the current epoch did not start on a code epoch

	eRe, eIm, pRe, pIm, lRe, lIm float32
	prev                         complex128
	havePrev                     bool

	est   MomentCN0
	fdSum float64
}

// Tracker tracks a set of acquired satellites over consecutive sample blocks
// and estimates each one's C/N0. Memory is fixed by the number of
// satellites; Process does not allocate. A Tracker is not safe for
// concurrent use.
//
// For each satellite a numerically controlled oscillator (phase
// accumulator) generates the carrier conjugate e^{−jφ}, and a code NCO
// running at ChipRate·(1 + f_D/L1) + DLL correction (carrier-aided: code
// Doppler f_D/1540 chips/s) generates early, prompt and late replicas. The
// correlations Σ x·c(t)·e^{−jφ} are dumped on every replica code epoch
// (every 1023 chips, ≈ 1 ms) whatever the block boundaries, feeding the
// loops (see trackSchedule) and, after settleEpochs, the moment C/N0
// estimator (MomentCN0) and the Doppler average. The 1 ms prompts keep the
// estimator insensitive to data bits and to residual frequency error:
// the coherent loss sinc²(πΔf·1 ms) is below 0.04 dB for |Δf| < 50 Hz, where
// a 20 ms sum would lose 3.9 dB at 25 Hz.
type Tracker struct {
	fs       float64
	offsetHz float64
	next     int64 // next sample index expected
	ch       []channel
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
	t := &Tracker{fs: fs, offsetHz: off, next: start, ch: make([]channel, len(sats))}
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
		for k := range c.ext {
			c.ext[k] = float32(code[(k+gpsca.CodeLength-1)%gpsca.CodeLength])
		}
		c.initPhase = gpsca.WrapChips(s.CodePhaseChips)
		c.codePhase = uint64(c.initPhase * float64(codeOne))
		if c.codePhase >= codePeriod {
			c.codePhase = 0
		}
		c.partial = c.codePhase != 0
		c.fd = s.DopplerHz
		t.setSteps(c, 0)
	}
	return t, nil
}

// setSteps sets the carrier and code NCO increments from the channel's
// Doppler estimate, with corr chips of DLL correction spread over the next
// code epoch.
func (t *Tracker) setSteps(c *channel, corr float64) {
	fc := (t.offsetHz + c.fd) / t.fs // cycles per sample, |fc| < 0.5
	c.carrStep = uint64(int64(math.Round(fc * (1 << 63) * 2)))
	rate := gpsca.CodeRate(c.fd) * (1 + corr/gpsca.CodeLength)
	c.codeStep = uint64(math.Round(rate / t.fs * float64(codeOne)))
}

// Process consumes the next block of samples; firstSample is the index of
// block[0] in the capture. Blocks may have any length. A block that starts
// after the expected sample leaves a gap: the oscillators are advanced over
// it and the epochs it touches are discarded. Samples before the expected
// one (overlap, or samples before the start given to NewTracker) are
// skipped.
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
			t.skipSamples(&t.ch[i], gap)
		}
	}
	for i := range t.ch {
		t.run(&t.ch[i], block)
	}
	t.next = firstSample + int64(len(block))
}

// skipSamples advances a channel's oscillators over n unseen samples.
func (t *Tracker) skipSamples(c *channel, n int64) {
	c.carrPhase += c.carrStep * uint64(n)
	p := float64(c.codePhase)/float64(codeOne) + float64(n)*float64(c.codeStep)/float64(codeOne)
	c.codePhase = uint64(gpsca.WrapChips(p) * float64(codeOne))
	if c.codePhase >= codePeriod {
		c.codePhase = 0
	}
	c.partial = true
	c.havePrev = false
	c.eRe, c.eIm, c.pRe, c.pIm, c.lRe, c.lIm = 0, 0, 0, 0, 0, 0
}

// run correlates one channel over x, dumping at every code epoch.
func (t *Tracker) run(c *channel, x []complex64) {
	ext := &c.ext
	for len(x) > 0 {
		// Samples until the code phase reaches the end of the period.
		left := (codePeriod - c.codePhase + c.codeStep - 1) / c.codeStep
		n := len(x)
		if uint64(n) > left {
			n = int(left)
		}
		cp, cs := c.codePhase, c.codeStep
		ph, ps := c.carrPhase, c.carrStep
		eRe, eIm, pRe, pIm, lRe, lIm := c.eRe, c.eIm, c.pRe, c.pIm, c.lRe, c.lIm
		for _, v := range x[:n] {
			lo := carrierTable[ph>>(64-carrierBits)]
			ph += ps
			re := real(v)*real(lo) - imag(v)*imag(lo)
			im := real(v)*imag(lo) + imag(v)*real(lo)
			ce := ext[(cp+elOffset)>>32+1]
			cpr := ext[cp>>32+1]
			cl := ext[(cp+codeOne-elOffset)>>32]
			eRe += re * ce
			eIm += im * ce
			pRe += re * cpr
			pIm += im * cpr
			lRe += re * cl
			lIm += im * cl
			cp += cs
		}
		c.codePhase, c.carrPhase = cp, ph
		c.eRe, c.eIm, c.pRe, c.pIm, c.lRe, c.lIm = eRe, eIm, pRe, pIm, lRe, lIm
		x = x[n:]
		if c.codePhase >= codePeriod {
			c.codePhase -= codePeriod
			t.dump(c)
		}
	}
}

// dump closes one code epoch: loop updates and estimator accumulation.
func (t *Tracker) dump(c *channel) {
	p := complex(float64(c.pRe), float64(c.pIm))
	e := complex(float64(c.eRe), float64(c.eIm))
	l := complex(float64(c.lRe), float64(c.lIm))
	c.eRe, c.eIm, c.pRe, c.pIm, c.lRe, c.lIm = 0, 0, 0, 0, 0, 0
	if c.partial {
		c.partial = false
		c.havePrev = false
		return
	}
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
	corr := 0.0
	if ae, al := abs(e), abs(l); ae+al > 0 {
		corr = kc * (1 - elSpacing) * (ae - al) / (ae + al)
	}
	c.corrChips += corr
	if c.epoch >= settleEpochs {
		c.est.Add(p)
		c.fdSum += c.fd
	}
	c.prev, c.havePrev = p, true
	c.epoch++
	t.setSteps(c, corr)
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
		cn0, ok := c.est.CN0(1e-3)
		if !ok {
			continue
		}
		out = append(out, Satellite{
			System:         "GPS",
			PRN:            c.prn,
			CN0dBHz:        dB(cn0),
			DopplerHz:      c.fdSum / float64(c.est.N()),
			CodePhaseChips: gpsca.WrapChips(c.initPhase + c.corrChips),
		})
	}
	return slices.Clip(out)
}
