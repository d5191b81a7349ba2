package detect

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"time"

	"quietband/ingest"
)

// minFrames is the fewest frames a block needs for the spectral detectors
// (a capture's short last block may have fewer; only pulses are sought
// there).
const minFrames = 16

// Version is folded into event ids: a new detection code gives new ids.
const Version = "quietband-detect/1"

// Pipeline runs the detector bank over captures, one at a time, sharing a
// State (baselines, open episodes) across them.
type Pipeline struct {
	cfg   Config
	state *State
	// GNSS, when set, measures the satellites of each capture (see
	// SatelliteMeter), where SatellitePlacement says; the meter keeps
	// what it learns apart per baseline key.
	GNSS SatelliteMeter
	// SatellitePlacement says where GNSS runs: in the spectral pass or on
	// a read of its own beside it (SatellitesAuto: by GOMAXPROCS). The
	// records are the same either way.
	SatellitePlacement SatellitePlacement
	// GNSSInline is SatellitePlacement = SatellitesInPass.
	//
	// Deprecated: set SatellitePlacement (kept for tests not yet moved).
	GNSSInline bool
	banks      map[string]*bank

	// Observer is WithObserver for every capture.
	//
	// Deprecated: give Process WithObserver (kept for tests not yet
	// moved); a field swapped per capture on a shared pipeline is what
	// the options replace.
	Observer BlockObserver
}

// Option is a setting of one Process call: what a caller gives one
// capture's analysis without changing the pipeline the captures share.
type Option func(*processOptions)

type processOptions struct {
	observer BlockObserver
	meter    SatelliteMeter
	where    SatellitePlacement
	input    string
}

// WithInput names the daemon's input (watched folder) the capture was
// found in: it is part of the capture's identity, and so of its event ids
// (issue 17, item 6: two antennas' folders holding the same names and
// bytes are two captures, whose events must not share ids).
func WithInput(name string) Option {
	return func(o *processOptions) { o.input = name }
}

// WithObserver has obs see every block of the capture after the detectors
// ran (for reports: spectrograms, PSD, SK and pulses come from the same
// single FFT pass). It must not keep references to the block's slices.
func WithObserver(obs BlockObserver) Option {
	return func(o *processOptions) { o.observer = obs }
}

// WithSatellites has m measure the capture's satellites, where says,
// instead of the pipeline's GNSS (nil: none): for example a meter that
// gives back a capture record's satellites, so that a report redraws the
// capture without measuring them again.
func WithSatellites(m SatelliteMeter, where SatellitePlacement) Option {
	return func(o *processOptions) { o.meter, o.where = m, where }
}

// BlockObserver watches the pipeline's blocks.
type BlockObserver interface {
	// Begin starts a capture (block length in samples, FFT size, rate).
	Begin(c *ingest.Capture, blockLen, fftSize int)
	// Block sees one block: its features, references, SK and findings.
	Block(in *BlockInput, findings []Finding)
}

// Result is the outcome of one capture.
type Result struct {
	Events  []Event
	Record  CaptureRecord
	Elapsed time.Duration
	// Blocks is the number of blocks the capture was analysed in.
	Blocks int
}

// NewPipeline makes a pipeline with cfg (zero fields take defaults) and a
// shared state (nil: a fresh one).
func NewPipeline(cfg Config, state *State) *Pipeline {
	if state == nil {
		state = NewState()
	}
	return &Pipeline{cfg: cfg, state: state}
}

// State is what the pipeline remembers between captures: baselines and the
// interference episodes open at the end of the last capture of each input.
type State struct {
	Baselines *Baselines
	episodes  map[string][]openEpisode
}

type openEpisode struct {
	id     string
	class  string
	lo, hi float64
	end    time.Time
}

// NewState returns an empty state.
func NewState() *State {
	return &State{Baselines: NewBaselines(), episodes: map[string][]openEpisode{}}
}

// episodeGap is how long an interference may be unseen between the end
// of one capture and the start of the next and still be the same episode.
const episodeGap = 10 * time.Minute

