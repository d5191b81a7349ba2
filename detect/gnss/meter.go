package gnss

import (
	"fmt"
	"math"
	"slices"

	"quietband/ingest/gpsca"
)

// Measurement methods of a Measured satellite.
const (
	MethodTracked  = "tracked"
	MethodAcquired = "acquired"
)

// Measured is one satellite measured by a Meter. Doppler and code phase
// are those of the upright signal (after undoing a spectrum inversion).
type Measured struct {
	PRN            int
	CN0dBHz        float64
	DopplerHz      float64
	CodePhaseChips float64 // at the capture's first sample
	// Method is MethodTracked (C/N0 from the tracking loops' prompts) or
	// MethodAcquired (from the acquisition peak only, see acquiredCN0).
	Method string
}

// Measurement is what a Meter measured in one capture.
type Measurement struct {
	Satellites []Measured // ascending PRN
	// ClockOffsetHz is the receiver's common Doppler offset (see
	// ClockOffset); HasClock is false when no satellite was measured.
	ClockOffsetHz float64
	HasClock      bool
	// Inverted is the spectrum orientation: true or false when the
	// satellites determined it (or MeterConfig.Inverted forced it), nil
	// when it could not be determined.
	Inverted *bool
	// Unmeasured, when not empty, says why the site's C/N0 was not
	// measured on this capture (too short to track, no snapshot, all
	// zeros): a C/N0 comparison must not use it.
	Unmeasured string
	// Notes are plain sentences naming every stage not run (or not run in
	// full) and why.
	Notes []string
	// Mitigation is what interference mitigation removed from the
	// acquisition snapshot.
	Mitigation MitigationStats
	// DropSample, when HasDrop, is where every strongly tracked satellite
	// lost lock at once (within lockSpreadMs): the mark of a sample drop
	// or a gap in the recording (REFERENCES §12.7: a drop shifts every
	// code phase by the same amount at the same instant), for a "gap"
	// front-end fault (see Tracker.SharedLoss).
	DropSample int64
	HasDrop    bool
	// WideSearch tells whether acquisition searched the whole receiver
	// clock range (±(DopplerMaxHz + ClockMaxHz)) rather than the narrow
	// window around the site's known clock offset.
	WideSearch bool
	// Correlations are the acquired PRNs that showed a second
	// correlation peak (Acquirer.Correlations: a spoofer's or a meacon's
	// copy beside the authentic signal), with Dopplers in the upright
	// orientation; nil when none did.
	Correlations []Correlation
	// InBandPowerDB is the power of the acquisition snapshot within
	// ±1.023 MHz of L1 (the C/A main lobe), before mitigation, in dB of
	// full scale (Mitigator.SetBand); HasInBand is false when it was not
	// measured.
	InBandPowerDB float64
	HasInBand     bool
	// CodeRates are the tracked satellites' code Doppler against their
	// carrier Doppler over the pull-in (REFERENCES §11.4).
	CodeRates []CodeRate
	// Standing are the acquired PRNs not reported because their code
	// stood still in the receiver's time while their carrier showed a
	// Doppler (see standingCode): the correlation of a periodic
	// interferer (or of a generator without code Doppler), not a
	// satellite. ErrChipsS is the code's drift over the whole track
	// against the carrier-aided NCO (ChannelState.DriftErr).
	Standing []CodeRate
}

// CodeRate is one satellite's code Doppler measured over the tracking
// loops' pull-in minus the carrier-aided one, f_D/1540 chips/s
// (ChannelState.CodeRateErr): 0 within its standard error for a signal
// whose code and carrier come from one oscillator (REFERENCES §11.4).
type CodeRate struct {
	PRN int
	// ErrChipsS is the mismatch in chips/s, SigmaChipsS its standard
	// error from the regression's residuals.
	ErrChipsS, SigmaChipsS float64
}

// MeterConfig configures a Meter. Zero fields take their defaults.
type MeterConfig struct {
	// Acq configures acquisition (see AcqConfig). Its Pfa is the
	// false-alarm probability of one PRN search.
	Acq AcqConfig
	// Inverted, when set, forces the spectrum orientation (true: the
	// capture's spectrum is inverted, I and Q swapped; REFERENCES §12.2)
	// instead of deciding it from the satellites.
	Inverted *bool
	// NarrowHz, when set, is the one-sided Doppler window searched
	// around the site's clock offset once it is known. By default the
	// window is the one the satellites last measured bound (see
	// Meter.narrowWindow).
	NarrowHz float64
}

