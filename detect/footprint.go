package detect

import (
	"math"
	"sort"
)

// One explanation of the band: every emitter the detectors find predicts
// its own footprint in the spectrum besides itself (a tone its main lobe
// and its on/off transients, a sweep its comb and its skirts, a pulse
// train its pulse spectrum and lines, a strong emitter its I/Q image, the
// satellites their C/A code lines). A weaker finding that a stronger
// emitter's footprint accounts for is absorbed into that emitter: it is
// the same emitter seen again, not another one.
//
// Each class's footprint lives in its detector's file; footprints lists
// them. The tracker applies them in one place: within each block (the
// block's findings and the events still open explain the block's
// weaker findings) and over the whole capture (events explain weaker
// events that overlap them in time).

// footprintFunc reports whether emitter c accounts for finding x (its
// class, band LowHz..HighHz, J/N and class parameters).
type footprintFunc func(c, x *Finding, g *grid) bool

// grid is the spectral analysis the footprints are judged on.
type grid struct {
	bin        float64     // FFT bin width, Hz
	fs         float64     // sample rate
	frames     int         // frames per block
	irr        float64     // image rejection, dB
	compressed bool        // the front end is in its nonlinear range (nonlinear.go)
	tones      []ToneParam // the block's steady tones (its CW findings'), for limiterProduct
	tone       Finding     // explainTones' scratch: one tone as a finding
}

// footprints lists, by class, the footprint of each kind of emitter.
var footprints = map[string]footprintFunc{
	ClassCW:              cwFootprint,
	ClassSwept:           sweptFootprint,
	ClassPulsed:          pulseFootprint,
	ClassNarrowbandNoise: bandFootprint,
	ClassWidebandNoise:   widebandFootprint,
}

// explainable are the classes a footprint may absorb: what a stronger
// emitter's spectrum can look like.
func explainable(class string) bool {
	return class == ClassCW || class == ClassNarrowbandNoise || class == ClassWidebandNoise || class == ClassPulsed
}

// defaultImageRejectionDB is the image rejection ratio a receiver's I/Q
// paths are assumed to reach at least: 20 dB, that of a 10 % gain and 10°
// phase imbalance (REFERENCES §12.4 table; most front ends do 25–45 dB).
const defaultImageRejectionDB = 20

// explains reports whether emitter c accounts for the finding: through its
// class's footprint, or as its I/Q image (the band mirrored about the
// centre, at least the configured image rejection below c).
func explains(c, x *Finding, g *grid) bool {
	if c.Class == "" {
		return false
	}
	if fp := footprints[c.Class]; fp != nil && fp(c, x, g) {
		return true
	}
	if compressedFootprint(c, x, g) || limiterProduct(c, x, g) {
		return true
	}
	class, lo, hi, jn := x.Class, x.LowHz, x.HighHz, x.JN
	// The image of a complex front end's I/Q imbalance: −f for +f.
	if class != ClassWidebandNoise && overlaps(-hi, -lo, c.LowHz-g.bin, c.HighHz+g.bin) && !overlaps(lo, hi, c.LowHz, c.HighHz) {
		return jn <= c.JN*math.Pow(10, -g.irr/10)
	}
	return false
}

// explainTones drops from CW finding x the tones that c accounts for, in
// place, and updates x's band and J/N; it reports whether any tone is
// left.
func explainTones(x *Finding, c *Finding, g *grid) bool {
	kept := x.Tones[:0]
	one := &g.tone
	for _, t := range x.Tones {
		jn := fromDB(t.JNDB)
		*one = Finding{Class: ClassCW, LowHz: t.OffsetHz - g.bin, HighHz: t.OffsetHz + g.bin, OffsetHz: t.OffsetHz, JN: jn}
		if explains(c, one, g) {
			continue
		}
		kept = append(kept, t)
	}
	if len(kept) == len(x.Tones) {
		return true
	}
	x.Tones = kept
	x.setTones(g.bin)
	return len(kept) > 0
}

// setTones recomputes a CW finding's band, offset and J/N from its tones.
func (x *Finding) setTones(bin float64) {
	if len(x.Tones) == 0 {
		x.JN = 0
		return
	}
	lo, hi, total := math.Inf(1), math.Inf(-1), 0.0
	for _, t := range x.Tones {
		lo, hi, total = math.Min(lo, t.OffsetHz), math.Max(hi, t.OffsetHz), total+fromDB(t.JNDB)
	}
	x.LowHz, x.HighHz, x.OffsetHz, x.JN = lo-bin, hi+bin, strongestTone(x.Tones).OffsetHz, total
}