// Fingerprint is a short hash of the effective configuration for a
// capture at rate fs, folded into event ids.
func (p *Pipeline) Fingerprint(fs float64) string {
	b, _ := json.Marshal(p.cfg.Defaults(fs))
	h := sha256.Sum256(append(b, Version...))
	return hex.EncodeToString(h[:8])
}

// Process analyses one capture. name is the capture's name relative to the
// watched root (it goes into the records). A read error mid-way returns the
// error; nothing is learned from such a capture. The GNSS meter, if any,
// measures the satellites during the pass (see SatellitePlacement). The
// options set what is this capture's own (WithObserver, WithSatellites).
func (p *Pipeline) Process(ctx context.Context, c *ingest.Capture, name string, opts ...Option) (*Result, error) {
	t0 := time.Now()
	o := processOptions{observer: p.Observer, meter: p.GNSS, where: p.SatellitePlacement}
	if p.GNSSInline {
		o.where = SatellitesInPass
	}
	for _, opt := range opts {
		opt(&o)
	}
	fs := c.SampleRate
	cfg := p.cfg.Defaults(fs)
	short := fitShort(&cfg, c.Samples)
	if err := cfg.Validate(); err != nil {
		return nil, err
	}
	center, hasCenter := c.CenterHz()
	key := BaselineKey(c.Format.String(), fs, center, hasCenter, cfg.FFTSize)
	base := p.state.Baselines.snapshot(key)
	blockLen := cfg.FFTSize * cfg.Frames
	r, err := c.NewReader(blockLen)
	if err != nil {
		return nil, err
	}
	defer r.Close()
	r.CheckFrontEnd()

	b := p.bankFor(cfg, fs)
	b.reset(&base, center, hasCenter)
	if o.observer != nil {
		o.observer.Begin(c, blockLen, cfg.FFTSize)
	}
	st, tr := &b.st, b.tr
	sats := startSatellites(ctx, c, o.meter, key, blockLen, o.where)
	// On every early return: abandon the satellites' own read and wait
	// for it, so that no goroutine outlives the call.
	defer sats.stop()
	for {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		blk, err := r.Next()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return nil, err
		}
		if blk.Start == 0 {
			lv := r.Levels()
			b.lowBit = lv.LowBit()
			b.lowT, _ = lv.Threshold()
		}
		b.block(blk, o.observer)
		sats.block(blk)
	}
	sha := r.SHA256()
	tr.finish()
	open := b.openAtEnd()
	measured, err := sats.result()
	if err != nil {
		return nil, err
	}
	st.gnssSkipped = measured.Skipped

	res := &Result{Blocks: st.blocks}
	fp := p.Fingerprint(fs)
	stats := st.stats(base.Power)
	stats.Satellites = measured.Satellites
	if stats.Satellites == nil {
		stats.Satellites = []Satellite{}
	}
	stats.GNSSSkipped = st.gnssSkipped
	stats.ClockOffsetHz = measured.ClockOffsetHz
	stats.SpectrumInverted = measured.SpectrumInverted
	if c.Spectrum != ingest.OrientationAuto {
		stats.SpectrumInverted = ptr(c.Spectrum == ingest.OrientationInverted)
	}
	switch {
	case base.Loaded:
		stats.Baseline = "loaded"
	case len(base.PSD) == cfg.FFTSize:
		stats.Baseline = "learned"
	default:
		stats.Baseline = "learning"
	}
	var notes []string
	if short != "" {
		notes = append(notes, short)
	}
	switch c.Spectrum {
	case ingest.OrientationInverted:
		notes = append(notes, "spectrum inverted by the input's configuration (spectrum: inverted): the samples were conjugated before analysis, so offsets and Dopplers are upright; the satellites did not test it")
	case ingest.OrientationUpright:
		notes = append(notes, "spectrum upright by the input's configuration (spectrum: upright): the satellites did not test it")
	}
	fe, _ := r.FrontEnd()
	fault := frontEndFault(fe, measured.DropSample, c)
	levels := fe.Levels
	if bits := levels.Bits(); bits > 0 {
		stats.Quantization = levels.String()
		if fe.HasOccupancy {
			db, sat := ingest.OccupancyLevelDB(fe.Occupancy)
			stats.OccupancyLevelDB = ptr(db)
			if sat {
				notes = append(notes, "the low-bit samples' magnitude occupancy is saturated: the level reported is a lower bound")
			}
		}
	}
	silent := fault != nil && (fault.Kind == FaultDead || fault.Kind == FaultStuck)
	if fault != nil && measured.Unmeasured == "" && fault.Kind != FaultGap {
		measured.Unmeasured = "the front end failed: " + fault.Detail
	}
	if silent {
		notes = append(notes, "no interference analysis: the front end delivered no signal ("+fault.Kind+")")
		tr.events = nil
		// What the satellite meter made of a constant is neither
		// interference mitigated nor satellites lost.
		measured.Notes = nil
	}
	if fault != nil && fault.Kind == FaultUnnormalised {
		// Its level is the converter's scaling (ingest's detail: every
		// dBFS figure is off), not a floor rise: no wideband_noise and
		// no power over the site's; the spectral shapes are analysed.
		kept := tr.events[:0]
		for _, ev := range tr.events {
			if ev.class != ClassWidebandNoise {
				kept = append(kept, ev)
			}
		}
		tr.events = kept
		stats.AGCDeviationDB, stats.PowerOverBaselineDB = 0, nil
		notes = append(notes, "no wideband_noise and no power over the site's: the samples are unnormalised, so their level is the converter's scaling")
	}
	if hasCenter {
		// In the frame of the samples analysed (turned upright when the
		// configuration said inverted).
		inverted := measured.SpectrumInverted != nil && *measured.SpectrumInverted
		tr.explainSatelliteLines(stats.Satellites, L1-center, inverted)
	}
	// A power rise the satellites did not feel is the recorder's gain
	// (REFERENCES §11.2): a wideband_noise finding is then not reported,
	// and the record says why.
	power := NewPowerStats(&stats, measured, fs)
	if pc, ok := ClassifyPowerCN0(measured, &base, power); ok && pc.Class == PowerCN0GainChange && !silent {
		kept := tr.events[:0]
		dropped := 0
		for _, ev := range tr.events {
			if ev.class == ClassWidebandNoise {
				dropped++
				continue
			}
			kept = append(kept, ev)
		}
		tr.events = kept
		if dropped > 0 {
			notes = append(notes, fmt.Sprintf("in-band power %+.1f dB over the site's with the satellites' C/N0 %+.1f dB: read as a gain change of the front end, not wideband noise", pc.PowerRiseDB, pc.CN0ChangeDB))
		}
	}
	// Episodes go on within an input (the State's "of each input"): two
	// antennas' captures of one time are not one episode (issue 17, item 6).
	epKey := key
	if o.input != "" {
		epKey = o.input + "\x00" + key
	}
	prev := p.state.episodes[epKey]
	var stillOpen []openEpisode
	episodes := map[*trackedEvent]string{}
	noise := b.noise
	if noise == 0 && b.in.Rise > 0 {
		noise = b.in.NoisePower / b.in.Rise // no block had minFrames frames
	}
	for _, ev := range tr.events {
		e := ev.toEvent(c, name, cfg, fs, center, hasCenter, noise)
		e.ID = eventID(sha, e.Class, e.SampleStart, e.OffsetHz, fp, o.input, c.MetadataSHA256())
		e.Episode = e.ID
		if ep, ok := episodes[ev.after]; ok && ev.after != nil {
			e.Episode = ep
		}
		episodes[ev] = e.Episode
		if ev.firstBlock == 0 {
			for _, o := range prev {
				if o.class == e.Class && overlaps(o.lo, o.hi, ev.lo, ev.hi) && !o.end.IsZero() &&
					!e.Start.IsZero() && e.Start.Sub(o.end) <= episodeGap && e.Start.Sub(o.end) >= -time.Second {
					e.Episode = o.id
					break
				}
			}
		}
		if e.OpenAtEnd = open[ev]; e.OpenAtEnd {
			stillOpen = append(stillOpen, openEpisode{id: e.Episode, class: e.Class, lo: ev.lo, hi: ev.hi, end: e.End.Time})
		}
		e.KnownAs, e.Known = knownAs(&e, cfg.KnownEmitters, center, hasCenter)
		res.Events = append(res.Events, e)
	}
	p.state.episodes[epKey] = stillOpen

	// C/N0 against the site's satellites: a drop raises a cn0_drop event,
	// linked to the spectral events that explain it.
	if drop, ok := cn0DropFrom(measured, &base, cfg.CN0DropDB); ok && st.gnssSkipped == "" && !silent {
		drop.Capture, drop.SampleStart, drop.SampleCount = name, 0, c.FileSamples
		drop.Start, drop.End = Time{c.SampleTime(0)}, Time{c.SampleTime(c.Samples)}
		drop.BandwidthHz = fs
		drop.PowerDBFS = stats.PowerDBFS
		if hasCenter {
			drop.CenterHz = ptr(center)
		}
		drop.ID = eventID(sha, drop.Class, 0, 0, fp, o.input, c.MetadataSHA256())
		drop.Episode = drop.ID
		drop.OpenAtEnd = true // measured over the whole capture
		for i := range res.Events {
			drop.Related = append(drop.Related, res.Events[i].ID)
			res.Events[i].Related = append(res.Events[i].Related, drop.ID)
		}
		for _, o := range prev {
			if o.class == ClassCN0Drop && !o.end.IsZero() && drop.Start.Sub(o.end) <= episodeGap {
				drop.Episode = o.id
			}
		}
		p.state.episodes[epKey] = append(p.state.episodes[epKey], openEpisode{id: drop.Episode, class: ClassCN0Drop, end: drop.End.Time})
		res.Events = append(res.Events, drop)
	}

	// Spoofing and meaconing, from the satellites themselves.
	if ev, ok := Spoofing(measured, &base, power, c.Start(), cfg); ok && st.gnssSkipped == "" && !silent {
		ev.Capture, ev.SampleStart, ev.SampleCount = name, 0, c.FileSamples
		ev.Start, ev.End = Time{c.SampleTime(0)}, Time{c.SampleTime(c.Samples)}
		ev.PowerDBFS = stats.PowerDBFS
		if hasCenter {
			ev.CenterHz = ptr(center)
		}
		ev.ID = eventID(sha, ev.Class, 0, 0, fp, o.input, c.MetadataSHA256())
		ev.Episode = ev.ID
		ev.OpenAtEnd = true // judged over the whole capture
		for _, o := range prev {
			if o.class == ClassSpoofing && !o.end.IsZero() && ev.Start.Sub(o.end) <= episodeGap {
				ev.Episode = o.id
			}
		}
		p.state.episodes[epKey] = append(p.state.episodes[epKey], openEpisode{id: ev.Episode, class: ClassSpoofing, end: ev.End.Time})
		res.Events = append(res.Events, ev)
	}

	if learnCN0(res.Events) && len(stats.Satellites) > 0 && measured.Unmeasured == "" && fault == nil {
		p.state.Baselines.LearnSky(key, measured, power, c.Start(), cfg)
		cn0 := map[int]float64{}
		for _, s := range stats.Satellites {
			cn0[s.PRN] = s.CN0DBHz
		}
		mean := StrongestMean(stats.Satellites, Strongest)
		p.state.Baselines.update(key, func(b *Baseline) {
			b.learnCN0(cn0, mean, cfg.BaselineWarmup, cfg.BaselineWeight)
		})
	}
	// The baseline learns the passband from every cell no event occupied
	// (floorLearner), so that a site whose captures all carry a spur or a
	// beacon still learns, and no interference is learned as normal.
	if psd, blocks, power := b.learner.mean(); blocks > 0 && fault == nil {
		skip := b.ref.skip
		for k := range skip {
			skip[k] = b.learner.cnt[k] == 0 || b.in.Excluded[k]
		}
		if fit, ok := b.ref.pb.Fit(psd, blocks*cfg.Frames, skip); ok {
			p.state.Baselines.update(key, func(bl *Baseline) {
				bl.FFTSize = cfg.FFTSize
				bl.learn(fit, blocks*cfg.Frames, power, c.Start(), cfg.BaselineWarmup, cfg.BaselineWeight)
			})
		}
	}

	// The capture's identity (issue 17, items 6 and 7): its input, on the
	// record and every event, and how its metadata reads the samples.
	rec := CaptureRecord{Capture: name, Input: o.input, SHA256: sha, MetadataSHA256: c.MetadataSHA256(), Format: c.Format.String(),
		SampleRate: c.FileSampleRate, Samples: c.FileSamples, Status: StatusOK, Events: len(res.Events), Stats: &stats, Fault: fault, Config: fp}
	for i := range res.Events {
		res.Events[i].Input = o.input
	}
	if c.Decimation > 1 {
		rec.AnalysisRateHz = ptr(fs)
	}
	if c.IF.IFHz != 0 {
		rec.IFHz = ptr(c.IF.IFHz)
		rec.LOSide = c.IF.Side.String()
	}
	if c.Spectrum != ingest.OrientationAuto {
		rec.Spectrum = c.Spectrum.String()
	}
	rec.Notes = append(append(rec.Notes, measured.Notes...), notes...)
	if hasCenter {
		rec.CenterHz = ptr(center)
	}
	if t := c.Start(); !t.IsZero() {
		rec.Start = &Time{t}
		rec.TimeSource = c.TimeSource
	}
	res.Record = rec
	res.Elapsed = time.Since(t0)
	return res, nil
}