// Meter measures the GPS L1 C/A satellites of captures, one capture at a
// time, block by block; it keeps what it learned about the site (the
// receiver clock offset, the spectrum orientation) from capture to
// capture of one input.
//
// Per capture:
//
//  1. Acquisition on the first snapshot (10 ms by default) after
//     interference mitigation (Mitigator: excision, short-time excision,
//     pulse blanking), over the whole receiver-clock range while the
//     site's clock offset is unknown (±15 kHz by default), then within
//     the window the site's last satellites bound (narrowWindow; falling
//     back to the whole range when the narrow search finds fewer than
//     half the satellites the site had).
//  2. Tracking (Tracker) of the acquired satellites on the samples as they
//     are (an ordinary receiver's view: effective C/N0), in the site's
//     orientation (upright until known).
//  3. The spectrum orientation from the satellites themselves, at the end
//     of the pull-in (60 ms): code Doppler has the sign of carrier
//     Doppler/1540 at L1 (REFERENCES §11.4); the carrier-aided code NCO of
//     a tracker in the wrong orientation runs 2·f_D/1540 chips/s off, which
//     its delay-locked loop follows. The weighted regression of the
//     measured code-rate error on the carrier Doppler across satellites
//     (the test of REFERENCES §12.2) has slope 0 in the right orientation
//     and −2/1540 in the wrong one, for any receiver clock offset (the
//     clock term flips with the signals). With d_i the code-rate error of
//     satellite i (ChannelState.CodeRateErr), v_i its variance and f_i its
//     Doppler, β = Σ f_i·d_i/v_i / Σ f_i²/v_i with standard error
//     s = 1/√(Σ f_i²/v_i) (scaled by the residuals' reduced χ² when it
//     exceeds 1); the orientation is decided when
//     |β + 1/1540| > 4s, and is wrong when β < −1/1540. Then the tracker
//     is restarted at that sample on the conjugated samples, from the
//     acquisition's code phase carried forward with the corrected code
//     Doppler, so that C/N0 is measured on corrected samples without
//     reading the capture twice (the first capture of an inverted input
//     loses its first 60 ms of C/N0 prompts; later captures start in the
//     right orientation).
//  4. Result: tracked satellites (at least 50 prompts after the pull-in,
//     above the estimator's noise floor) as MethodTracked; when the
//     capture is too short to track, the acquired satellites as
//     MethodAcquired. Satellites acquired but lost in tracking are not
//     reported (a note says so).
//
// A Meter is not safe for concurrent use.
type Meter struct {
	cfg MeterConfig
	acq *Acquirer
	mit *Mitigator
	fs  float64
	fc  float64
	k   int // coherent blocks of the acquisition

	snap, clean []complex64
	mitBuf      []complex64 // mitigated block, when tracking on mitigated samples

	// Per capture.
	force    *bool // SetOrientation
	fill     int
	seen     int64 // samples seen so far (end of the last block)
	acqDone  bool
	allZero  bool
	acquired []Acquired // recorded frame
	powerDB  float64    // snapshot power, dB (of full scale 1)
	mitStats MitigationStats
	corr     []Correlation // second peaks of the acquisition (Acquirer.Correlations)
	wide     bool
	mitTrack bool // track on mitigated samples (see mitigatedTracking)
	tr       *Tracker
	trStart  int64
	trInv    bool // orientation of the tracker (conjugated samples)
	decided  bool
	invKnown bool // the orientation was determined on this capture
	restarts int
	resulted bool
	// fullBlocks (tests only) mitigates every tracking block on its own
	// (Mitigator.Mitigate), the reference MitigateBlock is checked
	// against.
	fullBlocks bool

	// The site (carried from capture to capture while fs and fc stay).
	site Site
}

// Site is what a Meter has learned of one input's site from its earlier
// captures: the receiver clock offset that centres the next search (and
// how many satellites it was measured on), the snapshot power when
// satellites were last measured, and the spectrum orientation. It is
// opaque: a caller that measures several inputs with one Meter keeps each
// input's Site (Meter.Site after the capture's Result) and gives it back
// before the input's next capture (Meter.SetSite after Start). The zero
// Site knows nothing.
type Site struct {
	fs, fc     float64 // rate and centre it was learned at
	clockKnown bool
	clockHz    float64 // recorded frame (acquisition search centre)
	// clockLo, clockHi bound the receiver clock offset (recorded frame)
	// when bounded (see narrowWindow).
	clockLo, clockHi float64
	bounded          bool
	count            int     // satellites acquired then
	powerDB          float64 // snapshot power when satellites were last measured
	hasPower         bool
	invKnown         bool
	inv              bool
}

// Site returns what the Meter knows of the site of its current input.
func (m *Meter) Site() Site { return m.site }

// SetSite makes s what the Meter knows of the site; call it after Start.
// A Site learned at another rate or centre than the current capture's, or
// the zero Site, leaves the Meter knowing nothing.
func (m *Meter) SetSite(s Site) {
	if m.acq == nil || s.fs != m.fs || s.fc != m.fc {
		s = Site{fs: m.fs, fc: m.fc}
	}
	m.site = s
}

// NewMeter returns a Meter with configuration cfg.
func NewMeter(cfg MeterConfig) *Meter { return &Meter{cfg: cfg} }

// Start prepares for the next capture, sampled at fs and centred at
// centerHz. It returns an error wrapping ErrL1NotInBand when L1 is not in
// the band, or another configuration error; the Meter then measures
// nothing until the next successful Start. A new rate or centre forgets
// what was learned about the site.
func (m *Meter) Start(fs, centerHz float64) error {
	m.fill, m.seen, m.acqDone, m.allZero = 0, 0, false, false
	m.acquired, m.mitStats, m.wide, m.mitTrack = m.acquired[:0], MitigationStats{}, false, false
	m.corr = m.corr[:0]
	m.tr, m.trStart, m.trInv, m.decided, m.invKnown, m.restarts, m.resulted = nil, 0, false, false, false, 0, false
	m.force = nil
	if m.acq != nil && m.fs == fs && m.fc == centerHz {
		return nil
	}
	m.acq = nil
	a, err := NewAcquirer(m.cfg.Acq, fs, centerHz)
	if err != nil {
		return err
	}
	m.acq, m.fs, m.fc, m.k = a, fs, centerHz, a.nBlock*a.coh
	m.mit = NewMitigator(fs)
	m.snap = make([]complex64, a.SnapshotLen())
	m.clean = make([]complex64, a.SnapshotLen())
	m.site = Site{fs: fs, fc: centerHz}
	return nil
}

