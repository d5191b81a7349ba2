package detect

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"runtime"
	"sort"
	"strings"

	"quietband/ingest"

	"quietband/detect/gnss"
)

// GNSSMeter measures the GPS L1 C/A satellites of a capture for the
// pipeline with a gnss.Meter: acquisition on the first snapshot (10 ms by
// default) after interference mitigation, over the receiver-clock range
// while the site's clock offset is unknown and around it afterwards; then
// C/N0 tracking of the acquired satellites over every block, in the
// spectrum orientation the satellites show (package gnss documents each
// step). It keeps each site's clock offset and spectrum orientation
// (gnss.Site) from capture to capture, apart for every site key that
// Start is given (the pipeline gives the capture's baseline key), so that
// one GNSSMeter serves several inputs without one's state centring
// another's search (a meter that knew nothing would search the whole
// clock range every time, which costs about 30 % more at 10 MS/s and
// finds the same satellites with the same values on an upright input; on
// an inverted one it would find the orientation anew and measure C/N0 on
// 60 fewer prompts). Memory is two snapshots, and one block when the
// interference is strong enough that tracking runs on mitigated blocks,
// plus a few dozen bytes per site. A GNSSMeter is used by one pipeline
// at a time.
//
// Result returns the satellites; Measurement returns everything measured
// (notes, clock offset, orientation, why the C/N0 was not measured), for
// the capture record.
type GNSSMeter struct {
	// Acq configures acquisition; zero fields take package gnss defaults,
	// except Pfa, which defaults to 1e-3 per capture (1e-3/32 per PRN
	// search) so that noise alone almost never yields a satellite.
	Acq gnss.AcqConfig
	// Inverted, when set, forces the spectrum orientation (true: inverted,
	// I and Q swapped) instead of deciding it from the satellites. Acq and
	// Inverted are read at the first Start.
	Inverted *bool

	m      *gnss.Meter
	skip   string
	cached *SatelliteResult
	site   string               // the current capture's site key
	sites  map[string]gnss.Site // what each site taught the meter
}

// NewGNSSMeter returns the GNSSMeter for the detection configuration
// cfg: its receiver clock range (Config.ClockRangeHz).
func NewGNSSMeter(cfg Config) *GNSSMeter {
	return &GNSSMeter{Acq: gnss.AcqConfig{ClockMaxHz: cfg.ClockRangeHz}}
}

// ForceUpright tells the meter that the current capture's samples are
// upright and not to be tested (call it after Start): the input's
// configuration set the orientation, and the Reader turned an inverted
// spectrum upright (ingest.Orientation).
func (m *GNSSMeter) ForceUpright() {
	if m.skip == "" && m.m != nil {
		up := false
		m.m.SetOrientation(&up)
	}
}

// Start implements SatelliteMeter.
func (m *GNSSMeter) Start(site string, fs, centerHz float64, hasCenter bool) string {
	m.cached, m.skip, m.site = nil, "", site
	if !hasCenter {
		m.skip = "skipped: the capture's centre frequency is unknown"
		return m.skip
	}
	if m.m == nil {
		cfg := m.Acq
		if cfg.Pfa == 0 {
			n := len(cfg.PRNs)
			if n == 0 {
				n = 32
			}
			cfg.Pfa = 1e-3 / float64(n)
		}
		m.m = gnss.NewMeter(gnss.MeterConfig{Acq: cfg, Inverted: m.Inverted})
	}
	if err := m.m.Start(fs, centerHz); err != nil {
		if errors.Is(err, gnss.ErrL1NotInBand) {
			m.skip = err.Error()
		} else {
			m.skip = "skipped: " + err.Error()
		}
		return m.skip
	}
	m.m.SetSite(m.sites[site])
	return ""
}

// Block implements SatelliteMeter.
func (m *GNSSMeter) Block(start int64, x []complex64) {
	if m.skip != "" || m.m == nil {
		return
	}
	m.m.Block(start, x)
}

// Result implements SatelliteMeter: the satellites of Measurement.
func (m *GNSSMeter) Result() []Satellite {
	return m.Measurement().Satellites
}