// openAtEnd returns the capture's events that were still present at its
// end: those seen in its last block (the tracker's openAtEnd) and, when
// that block was too short for a spectral pass (only pulses are sought
// there), those held open through it that were seen in the block before,
// pulse trains excepted (the short block would have shown them). This is
// the one definition of "open at the end": the pipeline continues these
// events' episodes into the input's next capture, and Event.OpenAtEnd
// carries it to the daemon's interference-active gauges.
func (b *bank) openAtEnd() map[*trackedEvent]bool {
	open := map[*trackedEvent]bool{}
	for _, ev := range b.tr.open {
		if ev.openAtEnd || !b.spectral && ev.missed == 1 && ev.class != ClassPulsed {
			open[ev] = true
		}
	}
	return open
}

// frontEndFault turns the front-end check of a capture (and a sample drop
// the satellites saw, at analysed sample drop) into the record's fault:
// nil when none.
func frontEndFault(fe ingest.FrontEnd, drop *int64, c *ingest.Capture) *Fault {
	switch fe.Fault.Kind {
	case ingest.FaultDead:
		return &Fault{Kind: FaultDead, Detail: fe.Fault.Detail}
	case ingest.FaultStuck:
		return &Fault{Kind: FaultStuck, Detail: fe.Fault.Detail}
	case ingest.FaultUnnormalised:
		return &Fault{Kind: FaultUnnormalised, Detail: fe.Fault.Detail}
	case ingest.FaultGap:
		return &Fault{Kind: FaultGap, Detail: fe.Fault.Detail}
	}
	if drop != nil {
		return &Fault{Kind: FaultGap, Detail: fmt.Sprintf("every satellite tracked lost lock at once near sample %d (%.3f s): a sample drop in the recording",
			c.FileSample(*drop), float64(*drop)/c.SampleRate)}
	}
	return nil
}

