package detect

import (
	"math"
	"sort"

	"quietband/ingest"
)

// The classifier fuses the findings of one block into class decisions and
// merges them across blocks into events.
//
// Per block: a swept finding claims the CW and noise-band findings inside
// its span (a periodic chirp's line spectrum looks like many tones); SK
// evidence whose band overlaps a class finding of the matching kind (low
// for cw and swept, high for pulsed) adds the SK detector to it; a lone SK
// finding raises nothing (SK is blind at 50 % duty cycle and must not stand
// alone).
//
// Across blocks: a finding extends the open event of its class whose band
// overlaps it; otherwise it opens one. An event survives HoldBlocks blocks
// without a finding (hysteresis against flapping) and then closes. Its
// start and end are refined to the frame (about 200 µs) from the per-frame
// power in its band: frames whose excess exceeds half the event's mean
// per-frame excess count as active. Pulse trains take their first and last
// pulse instead.

type tracker struct {
	cfg      Config
	fs       float64
	blockLen int
	open     []*trackedEvent
	events   []*trackedEvent
	blockNo  int
	prev     []float32 // previous block's frame matrix
	prevF    Features
	last     *BlockInput
	order    []int // scratch of explainBlock
	grid     grid  // the block's, for explainBlock
	// compressed says that some block of the capture drove the front end
	// into its nonlinear range (nonlinear.go).
	compressed bool
	act        []float64 // scratch of frameActivity
}

type trackedEvent struct {
	class      string
	lo, hi     float64
	detectors  map[string]bool
	firstBlock int
	missed     int
	openAtEnd  bool
	start, end int64 // samples, end exclusive
	jnSum      float64
	jnPeak     float64
	hits       int
	excess     []float64 // summed excess PSD over the hits (for impact)
	tones      []ToneParam
	sweep      *SweepParams
	pulse      PulseParams
	pulseHits  int
	widthSum   float64
	priSum     float64
	pairSum    float64
	pairHits   int
	groups     []float64 // pulse (pair) arrival times, capture samples
	channels   []float64 // a hopper's channels
	riseSum    float64
	bandBins   [][2]int
	frameLevel float64 // mean per-frame excess while present
	// last is the event's finding of the latest block it was seen in, and
	// rep its strongest: the emitter whose footprint explains others
	// (footprint.go). Their pulse spectra are copies the event owns.
	last, rep           Finding
	lastLobes, repLobes []float32
	// after is the event of the same emitter that ended before this one
	// began in the same capture (it was switched off and on again): they
	// share an episode.
	after *trackedEvent
}

// finding is the event as one finding: its class, band, mean J/N and
// tones, for the footprints of explainEvents.
func (e *trackedEvent) finding() Finding {
	x := Finding{Class: e.class, LowHz: e.lo, HighHz: e.hi, JN: e.jnSum / float64(max(e.hits, 1))}
	if e.class == ClassCW {
		x.Tones = append([]ToneParam(nil), e.tones...)
		x.JN = 0
		for _, t := range x.Tones {
			x.JN += fromDB(t.JNDB)
		}
	}
	return x
}

// maxEventGroups bounds the pulse arrival times an event keeps for its PRI
// fit (memory stays bounded on long captures).
const maxEventGroups = 1 << 14

func newTracker(cfg Config, fs float64, blockLen int) *tracker {
	return &tracker{cfg: cfg, fs: fs, blockLen: blockLen}
}