// Block takes the next block of samples; start is the index of x[0] in
// the capture.
func (m *Meter) Block(start int64, x []complex64) {
	if m.acq == nil {
		return
	}
	m.seen = max(m.seen, start+int64(len(x)))
	if m.tr != nil {
		m.process(start, x)
		m.decide()
		return
	}
	if m.acqDone {
		return
	}
	k := copy(m.snap[m.fill:], x)
	m.fill += k
	if m.fill < len(m.snap) {
		return
	}
	m.acquire()
	if m.tr == nil {
		return
	}
	if m.mitTrack {
		m.tr.Process(m.clean, 0)
	} else {
		m.tr.Process(m.snap, 0)
	}
	if k < len(x) {
		m.process(start+int64(k), x[k:])
	}
	m.decide()
}

// process feeds the tracker one block, mitigated first when the
// interference is too strong for raw tracking (see mitigatedTracking).
func (m *Meter) process(start int64, x []complex64) {
	if !m.mitTrack {
		m.tr.Process(x, start)
		return
	}
	if cap(m.mitBuf) < len(x) {
		m.mitBuf = make([]complex64, len(x))
	}
	y := m.mitBuf[:len(x)]
	if m.fullBlocks {
		m.mit.Mitigate(y, x)
	} else {
		m.mit.MitigateBlock(y, x)
	}
	m.tr.Process(y, start)
}

// Tracking on mitigated samples: when mitigation removed at least
// mitigatedExcised of the snapshot's power (an interferer at least 10 dB
// above the noise) or blanked at least mitigatedBlanked of its samples,
// the interference left in the raw prompts is not noise-like: a strong
// CW or sweep correlates with the code through its 1 kHz lines into a
// component of nearly constant modulus, which the moment estimator takes
// for signal (raw tracking under a 30 dB CW read C/N0 up to 19 dB above
// the truth in the test bank). The tracker then runs on the mitigated
// blocks, and a note says that the C/N0 is the mitigated receiver's.
const (
	mitigatedExcised = 0.9
	mitigatedBlanked = 0.01
)

// SetOrientation forces the spectrum orientation of the current capture
// (call it after Start; Start forgets it): inv true or false, or nil to
// fall back on MeterConfig.Inverted. A forced orientation is not tested
// and not learned into the site.
func (m *Meter) SetOrientation(inv *bool) { m.force = inv }

// forced returns the orientation forced for this capture, or by the
// configuration, or nil.
func (m *Meter) forced() *bool {
	if m.force != nil {
		return m.force
	}
	return m.cfg.Inverted
}

// orientation returns the orientation to start tracking in: forced, or
// the site's, or upright.
func (m *Meter) orientation() bool {
	switch {
	case m.forced() != nil:
		return *m.forced()
	case m.site.invKnown:
		return m.site.inv
	}
	return false
}

// narrowWindow returns the centre and one-sided width of the narrow
// search, once the site's clock offset is known. Each satellite's
// Doppler D_i is its geometric Doppler, |g_i| ≤ DopplerMaxHz (D_max),
// plus the receiver clock offset c (REFERENCES §12.5), so the
// satellites last measured bound c to [max D_i − D_max, min D_i + D_max],
// and any satellite of the next capture lies within D_max of that
// interval: the window is the interval widened by D_max and one Doppler
// step (the half bin by which AcquireAround rounds its edges, and as
// much again, 0.16 ppm at L1, for the clock's drift between captures).
// A wide sky narrows it (8 satellites over 9 kHz: ±6 kHz), a sky of a
// few close satellites widens it (3 within 1 kHz: ±10 kHz), where the
// median ± (D_max + 2 kHz) searched before could miss a satellite
// rising on the other side. When the satellites do not fit one clock
// (their spread exceeds 2·D_max: a moving receiver or a false PRN), or
// MeterConfig.NarrowHz is set, the window is the median Doppler ±
// NarrowHz (default D_max + 2 kHz).
func (m *Meter) narrowWindow() (center, half float64) {
	dmax := m.acq.cfg.DopplerMaxHz
	switch {
	case m.cfg.NarrowHz > 0:
		return m.site.clockHz, m.cfg.NarrowHz
	case m.site.bounded:
		return (m.site.clockLo + m.site.clockHi) / 2, (m.site.clockHi-m.site.clockLo)/2 + dmax + m.acq.cfg.DopplerStepHz
	}
	return m.site.clockHz, dmax + 2000
}