// learnCN0 reports whether a capture with these events may teach the
// site's C/N0 baseline: not when its satellites were degraded (a cn0_drop)
// or when an interference predicted to cost them more than 1 dB was
// present (a weak spur that is always there does not stop learning).
func learnCN0(evs []Event) bool {
	for _, e := range evs {
		if e.Class == ClassCN0Drop || e.Class == ClassWidebandNoise || e.Class == ClassSpoofing {
			return false
		}
		if e.Impact != nil && e.Impact.CN0DegradationDB > 1 {
			return false
		}
	}
	return true
}

// eventID is an event's id: the first 12 bytes of the SHA-256 of the
// capture's identity (its data's SHA-256 sha, its input and its metadata's
// ReadingSHA256 meta, issue 17 items 6 and 7), the event's class, first
// sample and offset, and the configuration fingerprint fp. The same event
// of the same capture gets the same id at every analysis; the same bytes
// under another input, or read with corrected metadata, give other ids.
// An empty input or meta adds nothing (the ids of a raw capture replayed
// are those of before).
func eventID(sha, class string, start int64, offset float64, fp, input, meta string) string {
	b := fmt.Appendf(nil, "%s|%s|%d|%.0f|%s", sha, class, start, offset, fp)
	if meta != "" {
		b = append(append(b, "|metadata:"...), meta...)
	}
	if input != "" {
		b = append(append(b, "|input:"...), input...)
	}
	h := sha256.Sum256(b)
	return hex.EncodeToString(h[:12])
}