func (t *tracker) block(in *BlockInput, fs []Finding) {
	f := in.F
	bin := f.Fs / float64(f.N)
	// Fusion within the block: a tone that keys on or off inside the
	// block leaks over many bins (its footprint says how far), and every
	// finding that a stronger emitter's footprint accounts for is
	// absorbed (footprint.go).
	for i := range fs {
		if x := &fs[i]; x.Class == ClassCW && len(x.Tones) > 0 {
			x.keyed = t.keyed(in, x)
		}
	}
	t.compressed = t.compressed || in.Compressed
	tones := t.grid.tones[:0]
	for i := range fs {
		if fs[i].Class != ClassCW {
			continue
		}
		for _, tn := range fs[i].Tones {
			// Tones that can drive a front end into its nonlinear range
			// (limiterProduct); weaker ones are their products.
			if tn.JNDB >= limiterToneDB {
				tones = append(tones, tn)
			}
		}
	}
	t.grid = grid{bin: bin, fs: f.Fs, frames: max(f.Frames, 1), irr: t.cfg.ImageRejectionDB, compressed: in.Compressed, tones: tones}
	t.explainBlock(fs, &t.grid)
	var classed []Finding
	for _, x := range fs {
		if x.Class == "" || (x.Class == ClassCW && (len(x.Tones) == 0 || isSweepComb(x.Tones))) {
			continue
		}
		classed = append(classed, x)
	}
	matched := map[*trackedEvent]bool{}
	for _, x := range classed {
		var ev *trackedEvent
		for _, o := range t.open {
			if o.class == x.Class && !matched[o] && (x.Class == ClassWidebandNoise ||
				overlaps(o.lo, o.hi, x.LowHz, x.HighHz) || sameSlowSweep(o.sweep, x.Sweep)) {
				ev = o
				break
			}
		}
		var before *trackedEvent
		if ev != nil && ev.missed > 0 && t.gapBefore(in, ev, x) {
			// The emitter was off for at least a block and came back: a
			// new event of the same episode.
			before, ev = ev, nil
			for i, o := range t.open {
				if o == before {
					t.open = append(t.open[:i], t.open[i+1:]...)
					break
				}
			}
		}
		if ev == nil {
			ev = &trackedEvent{class: x.Class, lo: x.LowHz, hi: x.HighHz, detectors: map[string]bool{},
				firstBlock: t.blockNo, start: f.Start, excess: make([]float64, f.N), after: before}
			ev.setBand(f, x)
			ev.frameLevel = x.JN * in.NoisePower / in.Rise
			ev.start = t.refineStart(in, ev)
			t.open = append(t.open, ev)
			t.events = append(t.events, ev)
		}
		matched[ev] = true
		ev.absorb(t, in, x, fs)
		ev.missed = 0
		if ev.firstBlock == t.blockNo-1 && ev.hits == 2 && ev.class != ClassPulsed {
			// The event opened in the previous block, which the
			// interference may have filled too little to measure it well:
			// with the band and level now known, find its start again
			// among that block's frames.
			ev.start = t.startInPrevious(in, ev)
		}
	}
	for _, o := range t.open {
		if !matched[o] {
			o.missed++
			if o.class != ClassPulsed {
				if end := t.activeEnd(in, o); end > o.end {
					o.end = end
				}
			}
		}
	}
	kept := t.open[:0]
	for _, o := range t.open {
		if o.missed <= t.cfg.HoldBlocks {
			kept = append(kept, o)
		}
	}
	t.open = kept
	// Keep this block's frames for the next block's start refinement: swap
	// the frame matrix with the one kept from the block before, which the
	// engine then overwrites (no copy).
	t.prevF = *f
	if len(t.prev) == len(f.FramePSD) {
		t.prev, f.FramePSD = f.FramePSD, t.prev
	} else {
		t.prev = append(t.prev[:0], f.FramePSD...)
	}
	t.last = in
	t.blockNo++
}

// occupied marks in mask the bins that the events open after the last
// block occupy (their bands, with two bins of margin; an event missed in a
// block but still held open may be there unmeasured), and reports whether
// the whole block is taken (a wideband rise, a pulse train or a sweep
// spreads over every bin): what the baseline must not learn.
func (t *tracker) occupied(mask []bool) bool {
	clear(mask)
	f := &t.prevF
	for _, o := range t.open {
		switch o.class {
		case ClassWidebandNoise, ClassPulsed, ClassSwept:
			return true
		}
		for _, b := range o.bandBins {
			for k := max(b[0]-2, 0); k <= min(b[1]+2, f.N-1); k++ {
				mask[k] = true
			}
		}
	}
	return false
}

// finish marks the events still active in the last block, drops the
// events another event accounts for (explainEvents) and sorts them.
func (t *tracker) finish() {
	for _, o := range t.open {
		o.openAtEnd = o.missed == 0
	}
	t.explainEvents()
	sort.SliceStable(t.events, func(i, j int) bool {
		if t.events[i].start != t.events[j].start {
			return t.events[i].start < t.events[j].start
		}
		return t.events[i].class < t.events[j].class
	})
}