// Measurement returns what was measured in the current capture (call it
// after the last block): the satellites, the receiver clock offset, the
// spectrum orientation, notes for every stage not run, and, in
// Unmeasured, why the site's C/N0 was not measured.
func (m *GNSSMeter) Measurement() SatelliteResult {
	if m.cached != nil {
		return *m.cached
	}
	var r SatelliteResult
	switch {
	case m.skip != "":
		r.Skipped = m.skip
		r.Notes = []string{"satellites not measured: " + strings.TrimPrefix(m.skip, "skipped: ")}
	case m.m != nil:
		g := m.m.Result()
		if m.sites == nil {
			m.sites = map[string]gnss.Site{}
		}
		m.sites[m.site] = m.m.Site()
		for _, s := range g.Satellites {
			r.Satellites = append(r.Satellites, Satellite{System: "GPS", PRN: s.PRN, CN0DBHz: s.CN0dBHz,
				DopplerHz: s.DopplerHz, CodePhaseChips: s.CodePhaseChips, Method: s.Method})
		}
		if g.HasClock {
			r.ClockOffsetHz = ptr(g.ClockOffsetHz)
		}
		r.SpectrumInverted = g.Inverted
		r.Notes = g.Notes
		r.Unmeasured = g.Unmeasured
		if g.HasDrop {
			r.DropSample = ptr(g.DropSample)
		}
		r.Correlations = g.Correlations
		if g.HasInBand {
			r.InBandPowerDBFS = ptr(g.InBandPowerDB)
		}
		r.CodeRates = g.CodeRates
	}
	m.cached = &r
	return r
}

// Strongest is how many of a capture's strongest satellites the site's
// C/N0 mean takes (StrongestMean): the figure the C/N0 baseline keeps,
// the quietband_cn0_mean_dbhz metric shows and the report plots.
const Strongest = 4

// StrongestMean is the mean C/N0 (dB-Hz, a mean of the dB values) of the
// n strongest satellites (of all when there are fewer), NaN when there are
// none: with n = Strongest, the figure the site's C/N0 baseline keeps,
// the metrics expose and reports plot.
func StrongestMean(sats []Satellite, n int) float64 {
	v := make([]float64, 0, len(sats))
	for _, s := range sats {
		v = append(v, s.CN0DBHz)
	}
	sort.Sort(sort.Reverse(sort.Float64Slice(v)))
	if len(v) > n {
		v = v[:n]
	}
	if len(v) == 0 {
		return math.NaN()
	}
	var s float64
	for _, x := range v {
		s += x
	}
	return s / float64(len(v))
}

// cn0Drop is cn0DropFrom for satellites alone (the capture's C/N0 taken
// as measured unless a satellite says it was only acquired).
func cn0Drop(sats []Satellite, base *Baseline, margin float64) (Event, bool) {
	return cn0DropFrom(SatelliteResult{Satellites: sats}, base, margin)
}

// reliableDBHz: the satellites whose C/N0 now is at least this (3 dB above
// the moment estimator's noise floor for a 0.25 s capture, 33 dB-Hz, see
// gnss.Tracker.Result) carry the drop when there are any: a satellite near
// the floor is measured only when its noise happened to lift it, so its
// drop reads small (selection bias).
const reliableDBHz = 36

// cn0DropFrom compares a capture's measured satellites with the
// baseline's and returns a cn0_drop event (without id, times or links)
// when the C/N0 of the satellites common to both fell by at least margin
// dB, or when at least half of the baseline's satellites (and at least
// two) were lost. Nothing is compared when the satellites were not
// measured (r.Skipped or r.Unmeasured set: skipped, too short to track,
// all zeros, a front-end fault the pipeline found) or when any satellite
// was only acquired: what was not measured is not a drop.
//
// The drop is measured PRN by PRN over the common satellites, so that a
// satellite setting or rising does not look like interference: the mean
// of baseline − now over the common satellites still at or above
// reliableDBHz (all common ones when none is). Under wideband noise every
// satellite loses the same 10·log10(1 + J/N) (REFERENCES §5, §9), which
// the strong ones measure without bias while the weak ones are lost.
func cn0DropFrom(r SatelliteResult, base *Baseline, margin float64) (Event, bool) {
	if len(base.CN0) == 0 || r.Skipped != "" || r.Unmeasured != "" {
		return Event{}, false
	}
	now := map[int]float64{}
	for _, s := range r.Satellites {
		if s.Method == MethodAcquired {
			return Event{}, false
		}
		now[s.PRN] = s.CN0DBHz
	}
	var prns, lost []int
	// Sorted, so that the sums (and the records) do not depend on map
	// order.
	keys := make([]int, 0, len(base.CN0))
	for prn := range base.CN0 {
		keys = append(keys, prn)
	}
	sort.Ints(keys)
	var sumBase, sumNow, relBase, relNow float64
	rel := 0
	for _, prn := range keys {
		b := base.CN0[prn]
		c, ok := now[prn]
		if !ok {
			lost = append(lost, prn)
			continue
		}
		prns = append(prns, prn)
		sumBase += b
		sumNow += c
		if c >= reliableDBHz {
			relBase += b
			relNow += c
			rel++
		}
	}
	var drop, baseMean, nowMean float64
	switch {
	case rel > 0:
		baseMean, nowMean = relBase/float64(rel), relNow/float64(rel)
		drop = baseMean - nowMean
	case len(prns) > 0:
		baseMean, nowMean = sumBase/float64(len(prns)), sumNow/float64(len(prns))
		drop = baseMean - nowMean
	default:
		baseMean = base.CN0Mean
		nowMean = math.NaN()
	}
	lostMany := len(lost) >= 2 && 2*len(lost) >= len(base.CN0)
	if drop < margin && !lostMany {
		return Event{}, false
	}
	if math.IsNaN(nowMean) {
		// Every satellite lost: report the drop to the acquisition floor.
		nowMean = cn0Floor
		drop = baseMean - nowMean
	}
	ev := Event{Class: ClassCN0Drop, Detectors: []string{"cn0"}}
	ev.Params.DropDB = ptr(drop)
	ev.Params.BaselineDBHz = ptr(baseMean)
	ev.Params.CN0DBHz = ptr(nowMean)
	ev.Params.PRNs = append(prns, lost...)
	sort.Ints(ev.Params.PRNs)
	ev.Params.SatellitesLost = lost
	// The wideband J/N that would explain the drop, 10^(drop/10) − 1: a
	// floor rise of R dB costs R dB of C/N0 (REFERENCES §9, §5).
	ev.JNDB = 10 * math.Log10(math.Max(math.Pow(10, drop/10)-1, 1e-6))
	return ev, true
}