func overlaps(a0, a1, b0, b1 float64) bool { return a0 <= b1 && b0 <= a1 }

// statsAcc accumulates the capture statistics over blocks.
type statsAcc struct {
	blocks      int
	samples     int64
	p2, p4      float64
	clipped     int64
	skMax       float64
	floors      []float64
	seen        int
	stride      int
	gnssSkipped string
}

// maxFloors bounds the per-block noise-floor values kept for a capture's
// median.
const maxFloors = 1024

func (s *statsAcc) add(in *BlockInput, clipped int) {
	f := in.F
	n := float64(f.Samples)
	s.blocks++
	s.samples += int64(f.Samples)
	s.p2 += f.Power * n
	s.p4 += f.Moment4 * n
	s.clipped += int64(clipped)
	if f.Frames >= 16 {
		for k, v := range in.SK {
			if !in.Excluded[k] && v > s.skMax {
				s.skMax = v
			}
		}
	}
	if f.Frames > 0 {
		// Noise floor: the noise reference's power in the capture band
		// (robust against narrow interference). One value per block, kept in a bounded reservoir: past maxFloors values, every
		// other one is dropped and only every other block is kept, so the
		// median is over evenly spaced blocks of the whole capture.
		s.seen++
		if s.seen%s.stride == 0 {
			s.floors = append(s.floors, in.NoisePower)
			if len(s.floors) == maxFloors {
				for i := 0; i < maxFloors/2; i++ {
					s.floors[i] = s.floors[2*i+1]
				}
				s.floors = s.floors[:maxFloors/2]
				s.stride *= 2
			}
		}
	}
}