// keyed reports whether a CW finding's tones are present in only part of
// the block's frames (switched on or off inside it): a frame's power in
// a tone's bins (±maxToneHalfWidth) falls below half of the tone's power
// over the floor.
func (t *tracker) keyed(in *BlockInput, x *Finding) bool {
	f := in.F
	for _, tn := range x.Tones {
		k := f.Bin(tn.OffsetHz)
		lo, hi := max(k-maxToneHalfWidth, 0), min(k+maxToneHalfWidth, f.N-1)
		var floor float64
		for j := lo; j <= hi; j++ {
			floor += in.Floor[j]
		}
		p := math.Pow(10, tn.JNDB/10) * in.NoisePower
		for i := 0; i < f.Frames; i++ {
			fr := f.Frame(i)
			var s float64
			for j := lo; j <= hi; j++ {
				s += float64(fr[j])
			}
			if s-floor < p/2 {
				return true
			}
		}
	}
	return false
}

func (e *trackedEvent) setBand(f *Features, x Finding) {
	e.bandBins = e.bandBins[:0]
	if x.Class == ClassCW {
		for _, tn := range x.Tones {
			k := f.Bin(tn.OffsetHz)
			e.bandBins = append(e.bandBins, [2]int{max(k-3, 0), min(k+3, f.N-1)})
		}
		return
	}
	e.bandBins = append(e.bandBins, [2]int{f.Bin(x.LowHz), f.Bin(x.HighHz)})
}

// frameExcess is the excess power of a frame in the event band over the
// thermal floor (the block's floor without any wideband rise, summed over
// the band by floorIn).
func (e *trackedEvent) frameExcess(frame []float32, floor float64) float64 {
	var s float64
	for _, b := range e.bandBins {
		for _, v := range frame[b[0] : b[1]+1] {
			s += float64(v)
		}
	}
	return s - floor
}

// floorIn is the thermal floor summed over the event's bins, Σ Floor_k/Rise
// (the same for every frame of a block: frameExcess subtracts it once).
func (e *trackedEvent) floorIn(in *BlockInput) float64 {
	var s float64
	for _, b := range e.bandBins {
		for _, v := range in.Floor[b[0] : b[1]+1] {
			s += v
		}
	}
	return s / in.Rise
}

// The start and end of an event within blocks come from the per-frame
// excess x_i of its band over the thermal floor, against the level
// ℓ = half of the event's mean per-frame excess: the start is the frame s
// that maximizes Σ_{i≥s}(x_i − ℓ), the end the frame e that maximizes
// Σ_{i<e}(x_i − ℓ) (the maximum-likelihood change point of a step in the
// mean, the CUSUM estimate; Page 1954, from memory). A frame dipping
// under ℓ by chance does not cut a weak emitter short, as a frame-by-frame
// test would.

// frameActivity fills t.act with x_i − ℓ for the frames of the previous
// block (when prev) and of this one, and returns the index of this
// block's first frame in it.
func (t *tracker) frameActivity(in *BlockInput, e *trackedEvent, prev bool) int {
	f := in.F
	lvl := e.frameLevel / 2
	floor := e.floorIn(in)
	act := t.act[:0]
	if prev && t.prevF.Frames > 0 && t.prevF.N == f.N {
		n := f.N
		for i := 0; i < t.prevF.Frames; i++ {
			act = append(act, e.frameExcess(t.prev[i*n:(i+1)*n], floor)-lvl)
		}
	}
	first := len(act)
	for i := 0; i < f.Frames; i++ {
		act = append(act, e.frameExcess(f.Frame(i), floor)-lvl)
	}
	t.act = act
	return first
}

// changeStart returns the s maximizing Σ_{i≥s} act[i].
func changeStart(act []float64) int {
	best, at, sum := 0.0, len(act), 0.0
	for i := len(act) - 1; i >= 0; i-- {
		sum += act[i]
		if sum >= best {
			best, at = sum, i
		}
	}
	return at
}

// changeEnd returns the e maximizing Σ_{i<e} act[i] (0 when no prefix is
// positive).
func changeEnd(act []float64) int {
	best, at, sum := 0.0, 0, 0.0
	for i, v := range act {
		sum += v
		if sum > best {
			best, at = sum, i+1
		}
	}
	return at
}

// splitGap is the shortest silence, at frame resolution, that ends an
// event when its emitter comes back after missing whole blocks: an
// emitter keyed off and on is reported as one event per transmission.
const splitGap = 1e-3