// acquire runs acquisition on the full snapshot and starts tracking.
func (m *Meter) acquire() {
	m.acqDone = true
	p := power(m.snap)
	if p == 0 {
		m.allZero = true
		return
	}
	m.powerDB = dB(p / float64(len(m.snap)))
	// The in-band power around L1 (REFERENCES §11.1), where L1 lies in
	// the recording: mirrored when the site's spectrum is inverted.
	off := m.acq.offsetHz
	if m.orientation() {
		off = -off
	}
	m.mit.SetBand(off-gpsca.ChipRate, off+gpsca.ChipRate)
	m.mitStats = m.mit.Mitigate(m.clean, m.snap)
	m.mitTrack = m.mitStats.ExcisedFraction >= mitigatedExcised || m.mitStats.BlankedFraction >= mitigatedBlanked
	var err error
	if m.site.clockKnown {
		center, half := m.narrowWindow()
		m.acquired, err = m.acq.AcquireAround(m.acquired, m.clean, center, half)
		if err == nil && 2*len(m.acquired) < m.site.count {
			m.acquired, err = m.acq.Acquire(m.acquired, m.clean)
			m.wide = true
		}
	} else {
		m.acquired, err = m.acq.Acquire(m.acquired, m.clean)
		m.wide = true
	}
	if err != nil || len(m.acquired) == 0 {
		m.acquired = m.acquired[:0]
		return
	}
	m.corr = append(m.corr[:0], m.acq.Correlations()...)
	inv := m.orientation()
	sats := make([]Acquired, len(m.acquired))
	for i, a := range m.acquired {
		sats[i] = a
		if inv {
			sats[i].DopplerHz = -a.DopplerHz
		}
	}
	m.startTracker(sats, 0, inv)
	if m.forced() != nil {
		m.decided = true
	}
}

func (m *Meter) startTracker(sats []Acquired, start int64, inv bool) {
	tr, err := NewTracker(m.fs, m.fc, sats, start)
	if err != nil {
		m.tr = nil
		return
	}
	tr.SetConjugate(inv)
	m.tr, m.trStart, m.trInv = tr, start, inv
}

// inversionSlope is the decision boundary of the orientation test: half
// way between the slopes 0 (right orientation) and −2/1540 (wrong one) of
// the code-rate error against the carrier Doppler, in chips/s per Hz.
const inversionSlope = -1.0 / gpsca.CarrierToCodeRatio

// decide applies the orientation test once every channel has passed the
// code-rate window (see Meter), and restarts the tracker in the other
// orientation if it was wrong.
func (m *Meter) decide() {
	if m.decided || m.tr == nil {
		return
	}
	chans := m.tr.Channels()
	for _, c := range chans {
		if c.Epochs < rateTo {
			return
		}
	}
	m.decided = true
	beta, se, ok := orientationSlope(chans)
	if !ok || math.Abs(beta-inversionSlope) <= 4*se {
		return
	}
	m.invKnown = true
	if beta > inversionSlope {
		return // the tracker's orientation is right
	}
	// Wrong orientation: restart on the conjugated samples from here.
	next := m.seen
	sats := make([]Acquired, len(chans))
	for i, c := range chans {
		fd := -c.DopplerHz // the loop's Doppler, in the other orientation
		a := m.acquired[slices.IndexFunc(m.acquired, func(a Acquired) bool { return a.PRN == c.PRN })]
		sats[i] = Acquired{PRN: c.PRN, DopplerHz: fd,
			CodePhaseChips: gpsca.WrapChips(a.CodePhaseChips + float64(next)*gpsca.CodeRate(fd)/m.fs)}
	}
	m.startTracker(sats, next, !m.trInv)
	m.restarts++
}

// orientationSlope returns the weighted least-squares slope β of the
// code-rate error on the carrier Doppler across channels and its standard
// error (see Meter); ok is false without usable channels. The standard
// error 1/√(Σ f_i²/v_i) is scaled by the residuals' reduced χ² when that
// exceeds 1 (three channels or more), so that variances v_i estimated too
// small (the loop's code phases are correlated from epoch to epoch) do
// not make the decision overconfident.
func orientationSlope(chans []ChannelState) (beta, se float64, ok bool) {
	var sfd, sff float64
	n := 0
	for _, c := range chans {
		if !(c.CodeRateVar > 0) {
			continue
		}
		v := max(c.CodeRateVar, 1e-3)
		f := c.CodeRateDopplerHz
		sfd += f * c.CodeRateErr / v
		sff += f * f / v
		n++
	}
	if !(sff > 0) {
		return 0, 0, false
	}
	beta = sfd / sff
	scale := 1.0
	if n >= 3 {
		var chi2 float64
		for _, c := range chans {
			if c.CodeRateVar > 0 {
				r := c.CodeRateErr - beta*c.CodeRateDopplerHz
				chi2 += r * r / max(c.CodeRateVar, 1e-3)
			}
		}
		scale = max(1, chi2/float64(n-1))
	}
	return beta, math.Sqrt(scale / sff), true
}