// cn0Floor is the C/N0 (dB-Hz) reported for satellites no longer
// acquired: about where a 10 ms non-coherent acquisition stops finding
// them (REFERENCES §4: 34.5 dB-Hz for Pd = 0.5 with K = 10).
const cn0Floor = 34.5

// SatelliteResult is what a SatelliteMeter measured in one capture.
type SatelliteResult struct {
	Satellites []Satellite
	Skipped    string // why nothing was measured, if so
	// Notes name, one plain sentence each, every stage not run (or not in
	// full) on the capture and why: for CaptureRecord.Notes.
	Notes []string
	// ClockOffsetHz is the receiver's common Doppler offset (the median
	// Doppler of the satellites measured, see gnss.ClockOffset): for
	// Stats.ClockOffsetHz. Nil when no satellite was measured.
	ClockOffsetHz *float64
	// SpectrumInverted is the spectrum orientation the satellites showed
	// (or the configured one): for Stats.SpectrumInverted. Nil when not
	// determined.
	SpectrumInverted *bool
	// Unmeasured, when not empty, says why the site's C/N0 was not
	// measured although the meter ran (too short to track, shorter than
	// the acquisition snapshot, all zeros). The pipeline sets it too when
	// it finds a front-end fault; cn0DropFrom then compares nothing.
	Unmeasured string
	// DropSample, when set, is the sample near which every strongly
	// tracked satellite lost lock at once: a sample drop or gap in the
	// recording (REFERENCES §12.7), for a "gap" fault.
	DropSample *int64
	// Correlations are the PRNs whose acquisition showed a second
	// correlation peak, with both peaks and the correlation profile
	// around them (gnss.Acquirer.Correlations): what Spoofing reads.
	// Nil when no PRN had one.
	Correlations []gnss.Correlation
	// InBandPowerDBFS is the power within ±1.023 MHz of L1 of the
	// acquisition snapshot before mitigation (dBFS; REFERENCES §11.1: the
	// band where a spoofer's power shows), nil when not measured.
	InBandPowerDBFS *float64
	// CodeRates are the tracked satellites' code Doppler against their
	// carrier Doppler (REFERENCES §11.4), for Spoofing.
	CodeRates []gnss.CodeRate
}

// SatelliteMeter measures satellites in a capture (acquisition on a
// snapshot, then C/N0 over the blocks), given every block in order by a
// satelliteRun (the pipeline's) or MeasureSatellites.
type SatelliteMeter interface {
	// Start prepares for a capture of the given site (a key for what
	// the meter learns of one input from capture to capture: the
	// pipeline gives the capture's baseline key); skip is a reason to
	// measure nothing.
	Start(site string, fs, centerHz float64, hasCenter bool) (skip string)
	// Block takes the next block of samples.
	Block(start int64, x []complex64)
	// Measurement returns what was measured: the satellites, the
	// receiver's clock offset, the spectrum orientation, notes.
	Measurement() SatelliteResult
}

// SatellitePlacement says where the pipeline measures a capture's
// satellites. Either way the meter is given the same blocks (the same
// length, start and samples) in the same order, one capture after the
// other, so the records do not depend on it.
type SatellitePlacement int

const (
	// SatellitesAuto is SatellitesInPass with one CPU (GOMAXPROCS 1) and
	// SatellitesOwnRead with more.
	SatellitesAuto SatellitePlacement = iota
	// SatellitesInPass gives the meter each block of the spectral pass's
	// read, on the pass's goroutine, after the detectors: one read, one
	// goroutine of analysis per capture.
	SatellitesInPass
	// SatellitesOwnRead has the meter read the capture itself (a Reader
	// of its own, without hashing or front-end check) on a goroutine of
	// its own while the spectral pass runs; the pass waits for it after
	// its last block. The capture is read and decoded twice (from the
	// page cache the second time), and the two sides share no memory.
	SatellitesOwnRead
)