// gapBefore reports whether finding x, matched to open event e that was
// missed in the last blocks, starts after a silence of at least splitGap
// since e's last activity.
func (t *tracker) gapBefore(in *BlockInput, e *trackedEvent, x Finding) bool {
	f := in.F
	start := f.Start
	if e.class == ClassPulsed {
		if x.Pulse == nil || x.End <= 0 {
			return false
		}
		start = x.Start
		gap := float64(start-e.end) / f.Fs
		return gap >= math.Max(4*x.Pulse.PRIS, float64(f.Samples)/f.Fs)
	}
	if e.frameLevel > 0 && f.Frames > 0 {
		t.frameActivity(in, e, false)
		if s := changeStart(t.act); s < len(t.act) {
			start = f.Start + int64(s*f.N)
		}
	}
	return float64(start-e.end)/f.Fs >= math.Max(splitGap, 2*float64(f.N)/f.Fs)
}

// refineStart finds the start of a new event in its first block, looking
// back into the previous block when the activity runs into it.
func (t *tracker) refineStart(in *BlockInput, e *trackedEvent) int64 {
	f := in.F
	if e.class == ClassPulsed || e.frameLevel <= 0 || f.Frames == 0 {
		return f.Start
	}
	first := t.frameActivity(in, e, true)
	s := changeStart(t.act)
	if s >= len(t.act) {
		return f.Start
	}
	return f.Start + int64((s-first)*f.N)
}

// startInPrevious is the start found again when the event's second block
// is in, with its band and level now better known (the previous block,
// where it opened, may have held too little of it to measure).
func (t *tracker) startInPrevious(in *BlockInput, e *trackedEvent) int64 {
	first := t.frameActivity(in, e, true)
	s := changeStart(t.act)
	if s >= len(t.act) {
		// No frame carries the event's level (a sweep seen only as
		// short bursts): the start found when it opened stands.
		return e.start
	}
	if s == 0 {
		// Active all through the previous block: the start found when
		// the event opened, possibly earlier still, stands.
		return min(e.start, in.F.Start-int64(first*in.F.N))
	}
	return in.F.Start + int64((s-first)*in.F.N)
}

// activeEnd is the end of the event's activity within a block (0 when it
// is not active there).
func (t *tracker) activeEnd(in *BlockInput, e *trackedEvent) int64 {
	f := in.F
	if e.frameLevel <= 0 || f.Frames == 0 {
		return 0
	}
	t.frameActivity(in, e, false)
	end := changeEnd(t.act)
	if end == 0 {
		return 0
	}
	return f.Start + int64(end*f.N)
}