// Code drift test (see standingCode).
const (
	// driftSigmas is how many standard errors the code's drift must
	// stand from 0 (a satellite's) to reject a PRN.
	driftSigmas = 5
	// driftMinSigma (chips/s) is the least standard error credited to a
	// drift: 0.01 chips/s is a code-carrier divergence of 3 m/s, far
	// beyond the ionosphere's few cm/s (REFERENCES §11.4, from memory).
	driftMinSigma = 0.01
	// driftMinEpochs is the fewest epochs a drift is judged on.
	driftMinEpochs = 30
	// driftRatioLo, driftRatioHi bound the drift as a fraction of
	// −f_D/1540, the drift of a correlation standing still in the
	// receiver's time: measured 0.45–1.2 under a 100 µs sweep (the
	// delay-locked loop slips on the interferer's correlation when the
	// drift outruns it). A satellite tracked in the wrong orientation
	// drifts by twice that (REFERENCES §12.2) and is left to the
	// orientation test.
	driftRatioLo = 0.3
	driftRatioHi = 1.5
)

// standingCode reports whether a channel followed a correlation whose
// code stands still in the receiver's time while its carrier has a
// Doppler f_D: a satellite's code Doppler is f_D/1540 chips/s at L1
// (REFERENCES §11.4), which the carrier-aided code NCO supplies, so its
// code drifts by 0 ± noise against that NCO over the whole track
// (ChannelState.DriftErr), whatever the receiver clock (code and carrier
// share the reference, REFERENCES §11.4, §12.5). An interferer periodic
// with a divisor of 1 ms (a sweep every 100 µs: lines every 10 kHz)
// correlates with every C/A code (lines every 1 kHz) into peaks at
// whole-kHz offsets from its lines that are fixed in the receiver's
// time: tracked, their code drifts by −f_D/1540 against the NCO. A
// channel is rejected when its drift stands driftSigmas standard errors
// from 0 and lies within [driftRatioLo, driftRatioHi] of −f_D/1540.
func standingCode(c ChannelState) bool {
	if c.DriftEpochs < driftMinEpochs || !(c.DriftVar > 0) {
		return false
	}
	sd := max(math.Sqrt(c.DriftVar), driftMinSigma)
	want := -c.DopplerHz / gpsca.CarrierToCodeRatio
	if math.Abs(c.DriftErr) < driftSigmas*sd || want == 0 {
		return false
	}
	rho := c.DriftErr / want
	return rho >= driftRatioLo && rho <= driftRatioHi
}

// gridTolHz is how far (Hz) a channel's Doppler may lie from the line
// grid of the standing channels (see standingChannels) and be counted on
// it: the pseudo-signals of the interference bank's sweeps lay within
// 30 Hz of theirs after 0.15–0.25 s of tracking (their carrier loops
// follow a correlation that is no clean carrier), a few within 50 Hz.
const gridTolHz = 50

// gridFloorDB is the margin over trackFloor, and gridSatSigmas the
// largest drift in standard errors, of a channel on an interferer's line
// grid that is kept (see standingChannels).
const (
	gridFloorDB   = 6
	gridSatSigmas = 3
)

// standingChannels marks the channels that follow an interferer's
// correlation rather than a satellite: those whose code stands still
// (standingCode), and then the others on the interferer's line grid
// that their drift and C/N0 cannot tell from it.
// An interferer that repeats every 1/n ms correlates with the C/A codes
// (lines every 1 kHz) only at carrier offsets f₀ + k·1 kHz, f₀ its lines'
// offset (REFERENCES §1.3: the code's line spectrum), so all its
// pseudo-signals share their Doppler modulo 1 kHz; near zero Doppler
// their drift, −f_D/1540, is too small to measure in a short capture
// (0.65 chips/s at 1 kHz against a standard error of 0.1–0.5 chips/s).
// A channel on the grid (within gridTolHz) is marked unless its drift
// is a satellite's, within gridSatSigmas standard errors of 0 and
// driftSigmas from −f_D/1540 (it moves with its carrier), and its C/N0
// stands gridFloorDB above the estimator's noise floor (trackFloor): a
// channel whose loop slips on the interferer's correlation drifts in
// between, and one that lost it follows nothing, its carrier-aided code
// moving with the carrier as a satellite's does, while the interference
// left in its prompts can read a few dB above a floor computed for
// Gaussian noise (37 dB-Hz against 33 under the bank's sweep at J/N
// −4 dB, measured). A satellite on the grid with |f_D| below about
// 1 kHz, or within gridFloorDB of the floor, is then lost with the
// interferer's copies: a few per cent of the satellites under such
// interference (10 % of Dopplers lie within 50 Hz of the grid).
func standingChannels(chans []ChannelState) []bool {
	out := make([]bool, len(chans))
	n := 0
	for i, c := range chans {
		if standingCode(c) {
			out[i], n = true, n+1
		}
	}
	if n == 0 {
		return out
	}
	// The grid: the residue modulo 1 kHz shared by most standing
	// channels, as their circular mean.
	res := func(f float64) float64 { return f - 1000*math.Round(f/1000) }
	best, bestN := 0.0, 0
	for i, c := range chans {
		if !out[i] {
			continue
		}
		var sc, ss float64
		k := 0
		for j, d := range chans {
			if out[j] && math.Abs(res(d.DopplerHz-c.DopplerHz)) <= gridTolHz {
				s, co := math.Sincos(2 * math.Pi * d.DopplerHz / 1000)
				sc, ss, k = sc+co, ss+s, k+1
			}
		}
		if k > bestN {
			best, bestN = math.Atan2(ss, sc)/(2*math.Pi)*1000, k
		}
	}
	for i, c := range chans {
		if out[i] || !(c.DriftVar > 0) || c.DriftEpochs < driftMinEpochs || math.Abs(res(c.DopplerHz-best)) > gridTolHz {
			continue
		}
		sd := max(math.Sqrt(c.DriftVar), driftMinSigma)
		out[i] = math.Abs(c.DriftErr+c.DopplerHz/gpsca.CarrierToCodeRatio) < driftSigmas*sd ||
			math.Abs(c.DriftErr) > gridSatSigmas*sd || !c.CN0OK || c.CN0dBHz < trackFloor(c.Prompts)+gridFloorDB
	}
	return out
}