func (p SatellitePlacement) String() string {
	switch p {
	case SatellitesAuto:
		return "auto"
	case SatellitesInPass:
		return "in-pass"
	case SatellitesOwnRead:
		return "own-read"
	}
	return fmt.Sprintf("SatellitePlacement(%d)", int(p))
}

// satelliteRun is one capture's satellite measurement: the one route from
// a capture to a SatelliteMeter, in the spectral pass (block, then result)
// or on a read of its own (result waits for it).
type satelliteRun struct {
	meter  SatelliteMeter // nil: satellites not measured
	skip   string         // the meter's reason to measure nothing
	inPass bool
	done   chan struct{} // closed when the own read has ended
	cancel context.CancelFunc
	res    SatelliteResult
	err    error
}

// startSatellites starts measuring c's satellites with m (nil: none) for
// site, in blocks of blockLen, where says. Call stop when done (it
// abandons an own read still running), result for the measurement.
func startSatellites(ctx context.Context, c *ingest.Capture, m SatelliteMeter, site string, blockLen int, where SatellitePlacement) *satelliteRun {
	s := &satelliteRun{meter: m}
	if m == nil {
		return s
	}
	center, hasCenter := c.CenterHz()
	if s.skip = m.Start(site, c.SampleRate, center, hasCenter); s.skip != "" {
		return s
	}
	if f, ok := m.(interface{ ForceUpright() }); ok && c.Spectrum != ingest.OrientationAuto {
		f.ForceUpright()
	}
	if where == SatellitesAuto {
		where = SatellitesInPass
		if runtime.GOMAXPROCS(0) > 1 {
			where = SatellitesOwnRead
		}
	}
	if where != SatellitesOwnRead {
		s.inPass = true
		return s
	}
	ctx, s.cancel = context.WithCancel(ctx)
	s.done = make(chan struct{})
	go func() {
		defer close(s.done)
		s.res, s.err = readSatellites(ctx, c, m, blockLen)
	}()
	return s
}

// block gives the meter the spectral pass's block, when it is measured
// in the pass.
func (s *satelliteRun) block(blk ingest.Block) {
	if s.inPass {
		s.meter.Block(blk.Start, blk.Samples)
	}
}

// result returns the measurement, waiting for the own read if there is
// one: an empty result when no meter was given, one with Skipped and a
// note when the meter measured nothing.
func (s *satelliteRun) result() (SatelliteResult, error) {
	switch {
	case s.meter == nil:
		return SatelliteResult{}, nil
	case s.skip != "":
		return skippedResult(s.skip), nil
	case s.done != nil:
		<-s.done
		return s.res, s.err
	}
	return s.meter.Measurement(), nil
}

// stop abandons the own read, if it is still running, and waits for its
// goroutine to end: no Block call follows stop.
func (s *satelliteRun) stop() {
	if s.done != nil {
		s.cancel()
		<-s.done
	}
}

func skippedResult(why string) SatelliteResult {
	return SatelliteResult{Skipped: why, Notes: []string{"satellites not measured: " + strings.TrimPrefix(why, "skipped: ")}}
}

// MeasureSatellites reads a capture on its own, in blocks of blockLen,
// and measures its satellites with m, on the calling goroutine (the
// pipeline's SatellitesOwnRead, for callers without a pipeline). The
// site given to m is the capture's format, rate and centre.
func MeasureSatellites(ctx context.Context, c *ingest.Capture, m SatelliteMeter, blockLen int) (SatelliteResult, error) {
	center, hasCenter := c.CenterHz()
	if why := m.Start(BaselineKey(c.Format.String(), c.SampleRate, center, hasCenter, 0), c.SampleRate, center, hasCenter); why != "" {
		return skippedResult(why), nil
	}
	return readSatellites(ctx, c, m, blockLen)
}

// readSatellites gives m (started) every block of a read of c of its own
// and returns its measurement.
func readSatellites(ctx context.Context, c *ingest.Capture, m SatelliteMeter, blockLen int) (SatelliteResult, error) {
	r, err := c.NewReader(blockLen)
	if err != nil {
		return SatelliteResult{}, err
	}
	defer r.Close()
	r.SkipHash() // the spectral pass hashes the capture
	for {
		if err := ctx.Err(); err != nil {
			return SatelliteResult{}, err
		}
		b, err := r.Next()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return SatelliteResult{}, err
		}
		m.Block(b.Start, b.Samples)
	}
	return m.Measurement(), nil
}
