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
	riseSum    float64
	bandBins   [][2]int
	frameLevel float64 // mean per-frame excess while present
}

// maxEventGroups bounds the pulse arrival times an event keeps for its PRI
// fit (memory stays bounded on long captures).
const maxEventGroups = 1 << 14

func newTracker(cfg Config, fs float64, blockLen int) *tracker {
	return &tracker{cfg: cfg, fs: fs, blockLen: blockLen}
}

func (t *tracker) block(in *BlockInput, fs []Finding) {
	f := in.F
	// Fusion within the block.
	// Findings that claim the narrow ones inside their band: a sweep (its
	// line spectrum), a comb of tones (the same, where the sweep fills too
	// little of the block to be measured), a pulse train (its spectrum
	// in frames where SK cannot tell it from noise).
	bin := f.Fs / float64(f.N)
	// A pulse train's lines, in its main lobe and in its sidelobes, are
	// its own: they leave the CW findings tone by tone.
	for _, c := range fs {
		if c.Class != ClassPulsed {
			continue
		}
		for i := range fs {
			if x := &fs[i]; x.Class == ClassCW && len(x.Tones) > 0 {
				dropPulseTones(x, c, bin, f.Fs)
			}
		}
	}
	var swept, claims []Finding
	for _, x := range fs {
		if x.Class == ClassCW && len(x.Tones) == 0 {
			continue
		}
		switch {
		case x.Class == ClassSwept:
			swept = append(swept, x)
			claims = append(claims, x)
		case x.Class == ClassPulsed, x.Class == ClassCW && isComb(x.Tones):
			claims = append(claims, x)
		}
	}
	for _, o := range t.open {
		if o.class == ClassSwept {
			claims = append(claims, Finding{Class: ClassSwept, LowHz: o.lo, HighHz: o.hi})
		}
	}
	claimed := func(x Finding) bool {
		for _, c := range claims {
			// A sweep's spectrum has skirts beyond its edges.
			margin := 2 * bin
			if c.Class == ClassSwept {
				margin = math.Max(margin, 0.05*(c.HighHz-c.LowHz))
			}
			if c.Class == ClassPulsed && c.explainsSidelobe(x, bin, f.Fs) {
				return true
			}
			if c.Class != x.Class && overlaps(x.LowHz, x.HighHz, c.LowHz-margin, c.HighHz+margin) {
				return true
			}
		}
		return false
	}
	sweeping := len(swept) > 0
	for _, o := range t.open {
		if o.class == ClassSwept && o.missed == 0 {
			sweeping = true
		}
	}
	var classed []Finding
	for _, x := range fs {
		if x.Class == "" || (x.Class == ClassCW && (len(x.Tones) == 0 || isComb(x.Tones))) {
			continue
		}
		if x.Class == ClassNarrowbandNoise && claimed(x) {
			continue
		}
		// While a sweep is on (in this block or the last), the tones and
		// the floor rise inside its band are its own: partial blocks at its
		// start and end show its lines and leakage without the sweep
		// itself being measurable. A real CW inside an active sweep's band
		// is not reported separately until the sweep stops.
		if (x.Class == ClassCW || x.Class == ClassWidebandNoise) && sweeping && claimed(x) {
			continue
		}
		classed = append(classed, x)
	}
	matched := map[*trackedEvent]bool{}
	for _, x := range classed {
		var ev *trackedEvent
		for _, o := range t.open {
			if o.class == x.Class && (x.Class == ClassWidebandNoise || overlaps(o.lo, o.hi, x.LowHz, x.HighHz)) && !matched[o] {
				ev = o
				break
			}
		}
		if ev == nil {
			ev = &trackedEvent{class: x.Class, lo: x.LowHz, hi: x.HighHz, detectors: map[string]bool{},
				firstBlock: t.blockNo, start: f.Start, excess: make([]float64, f.N)}
			ev.setBand(f, x)
			ev.frameLevel = x.JN * in.NoisePower / in.Rise
			ev.start = t.refineStart(in, ev)
			t.open = append(t.open, ev)
			t.events = append(t.events, ev)
		}
		matched[ev] = true
		ev.absorb(in, x, fs)
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

// finish marks the events still active in the last block and drops the
// events a sweep explains: tones, floor rises and noise bands inside a
// sweep's band that began with it (in the block where the sweep started
// but filled too little of the block to be measured) or during it.
func (t *tracker) finish() {
	for _, o := range t.open {
		o.openAtEnd = o.missed == 0
	}
	kept := t.events[:0]
	for _, e := range t.events {
		explained := false
		if e.class == ClassCW || e.class == ClassWidebandNoise || e.class == ClassNarrowbandNoise {
			for _, s := range t.events {
				if s.class != ClassSwept && (s.class != ClassPulsed || e.class == ClassWidebandNoise) {
					continue
				}
				margin := 0.05 * (s.hi - s.lo)
				if overlaps(e.lo, e.hi, s.lo-margin, s.hi+margin) &&
					e.start >= s.start-int64(t.blockLen) && e.start <= s.end {
					explained = true
					break
				}
			}
		}
		if !explained {
			kept = append(kept, e)
		}
	}
	t.events = kept
	sort.SliceStable(t.events, func(i, j int) bool {
		if t.events[i].start != t.events[j].start {
			return t.events[i].start < t.events[j].start
		}
		return t.events[i].class < t.events[j].class
	})
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
// thermal floor (the block's floor without any wideband rise).
func (e *trackedEvent) frameExcess(frame []float32, in *BlockInput) float64 {
	var s float64
	for _, b := range e.bandBins {
		for k := b[0]; k <= b[1]; k++ {
			s += float64(frame[k]) - in.Floor[k]/in.Rise
		}
	}
	return s
}

// refineStart finds the first active frame of a new event, looking back
// into the previous block when the activity runs into it.
func (t *tracker) refineStart(in *BlockInput, e *trackedEvent) int64 {
	f := in.F
	if e.class == ClassPulsed {
		return f.Start
	}
	lvl := e.frameLevel / 2
	if lvl <= 0 {
		return f.Start
	}
	first := -1
	for i := 0; i < f.Frames; i++ {
		if e.frameExcess(f.Frame(i), in) > lvl {
			first = i
			break
		}
	}
	if first < 0 {
		return f.Start
	}
	if first == 0 && t.prevF.Frames > 0 {
		pf := &t.prevF
		n := pf.N
		back := 0
		for i := pf.Frames - 1; i >= 0; i-- {
			if e.frameExcess(t.prev[i*n:(i+1)*n], in) > lvl {
				back++
			} else {
				break
			}
		}
		return f.Start - int64(back*n)
	}
	return f.Start + int64(first*f.N)
}

// startInPrevious is the start of the run of active frames that ends the
// previous block (this block's start if there is none).
func (t *tracker) startInPrevious(in *BlockInput, e *trackedEvent) int64 {
	pf := &t.prevF
	n := pf.N
	lvl := e.frameLevel / 2
	back := 0
	for i := pf.Frames - 1; i >= 0 && lvl > 0; i-- {
		if e.frameExcess(t.prev[i*n:(i+1)*n], in) <= lvl {
			break
		}
		back++
	}
	if back == pf.Frames {
		// Active all through: the start found when the event opened,
		// possibly earlier still, stands.
		return min(e.start, in.F.Start-int64(back*n))
	}
	return in.F.Start - int64(back*n)
}

// activeEnd is the end of the last active frame of the event in a block.
func (t *tracker) activeEnd(in *BlockInput, e *trackedEvent) int64 {
	f := in.F
	lvl := e.frameLevel / 2
	end := int64(0)
	if lvl <= 0 {
		return 0
	}
	for i := 0; i < f.Frames; i++ {
		if e.frameExcess(f.Frame(i), in) > lvl {
			end = f.Start + int64((i+1)*f.N)
		}
	}
	return end
}

func (e *trackedEvent) absorb(in *BlockInput, x Finding, all []Finding) {
	f := in.F
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
		if end := (&tracker{}).activeEnd(in, e); end > 0 {
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
		// The most coherent fold measures the sweep best (a block the
		// sweep only partly fills folds poorly); its band is the event's.
		if e.sweep == nil || x.Sweep.Coherent > e.sweep.Coherent {
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
	}
	if x.Class == ClassWidebandNoise {
		e.riseSum += x.FloorRiseDB
	}
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
	ev := Event{Class: e.class, Capture: name, SampleStart: start, SampleCount: end - start,
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
		ev.Params.SweepPeriodS = ptr(s.PeriodS)
		ev.Params.SweepLowHz = ptr(s.LowHz)
		ev.Params.SweepHighHz = ptr(s.HighHz)
		ev.Params.SweepRateHzPerS = ptr(s.RateHzS)
		ev.Params.Shape = s.Shape
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

// isComb reports whether tones form a long regular comb: the line spectrum
// of a periodic sweep seen in a block where the sweep itself could not be
// measured (it covers only part of the block). Such a block raises no cw
// event; the sweep is picked up where it fills a block, and its start is
// then refined back into this one.
func isComb(t []ToneParam) bool {
	if len(t) < 8 {
		return false
	}
	gaps := make([]float64, len(t)-1)
	for i := range gaps {
		gaps[i] = t[i+1].OffsetHz - t[i].OffsetHz
	}
	med := medianOf(gaps)
	regular := 0
	for _, g := range gaps {
		if math.Abs(g-med) < 0.1*med {
			regular++
		}
	}
	return regular >= len(gaps)*2/3
}

// explainsSidelobe reports whether narrow finding x, outside pulse train
// c's main lobe, is no stronger than c's own spectrum there. A band
// [lo, hi] of width B gets from the train, over the noise power N, on
// average R·max(B, rate)/fs with R its power spectral density over the
// noise's (Finding.sidelobes) and rate its pulse rate: its lines, rate
// apart, carry R·rate/fs each, one of which a band narrower than rate
// can catch whole. x is explained if its J/N is at most 4× that with the
// largest R over its band ± one bin (the 4 covers a pair's interference,
// up to 2× the average, and the scatter of one block's estimate). A CW
// finding is judged tone by tone (each over its ±maxToneHalfWidth bins):
// see dropPulseTones.
func (c Finding) explainsSidelobe(x Finding, bin, fs float64) bool {
	return c.sidelobeJN(x.LowHz, x.HighHz, math.Max(x.HighHz-x.LowHz, 1.5*bin), bin, fs) >= x.JN
}

// sidelobeJN is the most J/N pulse train c's spectrum explains in the band
// lo..hi of width band (see explainsSidelobe); 0 without a spectrum.
func (c Finding) sidelobeJN(lo, hi, band, bin, fs float64) float64 {
	if len(c.sidelobes) == 0 || c.sidelobeStep <= 0 {
		return 0
	}
	dlo, dhi := math.Abs(lo-c.OffsetHz), math.Abs(hi-c.OffsetHz)
	near, far := math.Min(dlo, dhi), math.Max(dlo, dhi)
	if lo <= c.OffsetHz && c.OffsetHz <= hi {
		near = 0
	}
	i0 := max(0, int((near-bin)/c.sidelobeStep))
	i1 := min(len(c.sidelobes)-1, int(math.Ceil((far+bin)/c.sidelobeStep)))
	r := float32(0)
	for i := i0; i <= i1; i++ {
		r = max(r, c.sidelobes[i])
	}
	return 4 * float64(r) * math.Max(band, c.pulseRate) / fs
}

// dropPulseTones removes from CW finding x the tones that are pulse train
// c's own lines (a periodic train has a line spectrum): those in its main
// lobe (± 2 bins), and those outside it that its spectrum explains (see
// explainsSidelobe), in place, and updates x's band and J/N; it reports
// whether any tone is left.
func dropPulseTones(x *Finding, c Finding, bin, fs float64) bool {
	band := float64(2*maxToneHalfWidth+1) * bin
	kept := x.Tones[:0]
	lo, hi, total := math.Inf(1), math.Inf(-1), 0.0
	for _, t := range x.Tones {
		jn := math.Pow(10, t.JNDB/10)
		inLobe := t.OffsetHz >= c.LowHz-2*bin && t.OffsetHz <= c.HighHz+2*bin
		if inLobe || jn <= c.sidelobeJN(t.OffsetHz, t.OffsetHz, band, bin, fs) {
			continue
		}
		kept = append(kept, t)
		lo, hi, total = math.Min(lo, t.OffsetHz), math.Max(hi, t.OffsetHz), total+jn
	}
	if len(kept) == len(x.Tones) {
		return true
	}
	x.Tones = kept
	if len(kept) == 0 {
		return false
	}
	x.LowHz, x.HighHz, x.OffsetHz, x.JN = lo-bin, hi+bin, strongestTone(kept).OffsetHz, total
	return true
}