// trackFloor returns the C/N0 (dB-Hz) below which a moment estimate from
// k prompts is indistinguishable from noise at the 10⁻³ level: without a
// signal, S²'s estimate has standard deviation 2N²/√k (see
// Tracker.Result), so noise reads S/N = √h/(1 − √h) with h = 2·3.09/√k
// (33 dB-Hz for 190 prompts, computed).
func trackFloor(k int) float64 {
	h := 2 * 3.09 / math.Sqrt(float64(k))
	if h >= 1 {
		return math.Inf(1)
	}
	r := math.Sqrt(h)
	return dB(r / (1 - r) / 1e-3)
}

// minShortPrompts is the fewest prompts after the pull-in from which a
// satellite of a capture too short to track (fewer than minEpochs prompts)
// takes its C/N0 from the prompts rather than from the acquisition peak:
// with 20 prompts the moment estimate scatters by about 1.5 dB at
// 40 dB-Hz (√(190/20) times the 0.45 dB of 190 prompts, computed).
const minShortPrompts = 20

// acquiredLossDB is added to the C/N0 read from an acquisition peak: the
// mean code-phase, filter and Doppler-bin losses of the search (−0.6 to
// −0.9 dB and −0.3 dB, computed, see Acquire).
const acquiredLossDB = 1.1

// acquiredCN0 returns the C/N0 (dB-Hz) read from an acquisition peak: the
// per-block SNR λ̂ = PeakMetric/K − 1 (E[S/σ²] = K(1 + λ), REFERENCES §4;
// Gómez-Casco et al. 2018's peak-to-floor form, REFERENCES §3) over the
// block time T, plus the mean search losses. It is biased high near the
// threshold (the maximum selects positive noise) and scatters by about
// ±2 dB on its own, up to −4.4 dB in a sky of nine strong satellites
// (the real 12 MS/s recording of testdata/realdata): the quality of a
// MethodAcquired value without prompts.
func (m *Meter) acquiredCN0(a Acquired) float64 {
	k := float64(m.acq.nBlock)
	lam := a.PeakMetric/k - 1
	t := float64(m.acq.coh) * 1e-3
	if !(lam > 0) {
		return math.NaN()
	}
	return dB(lam/t) + acquiredLossDB
}