func (e *trackedEvent) absorb(t *tracker, in *BlockInput, x Finding, all []Finding) {
	f := in.F
	e.last = x
	e.lastLobes = append(e.lastLobes[:0], x.sidelobes...)
	e.last.sidelobes = e.lastLobes
	if x.JN >= e.rep.JN || e.rep.Class == "" {
		e.rep = x
		e.repLobes = append(e.repLobes[:0], x.sidelobes...)
		e.rep.sidelobes = e.repLobes
	}
	e.hits++
	e.detectors[x.Detector] = true
	for _, s := range all {
		if s.Class != "" || !overlaps(s.LowHz, s.HighHz, x.LowHz, x.HighHz) {
			continue
		}
		if (s.Evidence == "sk_low" && (x.Class == ClassCW || x.Class == ClassSwept)) ||
			(s.Evidence == "sk_high" && x.Class == ClassPulsed) {
			e.detectors[s.Detector] = true
		}
	}
	if x.Class != ClassSwept {
		e.lo, e.hi = math.Min(e.lo, x.LowHz), math.Max(e.hi, x.HighHz)
	}
	e.jnSum += x.JN
	e.jnPeak = math.Max(e.jnPeak, x.JN)
	// The interference spectrum for the impact estimate, over the thermal
	// floor (a wideband rise is interference too).
	for k := range e.excess {
		if !in.Excluded[k] {
			e.excess[k] += max(f.PSD[k]-in.Floor[k]/in.Rise, 0)
		}
	}
	// Activity within this block.
	switch {
	case x.Class == ClassPulsed && x.End > 0:
		if e.hits == 1 {
			e.start = x.Start
		}
		e.end = x.End
	default:
		e.frameLevel += (x.JN*in.NoisePower/in.Rise - e.frameLevel) / float64(e.hits)
		if end := t.activeEnd(in, e); end > 0 {
			e.end = end
		} else {
			e.end = f.Start + int64(f.Samples)
		}
	}
	switch x.Class {
	case ClassCW:
		e.tones = mergeTones(e.tones, x.Tones, f.Fs/float64(f.N)*3)
		e.setBand(f, Finding{Class: ClassCW, Tones: e.tones})
	case ClassSwept:
		if x.Sweep.Slow && (e.sweep == nil || e.sweep.Slow) {
			// A sweep slower than a block: each block sees a stretch of
			// its ramp; the event gathers the span and the flybacks.
			if e.sweep == nil {
				s := *x.Sweep
				s.FlybackAt = nil
				e.sweep = &s
			} else {
				e.sweep.LowHz = math.Min(e.sweep.LowHz, x.Sweep.LowHz)
				e.sweep.HighHz = math.Max(e.sweep.HighHz, x.Sweep.HighHz)
				if x.Sweep.Fit > e.sweep.Fit {
					e.sweep.RateHzS, e.sweep.Fit, e.sweep.Shape = x.Sweep.RateHzS, x.Sweep.Fit, x.Sweep.Shape
				}
			}
			e.sweep.FlybackAt = append(e.sweep.FlybackAt, x.Sweep.FlybackAt...)
			e.lo, e.hi = e.sweep.LowHz, e.sweep.HighHz
			e.setBand(f, Finding{LowHz: e.lo, HighHz: e.hi})
			break
		}
		// The most coherent fold measures the sweep best (a block the
		// sweep only partly fills folds poorly); its band is the event's.
		if e.sweep == nil || e.sweep.Slow || x.Sweep.Coherent > e.sweep.Coherent {
			s := *x.Sweep
			e.sweep = &s
			e.lo, e.hi = s.LowHz, s.HighHz
			e.setBand(f, Finding{LowHz: s.LowHz, HighHz: s.HighHz})
		}
	case ClassNarrowbandNoise, ClassPulsed, ClassWidebandNoise:
		e.setBand(f, Finding{LowHz: e.lo, HighHz: e.hi})
	}
	switch x.Class {
	case ClassPulsed:
		p := x.Pulse
		e.pulseHits++
		e.pulse.Pulses += p.Pulses
		e.widthSum += p.WidthS
		e.priSum += p.PRIS
		for _, g := range p.Groups {
			if len(e.groups) < maxEventGroups {
				e.groups = append(e.groups, float64(g))
			}
		}
		if p.PairSpacingS > 0 {
			e.pairSum += p.PairSpacingS
			e.pairHits++
		}
		for _, ch := range p.Channels {
			found := false
			for i, c := range e.channels {
				if math.Abs(c-ch) <= 1/math.Max(p.WidthS, 1e-9) {
					e.channels[i] = (c + ch) / 2
					found = true
					break
				}
			}
			if !found {
				e.channels = append(e.channels, ch)
			}
		}
	}
	if x.Class == ClassWidebandNoise {
		e.riseSum += x.FloorRiseDB
	}
}

// sameSlowSweep reports whether two stretches of sweeps slower than a
// block are one sweep: their bands move from block to block (and jump at a
// flyback), but their rates agree to within a fifth.
func sameSlowSweep(a, b *SweepParams) bool {
	return a != nil && b != nil && a.Slow && b.Slow && a.RateHzS*b.RateHzS > 0 &&
		math.Abs(a.RateHzS-b.RateHzS) <= 0.2*math.Abs(a.RateHzS)
}

// mergeTones adds the tones of a block to those already known, averaging
// the ones within tol Hz of each other.
func mergeTones(have, add []ToneParam, tol float64) []ToneParam {
	for _, a := range add {
		found := false
		for i := range have {
			if math.Abs(have[i].OffsetHz-a.OffsetHz) <= tol {
				have[i].OffsetHz = (have[i].OffsetHz + a.OffsetHz) / 2
				have[i].JNDB = math.Max(have[i].JNDB, a.JNDB)
				found = true
				break
			}
		}
		if !found {
			have = append(have, a)
		}
	}
	sort.Slice(have, func(i, j int) bool { return have[i].OffsetHz < have[j].OffsetHz })
	return have
}