func (s *statsAcc) power() float64 {
	if s.samples == 0 {
		return 0
	}
	return s.p2 / float64(s.samples)
}

func (s *statsAcc) stats(basePower float64) Stats {
	p := s.power()
	st := Stats{PowerDBFS: dB(p), ClipFraction: float64(s.clipped) / math.Max(float64(s.samples), 1)}
	if len(s.floors) > 0 {
		st.NoiseFloorDBFS = dB(medianOf(s.floors))
	}
	if basePower > 0 && p > 0 {
		st.AGCDeviationDB = 10 * math.Log10(p/basePower)
		st.PowerOverBaselineDB = ptr(st.AGCDeviationDB)
	}
	if !math.IsInf(s.skMax, 0) {
		st.SKMax = s.skMax
	}
	if p > 0 {
		st.KurtosisRatio = s.p4 / float64(s.samples) / (p * p)
	}
	return st
}

func dB(x float64) float64 {
	if x <= 0 {
		return -300
	}
	return 10 * math.Log10(x)
}

// fromDB is the power ratio of db decibels, 10^(db/10), computed as
// e^(db·ln10/10): about twice as fast as math.Pow, for the footprints'
// per-tone loops (combs of a sweep hold hundreds of tones).
func fromDB(db float64) float64 {
	return math.Exp(db * (math.Ln10 / 10))
}

// BlockLen is the number of samples per block for a capture at rate fs.
func (p *Pipeline) BlockLen(fs float64) int {
	c := p.cfg.Defaults(fs)
	return c.FFTSize * c.Frames
}