// Result returns the measurement of the current capture (call it after
// the last block). The first call of a capture also updates what the
// Meter knows of the site.
func (m *Meter) Result() Measurement {
	var r Measurement
	if m.acq == nil {
		return r
	}
	dur := float64(m.seen) / m.fs
	r.Mitigation, r.WideSearch = m.mitStats, m.wide
	if m.mitStats.HasBand && m.mitStats.BandPower > 0 {
		r.InBandPowerDB, r.HasInBand = dB(m.mitStats.BandPower), true
	}
	switch {
	case !m.acqDone:
		r.Unmeasured = fmt.Sprintf("the capture (%.1f ms) is shorter than the %d ms acquisition snapshot: satellites not measured",
			dur*1e3, m.k)
		r.Notes = append(r.Notes, r.Unmeasured)
		return r
	case m.allZero:
		r.Unmeasured = "the acquisition snapshot is all zeros: satellites not measured"
		r.Notes = append(r.Notes, r.Unmeasured)
		return r
	}
	if m.forced() != nil {
		r.Inverted = m.forced()
	} else if m.invKnown {
		v := m.trInv
		r.Inverted = &v
	}
	var chans []ChannelState
	tracked := map[int]Satellite{}
	if m.tr != nil {
		chans = m.tr.Channels()
		for _, s := range m.tr.Result() {
			tracked[s.PRN] = s
		}
	}
	standing := standingChannels(chans)
	var short, lost []int
	fromPrompts := 0
	for _, a := range m.acquired {
		ci := slices.IndexFunc(chans, func(c ChannelState) bool { return c.PRN == a.PRN })
		if ci < 0 {
			continue
		}
		c := chans[ci]
		if standing[ci] {
			r.Standing = append(r.Standing, CodeRate{PRN: c.PRN, ErrChipsS: c.DriftErr, SigmaChipsS: math.Sqrt(c.DriftVar)})
			continue
		}
		if s, ok := tracked[a.PRN]; ok && s.CN0dBHz >= trackFloor(c.Prompts) {
			cp := gpsca.WrapChips(s.CodePhaseChips - float64(m.trStart)*gpsca.CodeRate(s.DopplerHz)/m.fs)
			r.Satellites = append(r.Satellites, Measured{PRN: a.PRN, CN0dBHz: s.CN0dBHz, DopplerHz: s.DopplerHz,
				CodePhaseChips: cp, Method: MethodTracked})
			continue
		}
		if c.Prompts >= minEpochs {
			lost = append(lost, a.PRN)
			continue
		}
		// Too short to track: the acquisition's values, in the tracker's
		// orientation, or the loops' once they have run 20 epochs.
		fd, cp := a.DopplerHz, a.CodePhaseChips
		if m.trInv {
			fd = -fd
		}
		if c.Epochs >= 20 {
			fd = c.DopplerHz
			cp = gpsca.WrapChips(c.CodePhaseChips - float64(m.trStart)*gpsca.CodeRate(fd)/m.fs)
		}
		cn0 := m.acquiredCN0(a)
		if c.Prompts >= minShortPrompts && c.CN0OK {
			cn0 = c.CN0dBHz
			fromPrompts++
		}
		if math.IsNaN(cn0) {
			continue
		}
		short = append(short, a.PRN)
		r.Satellites = append(r.Satellites, Measured{PRN: a.PRN, CN0dBHz: cn0, DopplerHz: fd,
			CodePhaseChips: cp, Method: MethodAcquired})
	}
	slices.SortFunc(r.Satellites, func(u, v Measured) int { return u.PRN - v.PRN })
	if len(short) > 0 {
		need := float64(settleEpochs+minEpochs) + float64(m.trStart)/m.fs*1e3
		why := fmt.Sprintf("the capture (%.1f ms) is too short to track satellites (about %.0f ms needed", dur*1e3, need)
		if at, ok := m.tr.SharedLoss(); ok && dur*1e3 >= need {
			// Long enough, but every channel stopped at a sample drop
			// or gap before its prompts sufficed.
			why = fmt.Sprintf("tracking stopped at the sample drop or gap near %.1f ms, before the satellites were tracked (about %.0f ms needed", float64(at)/m.fs*1e3, need)
		}
		if m.restarts > 0 {
			why += ", counting the restart after the spectrum inversion was found"
		}
		why += "): satellites from acquisition"
		switch {
		case fromPrompts == len(short):
			why += fmt.Sprintf(", C/N0 from the %d–%d prompts after the loops' pull-in (about ±1.5 dB)", minShortPrompts, minEpochs-1)
		case fromPrompts == 0:
			why += ", C/N0 from the acquisition peak (about ±3 dB)"
		default:
			why += fmt.Sprintf(", C/N0 from the %d–%d prompts after the loops' pull-in (about ±1.5 dB) or, for satellites with fewer, from the acquisition peak (about ±3 dB)", minShortPrompts, minEpochs-1)
		}
		r.Unmeasured = why
		r.Notes = append(r.Notes, why)
	}
	if len(lost) > 0 {
		r.Notes = append(r.Notes, fmt.Sprintf("satellites %v were acquired but lost in tracking (C/N0 below the estimator's noise floor)", lost))
	}
	if m.mitTrack {
		r.Notes = append(r.Notes, fmt.Sprintf("C/N0 measured after interference mitigation (%.1f dB of the band's power excised, %.1f %% of the samples blanked): a receiver without mitigation sees less",
			-dB(max(1-r.Mitigation.ExcisedFraction, 1e-12)), 100*r.Mitigation.BlankedFraction))
	}
	// Interference the mitigation saw, or a band power well above the
	// site's when its satellites were last measured (a wideband jammer
	// raises it by 10·log10(1 + J/N); REFERENCES §9).
	rise := m.powerDB - m.site.powerDB
	if len(r.Standing) > 0 {
		prns := make([]int, len(r.Standing))
		for i, s := range r.Standing {
			prns[i] = s.PRN
		}
		r.Notes = append(r.Notes, fmt.Sprintf("PRNs %v not reported: their code stood still in the receiver's time while their carrier showed a Doppler (code Doppler 0 against carrier Doppler/1540): the correlation of a periodic interferer, not satellites", prns))
	}
	if len(r.Satellites) == 0 && (r.Mitigation.Interfered() || len(lost) > 0 || len(r.Standing) > 0 || m.site.hasPower && rise >= lostRiseDB) {
		why := "interference was present"
		if m.site.hasPower && rise >= lostRiseDB {
			why = fmt.Sprintf("the band's power was %.1f dB above the site's when satellites were last measured", rise)
		}
		r.Notes = append(r.Notes, "no satellite could be measured while "+why+": the satellites are lost, not absent")
	}
	if r.Inverted == nil && m.tr != nil && !m.decided {
		r.Notes = append(r.Notes, "spectrum orientation not determined: the capture ended before the tracking loops' pull-in (60 ms)")
	} else if r.Inverted == nil && m.tr != nil {
		r.Notes = append(r.Notes, "spectrum orientation not determined: the satellites' Dopplers do not separate the two orientations")
	}
	if m.tr != nil {
		if at, ok := m.tr.SharedLoss(); ok {
			r.DropSample, r.HasDrop = at, true
			r.Notes = append(r.Notes, fmt.Sprintf("every satellite lost lock at once near sample %d (%.1f ms): a sample drop or gap in the recording; C/N0 from the prompts before it",
				at, float64(at)/m.fs*1e3))
		}
	}
	if f, ok := ClockOffset(r.Satellites); ok {
		r.ClockOffsetHz, r.HasClock = f, true
	}
	// Second peaks of the satellites reported, in the orientation they
	// are reported in. A detection that tracking dropped (a false one
	// under strong interference) has no say. When mitigation reshaped the
	// snapshot, the correlations are not the sky's alone: short-time
	// excision that follows a periodic sweep, or blanking of a pulse
	// train, gates the signals with the interferer's period and puts a
	// copy of every correlation peak at that lag (a 100 µs sweep:
	// 102.3 chips, the same on every PRN), and a wide band cut out of the
	// C/A main lobe makes the peak ring; so no second peak is reported
	// then, and a note says why. (A few per cent excised does neither: a
	// sky of strong satellites or spoofers loses that much, measured.)
	ms := m.mitStats
	mitigated := ms.ExcisedFraction > pairsExcisedMax || ms.BlankedFraction > pairsBlankedMax || ms.NotImpulsive
	dropped := false
	for _, c := range m.corr {
		if !slices.ContainsFunc(r.Satellites, func(s Measured) bool { return s.PRN == c.PRN }) {
			continue
		}
		if mitigated {
			dropped = true
			continue
		}
		c.Second = ptrTo(*c.Second)
		if m.trInv {
			c.First.DopplerHz, c.Second.DopplerHz = -c.First.DopplerHz, -c.Second.DopplerHz
			prof := make([]ProfileSegment, len(c.Profile))
			for i, s := range c.Profile {
				s.DopplerHz = -s.DopplerHz
				prof[i] = s
			}
			c.Profile = prof
		}
		r.Correlations = append(r.Correlations, c)
	}
	if dropped {
		r.Notes = append(r.Notes, "second correlation peaks not reported: interference mitigation acted on the acquisition snapshot and puts copies of every peak at the interferer's period")
	}
	for _, c := range chans {
		if _, ok := tracked[c.PRN]; ok && c.CodeRateVar > 0 && slices.ContainsFunc(r.Satellites, func(s Measured) bool { return s.PRN == c.PRN }) {
			r.CodeRates = append(r.CodeRates, CodeRate{PRN: c.PRN, ErrChipsS: c.CodeRateErr, SigmaChipsS: math.Sqrt(c.CodeRateVar)})
		}
	}
	if !m.resulted {
		m.resulted = true
		m.learnSite(r)
	}
	return r
}