// imageTones drops the tones of a CW finding that are the I/Q images of
// stronger tones of the same finding.
func imageTones(x *Finding, bin, irr float64) {
	n := len(x.Tones)
	if n < 2 {
		return
	}
	// The tones are sorted by offset: the partners of −f are found by
	// binary search.
	kept := x.Tones[:0:0]
	for _, t := range x.Tones {
		image := false
		lo := sort.Search(n, func(i int) bool { return x.Tones[i].OffsetHz >= -t.OffsetHz-1.5*bin })
		for j := lo; j < n && x.Tones[j].OffsetHz <= -t.OffsetHz+1.5*bin; j++ {
			if s := x.Tones[j]; s.OffsetHz != t.OffsetHz && t.JNDB <= s.JNDB-irr {
				image = true
				break
			}
		}
		if !image {
			if len(kept) == 0 {
				kept = make([]ToneParam, 0, n)
			}
			kept = append(kept, t)
		}
	}
	if len(kept) != n {
		x.Tones = append(x.Tones[:0], kept...)
		x.setTones(bin)
	}
}

// explainBlock absorbs the findings of one block that a stronger emitter
// (another finding of the block, or an event still open, through its
// latest finding) accounts for. Absorbed findings get their class cleared
// (they stay as evidence for nothing); CW findings lose the absorbed
// tones only.
func (t *tracker) explainBlock(fs []Finding, g *grid) {
	bin, irr := g.bin, g.irr
	order := t.order[:0]
	for i := range fs {
		order = append(order, i)
	}
	sort.SliceStable(order, func(a, b int) bool { return fs[order[a]].JN > fs[order[b]].JN })
	t.order = order
	for _, xi := range order {
		x := &fs[xi]
		if !explainable(x.Class) {
			continue
		}
		if x.Class == ClassCW {
			imageTones(x, bin, irr)
		}
		gone := false
		try := func(c *Finding) {
			if gone || c == x || c.Class == "" {
				return
			}
			if x.Class == ClassCW {
				if !explainTones(x, c, g) {
					gone = true
				}
				return
			}
			if explains(c, x, g) {
				if trace != nil {
					trace("block: %s %.0f Hz J/N %.1f dB explained by %s %.0f Hz J/N %.1f dB (footprint %v, compressed %v, tones %d)", x.Class, x.OffsetHz, dB(x.JN), c.Class, c.OffsetHz, dB(c.JN),
						footprints[c.Class] != nil && footprints[c.Class](c, x, g), compressedFootprint(c, x, g), len(c.Tones))
				}
				gone = true
			}
		}
		for ci := range fs {
			try(&fs[ci])
		}
		// An open event of x's own class is x's emitter itself, seen
		// before: x continues it.
		for _, o := range t.open {
			if o.last.Class != "" && o.class != x.Class {
				try(&o.last)
			}
		}
		if gone {
			x.Class = ""
		}
	}
}

// trace, when set (by tests), is told every finding a footprint absorbs.
var trace func(format string, args ...any)

// explainEvents drops, at the end of a capture, the events that another
// event accounts for where both were present (within a block of each
// other): a sweep's skirts and comb seen in a block before the sweep was
// measurable, a tone's transients after it stopped.
func (t *tracker) explainEvents() {
	bin := t.fs / float64(t.cfg.FFTSize)
	g := &grid{bin: bin, fs: t.fs, frames: t.cfg.Frames, irr: t.cfg.ImageRejectionDB, compressed: t.compressed}
	slack := int64(t.blockLen)
	kept := t.events[:0]
	for _, e := range t.events {
		if !explainable(e.class) {
			kept = append(kept, e)
			continue
		}
		x := e.finding()
		for _, s := range t.events {
			if s == e || s.rep.Class == "" || s.rep.Class == e.class && e.class != ClassCW {
				continue
			}
			if e.start < s.start-slack || e.start > s.end+slack {
				continue
			}
			c := s.rep
			if s.class == ClassWidebandNoise || s.class == ClassCW {
				// Its switching: e is present within a block of s's start
				// or end.
				c.keyed = c.keyed || overlaps(float64(e.start), float64(e.end), float64(s.start-slack), float64(s.start+slack)) ||
					overlaps(float64(e.start), float64(e.end), float64(s.end-slack), float64(s.end+slack))
			}
			if x.Class == ClassCW {
				if !explainTones(&x, &c, g) {
					x.Class = ""
					break
				}
				continue
			}
			if explains(&c, &x, g) {
				x.Class = ""
				break
			}
		}
		switch {
		case x.Class == "":
		case e.class == ClassCW:
			e.retone(x.Tones, bin)
			kept = append(kept, e)
		default:
			kept = append(kept, e)
		}
	}
	t.events = kept
}

// retone keeps only tones (a subset of the event's) and scales the
// event's band and J/N to them.
func (e *trackedEvent) retone(tones []ToneParam, bin float64) {
	if len(tones) == len(e.tones) {
		return
	}
	var all, kept float64
	for _, t := range e.tones {
		all += fromDB(t.JNDB)
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, t := range tones {
		kept += fromDB(t.JNDB)
		lo, hi = math.Min(lo, t.OffsetHz), math.Max(hi, t.OffsetHz)
	}
	if all > 0 {
		e.jnSum *= kept / all
		e.jnPeak *= kept / all
	}
	e.tones = append([]ToneParam(nil), tones...)
	e.lo, e.hi = lo-bin, hi+bin
}