// bank is the per-capture machinery of the spectral pass: the engine, the
// detectors and the tracker, with every buffer they need. A pipeline keeps
// one per FFT size and rate and reuses it, so that the steady state of the
// pass allocates nothing.
type bank struct {
	cfg       Config
	eng       *Spectrum
	sk        *SpectralKurtosis
	pulse     *Pulse
	detectors []Detector
	thr       thresholdCache
	in        BlockInput
	tr        *tracker
	st        statsAcc
	ref       *NoiseReference
	learner   floorLearner
	occupied  []bool
	lowBit    bool    // the capture's samples take a low-bit quantizer's few levels
	lowT      float32 // and this magnitude threshold, when symmetric
	findings  []Finding
	center    float64
	hasCenter bool
	// noise is the thermal noise power per sample of the last block with
	// minFrames frames (the events' J/N reference): a capture's short last
	// block has no spectral pass and no noise estimate of its own.
	noise float64
	// spectral says that the latest block had a spectral pass (at least
	// minFrames frames); a capture's short last block may not.
	spectral bool
}

func (p *Pipeline) bankFor(cfg Config, fs float64) *bank {
	key := fmt.Sprintf("%d/%d/%g", cfg.FFTSize, cfg.Frames, fs)
	if p.banks == nil {
		p.banks = map[string]*bank{}
	}
	if b, ok := p.banks[key]; ok {
		b.cfg = cfg
		return b
	}
	b := &bank{cfg: cfg, eng: NewSpectrum(cfg.FFTSize, cfg.Frames, fs), sk: &SpectralKurtosis{}, pulse: &Pulse{},
		ref: newNoiseReference(cfg.FFTSize), occupied: make([]bool, cfg.FFTSize)}
	b.in.Excluded = make([]bool, cfg.FFTSize)
	b.detectors = []Detector{b.sk, CW{}, NoiseBand{}, &Swept{}, b.pulse}
	p.banks[key] = b
	return b
}

// reset prepares the bank for a new capture over the input's baseline.
func (b *bank) reset(base *Baseline, center float64, hasCenter bool) {
	b.center, b.hasCenter, b.lowBit, b.lowT, b.noise = center, hasCenter, false, 0, 0
	fs := b.eng.fs
	var prev []float32
	if b.tr != nil {
		prev = b.tr.prev
	}
	b.tr = newTracker(b.cfg, fs, b.cfg.FFTSize*b.cfg.Frames)
	b.tr.prev = prev[:0]
	b.st = statsAcc{skMax: math.Inf(-1), floors: b.st.floors[:0], stride: 1}
	b.ref.reset(base.PSD, base.Frames)
	b.learner.reset(b.cfg.FFTSize)
	b.in.Cfg = &b.cfg
	exclusions(b.in.Excluded, b.cfg.FFTSize, fs, &b.cfg, center, hasCenter)
}

// block runs the spectral pass over one block; obs, if any, sees the block
// before the tracker takes its frame matrix.
func (b *bank) block(blk ingest.Block, obs BlockObserver) {
	f := b.eng.Analyze(blk.Start, blk.Samples, blk.Clipped)
	in := &b.in
	in.F, in.Samples, in.Cfg = f, blk.Samples, &b.cfg
	in.Compressed = b.lowBit || float64(blk.Clipped) > compressedClip*float64(len(blk.Samples))
	in.LowBitThreshold = b.lowT
	b.sk.Compute(in)
	b.ref.apply(in, &b.thr)
	fnd := b.findings[:0]
	b.spectral = f.Frames >= minFrames
	if b.spectral {
		// A wideband rise is interference too: the narrow detectors then
		// measure against the raised floor, and J/N against the thermal.
		fnd = NoiseFloor{}.Detect(in, fnd)
		if len(fnd) > 0 {
			in.Rise = in.LevelRise
		}
		for _, d := range b.detectors {
			fnd = d.Detect(in, fnd)
		}
		b.noise = in.NoisePower / in.Rise
	} else {
		fnd = b.pulse.Detect(in, fnd)
	}
	b.findings = fnd
	if obs != nil {
		obs.Block(in, fnd)
	}
	b.tr.block(in, fnd)
	b.st.add(in, blk.Clipped)
	whole := b.tr.occupied(b.occupied)
	b.ref.busy = whole
	if f.Frames == b.cfg.Frames {
		b.learner.add(f, b.occupied, whole)
	} else {
		b.learner.add(nil, b.occupied, whole)
	}
}