// learnSite keeps the receiver clock offset (in the recorded frame, the
// one acquisition searches) and the orientation for the next captures.
func (m *Meter) learnSite(r Measurement) {
	if r.Inverted != nil && m.forced() == nil {
		m.site.invKnown, m.site.inv = true, *r.Inverted
	}
	// Three satellites at least, so that one satellite's geometric
	// Doppler does not set the window.
	if len(r.Satellites) > 0 {
		m.site.powerDB, m.site.hasPower = m.powerDB, true
	}
	if len(r.Satellites) >= 3 {
		f := r.ClockOffsetHz
		lo, hi := math.Inf(-1), math.Inf(1)
		for _, s := range r.Satellites {
			d := s.DopplerHz
			if m.trInv {
				d = -d
			}
			lo, hi = max(lo, d-m.acq.cfg.DopplerMaxHz), min(hi, d+m.acq.cfg.DopplerMaxHz)
		}
		if m.trInv {
			f = -f
		}
		m.site.clockKnown, m.site.clockHz, m.site.count = true, f, len(r.Satellites)
		m.site.clockLo, m.site.clockHi, m.site.bounded = lo, hi, lo <= hi
	}
}

// Mitigation beyond which second peaks are not reported (see Result):
// excision of 20 % of the snapshot's power (a sweep or noise band at
// J/N −6 dB or more; skies of ten satellites at 40–53 dB-Hz with eight
// to ten spoofed copies lost up to 6 %, measured at 4 and 10 MS/s; an
// interferer weaker than −6 dB gates the signals by less, and its copies
// of the peaks stay below the detection threshold); blanking of 0.1 % of
// the samples (a Gaussian sample exceeds the blanking threshold with
// probability 2·10⁻⁶, so noise alone blanks a guard of 1 µs or two per
// snapshot: 0.02 % at 10 MS/s).
const (
	pairsExcisedMax = 0.2
	pairsBlankedMax = 0.001
)

// lostRiseDB is the band power rise (dB) over the site's, with no
// satellite measured, that makes the satellites "lost": 3 dB is
// interference as strong as the noise (J/N = 0 dB; REFERENCES §9).
const lostRiseDB = 3

// ClockOffset returns the receiver's common Doppler offset of the given
// satellites: the median of their carrier Dopplers (the mean of the two
// middle ones for an even count). Without ephemeris the geometric Doppler
// of each satellite cannot be removed, so the offset includes the median
// geometric Doppler of the satellites in view (roughly symmetric over
// ±4.9 kHz for a static receiver, so small but not zero; REFERENCES
// §12.5). ok is false without satellites.
func ClockOffset(sats []Measured) (float64, bool) {
	if len(sats) == 0 {
		return 0, false
	}
	f := make([]float64, len(sats))
	for i, s := range sats {
		f[i] = s.DopplerHz
	}
	slices.Sort(f)
	n := len(f)
	if n%2 == 1 {
		return f[n/2], true
	}
	return (f[n/2-1] + f[n/2]) / 2, true
}

func ptrTo[T any](v T) *T { return &v }