// toEvent writes the tracked event as an event record (id and episode are
// set by the caller).
func (e *trackedEvent) toEvent(c *ingest.Capture, name string, cfg Config, fs, center float64, hasCenter bool, noise float64) Event {
	start, end := max(e.start, 0), min(e.end, c.Samples)
	if end <= start {
		end = min(start+int64(cfg.FFTSize), c.Samples)
	}
	// Sample indices are the file's (a real capture's file holds twice
	// the samples analysed).
	ev := Event{Class: e.class, Capture: name, SampleStart: c.FileSample(start), SampleCount: c.FileSample(end) - c.FileSample(start),
		Start: Time{c.SampleTime(start)}, End: Time{c.SampleTime(end)}, Detectors: sortedKeys(e.detectors)}
	jn := e.jnSum / float64(max(e.hits, 1))
	ev.OffsetHz = (e.lo + e.hi) / 2
	ev.BandwidthHz = e.hi - e.lo
	meanPower := jn * noise
	switch e.class {
	case ClassCW:
		strongest := e.tones[0]
		for _, t := range e.tones {
			if t.JNDB > strongest.JNDB {
				strongest = t
			}
		}
		ev.OffsetHz = strongest.OffsetHz
		ev.BandwidthHz = e.hi - e.lo
		ev.Params.Tones = e.tones
	case ClassSwept:
		s := e.sweep
		ev.OffsetHz = (s.LowHz + s.HighHz) / 2
		ev.BandwidthHz = s.HighHz - s.LowHz
		period := s.PeriodS
		if s.Slow && period == 0 {
			// Slower than a block: the period is the spacing of the
			// flybacks seen, else at least the time the span seen took.
			if len(s.FlybackAt) >= 2 {
				d := make([]float64, len(s.FlybackAt)-1)
				for i := range d {
					d[i] = float64(s.FlybackAt[i+1] - s.FlybackAt[i])
				}
				period = medianOf(d) / fs
			} else if s.RateHzS != 0 {
				period = (s.HighHz - s.LowHz) / math.Abs(s.RateHzS)
				ev.Params.PeriodIsLowerBound = true
			}
		}
		ev.Params.SweepPeriodS = ptr(period)
		ev.Params.SweepLowHz = ptr(s.LowHz)
		ev.Params.SweepHighHz = ptr(s.HighHz)
		ev.Params.SweepRateHzPerS = ptr(s.RateHzS)
		ev.Params.Shape = s.Shape
		span := s.SpanHz
		if span <= 0 {
			span = s.HighHz - s.LowHz
		}
		ev.Params.SweepSpanHz = ptr(span)
		ev.Params.SpanExceedsBand = s.Beyond
	case ClassPulsed:
		h := float64(max(e.pulseHits, 1))
		w := e.widthSum / h
		ev.Params.PulseWidthS = ptr(w)
		prival := e.priSum / h
		if len(e.groups) >= 2 {
			prival = pri(e.groups) / fs
		}
		ev.Params.PRIS = ptr(prival)
		ev.Params.Pulses = ptr(e.pulse.Pulses)
		dur := float64(ev.SampleCount) / fs
		duty := math.Min(1, float64(e.pulse.Pulses)*w/math.Max(dur, 1/fs))
		ev.Params.DutyCycle = ptr(duty)
		if e.pairHits > 0 {
			ev.Params.PairSpacingS = ptr(e.pairSum / float64(e.pairHits))
		}
		if len(e.channels) > 1 {
			ev.Params.ChannelsHz = append([]float64(nil), e.channels...)
			sort.Float64s(ev.Params.ChannelsHz)
		}
		jn = e.jnPeak
		meanPower = jn * noise * duty
	case ClassWidebandNoise:
		ev.Params.FloorRiseDB = ptr(e.riseSum / float64(max(e.hits, 1)))
		ev.OffsetHz, ev.BandwidthHz = 0, fs
	case ClassNarrowbandNoise:
		ev.Params.FloorRiseDB = ptr(10 * math.Log10(1+jn*fs/math.Max(ev.BandwidthHz, fs/float64(cfg.FFTSize))))
	}
	if ev.BandwidthHz <= 0 {
		ev.BandwidthHz = fs / float64(cfg.FFTSize)
	}
	ev.JNDB = 10 * math.Log10(math.Max(jn, 1e-30))
	ev.PowerDBFS = 10 * math.Log10(math.Max(jn*noise, 1e-30))
	if hasCenter {
		ev.CenterHz = ptr(center + ev.OffsetHz)
		if math.Abs(center-L1) < fs/2 {
			n := len(e.excess)
			off := func(i int) float64 { return center - L1 + float64(i-n/2)*fs/float64(n) }
			ev.Impact = &Impact{CN0DegradationDB: CN0Degradation(e.excess, off, meanPower, noise/fs, cfg.ReceiverBandwidthHz)}
		}
	}
	return ev
}

func sortedKeys(m map[string]bool) []string {
	out := make([]string, 0, len(m))
	for k := range m {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}
