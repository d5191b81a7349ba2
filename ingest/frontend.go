package ingest

import (
	"fmt"
	"math"
	"unsafe"
)

// Front-end fault kinds (the capture record's fault.kind, DESIGN.md "Event
// log").
const (
	FaultDead         = "dead"         // every sample exactly zero
	FaultStuck        = "stuck"        // every sample (or every I, or every Q) the same value
	FaultGap          = "gap"          // runs of exact zeros inside a live capture
	FaultUnnormalised = "unnormalised" // float samples far beyond full scale
)

// DefaultMinGap is the shortest run of exact zeros FrontEndCheck reports as
// a gap, and the fewest samples on which it judges a capture dead or
// stuck. Why 64: a zero (or any one value) of a live quantizer has a
// probability q ≤ 1/2 per sample for any quantizer of at least one bit
// whose codes are balanced (1-bit data: two equally likely codes), so a
// given run of 64 has probability ≤ 2^−64 ≈ 5.4·10⁻²⁰, below 10⁻⁹ per
// capture for up to 10¹⁰ samples [C]; a recorder's dropped buffer, filled
// with zeros, is thousands of samples long. For complex data both I and Q
// must be zero, which is rarer still.
const DefaultMinGap = 64

// MaxGaps bounds how many gaps a FrontEndCheck lists (it counts them all).
const MaxGaps = 16

// Thresholds of the unnormalised-float test, in full-scale units (full
// scale 1, REFERENCES-free: common practice). A float stream scaled to
// full scale ±1 stays within |I|, |Q| ≤ 1 out of any real converter;
// processing may overshoot a little, never by 12 dB in RMS or 40 dB in
// peak. Integer codes stored as floats without scaling exceed both by far:
// an 8-bit converter's codes reach 127 (RMS typically 5 to 40), a 16-bit
// one's 32767 (RMS hundreds to thousands).
const (
	UnnormalisedRMS  = 4   // RMS above +12 dBFS
	UnnormalisedPeak = 100 // a component beyond ±100 (+40 dBFS)
)

// Gap is a run of exact zeros: file samples [Start, Start+Count).
type Gap struct {
	Start, Count int64
}

// Fault is a front-end fault: its kind (FaultDead ...) and one sentence
// naming the numbers. The zero Fault is none.
type Fault struct {
	Kind   string
	Detail string
}

// FrontEnd is what a FrontEndCheck found in a capture's samples.
type FrontEnd struct {
	Samples int64 // samples checked (real values for a real format)
	Real    bool  // the samples were real values
	// Zero is the number of samples exactly zero (both I and Q).
	Zero int64
	// Gaps are the first MaxGaps runs of at least MinGap exact zeros, in
	// file sample indices; GapCount and GapSamples count them all.
	Gaps                 []Gap
	GapCount, GapSamples int64
	MinGap               int64
	// RMS is √(mean |x|²) and Peak the largest |I|, |Q| or |x|, in
	// full-scale units, for float formats (the unnormalised test); 0 for
	// integer ones, whose codes cannot exceed full scale.
	RMS, Peak float64
	// Levels are the first samples' values (see Levels).
	Levels Levels
	// Occupancy is the magnitude-bit occupancy p = P(|x| > T) over every
	// component, when HasOccupancy (symmetric 2- or 3-bit levels; see
	// Levels.Threshold and OccupancyLevelDB).
	Occupancy    float64
	HasOccupancy bool
	// Fault is the most telling fault found (dead, then stuck, then
	// unnormalised, then gap); Kind "" when none.
	Fault Fault
}

// FrontEndCheck measures, block by block, what a broken front end leaves
// in the samples: a dead converter (every sample zero), a stuck one (every
// sample the same), dropped data filled with zeros (gaps), float samples
// that were never scaled to full scale; and, for low-bit data, the
// magnitude-bit occupancy. Feed it the decoded samples in order, all with
// AddComplex or all with AddReal; its memory is fixed and it allocates
// nothing per block.
type FrontEndCheck struct {
	// MinGap is the shortest run of zeros reported as a gap (and the
	// fewest samples judged dead or stuck); 0: DefaultMinGap.
	MinGap int64

	format   Format
	real     bool
	n        int64
	zero     int64
	run      int64 // zeros ending at sample n−1
	gaps     [MaxGaps]Gap
	ngaps    int
	gapCount int64
	gapSum   int64
	first    [2]float32 // first sample: I, Q (real: value, unused)
	vary     [2]bool    // I, Q (real: value) took another value
	sum      float64
	peak     uint32 // float32 bits of the largest magnitude
	levels   Levels
	thr      float32 // occupancy threshold; 0: no occupancy
	outer    int64
	comps    int64 // components counted for the occupancy
}

// NewFrontEndCheck returns a check for samples decoded from format f.
func NewFrontEndCheck(f Format) *FrontEndCheck { return &FrontEndCheck{format: f} }

const signBit = 1 << 31

// feChunk bounds the float32 partial sums before they go into float64.
const feChunk = 1024

func (a *FrontEndCheck) minGap() int64 {
	if a.MinGap > 0 {
		return a.MinGap
	}
	return DefaultMinGap
}

// AddComplex adds the next complex samples.
func (a *FrontEndCheck) AddComplex(x []complex64) {
	if len(x) == 0 {
		return
	}
	if a.n == 0 {
		a.first = [2]float32{real(x[0]), imag(x[0])}
		a.levels = levelsOfComplex(x, a.format)
		if t, ok := a.levels.Threshold(); ok {
			a.thr = t
		}
	}
	minGap := a.minGap()
	run := a.run
	i := 0
	if !(a.vary[0] && a.vary[1]) {
		// Until both components have changed once (the first samples of a
		// live capture; all of a stuck one).
		f0, f1 := a.first[0], a.first[1]
		for ; i < len(x) && !(a.vary[0] && a.vary[1]); i++ {
			v := x[i]
			if real(v) != f0 {
				a.vary[0] = true
			}
			if imag(v) != f1 {
				a.vary[1] = true
			}
			if zeroBits(real(v))|zeroBits(imag(v)) == 0 {
				run++
			} else if run != 0 {
				a.endRun(a.n+int64(i), run, minGap)
				run = 0
			}
		}
	}
	// The usual case, eight samples a step: a sample's 64 bits without
	// the two sign bits are 0 only for a zero sample (I and Q ±0); such a
	// word z is below 2⁶³, so z − 1 has its top bit set exactly when z is
	// 0, and one test of the OR of the eight finds whether any is.
	u := wordsOf(x)
	for ; i+7 < len(u); i += 8 {
		w := u[i : i+8 : i+8]
		if ((w[0]&noSigns-1)|(w[1]&noSigns-1)|(w[2]&noSigns-1)|(w[3]&noSigns-1)|
			(w[4]&noSigns-1)|(w[5]&noSigns-1)|(w[6]&noSigns-1)|(w[7]&noSigns-1))>>63 == 0 {
			if run != 0 {
				a.endRun(a.n+int64(i), run, minGap)
				run = 0
			}
			continue
		}
		for k, v := range w {
			if v&noSigns == 0 {
				run++
			} else if run != 0 {
				a.endRun(a.n+int64(i+k), run, minGap)
				run = 0
			}
		}
	}
	for ; i < len(u); i++ {
		if u[i]&noSigns == 0 {
			run++
		} else if run != 0 {
			a.endRun(a.n+int64(i), run, minGap)
			run = 0
		}
	}
	a.run = run
	if a.format.IsFloat() {
		a.addLevel(realsOf(x))
	}
	if t := a.thr; t > 0 {
		a.addOccupancy(realsOf(x), t)
	}
	a.n += int64(len(x))
}

// AddReal adds the next real samples.
func (a *FrontEndCheck) AddReal(x []float32) {
	if len(x) == 0 {
		return
	}
	if a.n == 0 {
		a.real = true
		a.first[0] = x[0]
		a.levels = levelsOfReal(x, a.format)
		if t, ok := a.levels.Threshold(); ok {
			a.thr = t
		}
	}
	minGap := a.minGap()
	run := a.run
	i := 0
	if !a.vary[0] {
		f0 := a.first[0]
		for ; i < len(x) && !a.vary[0]; i++ {
			if x[i] != f0 {
				a.vary[0] = true
			}
			if zeroBits(x[i]) == 0 {
				run++
			} else if run != 0 {
				a.endRun(a.n+int64(i), run, minGap)
				run = 0
			}
		}
	}
	for ; i+3 < len(x); i += 4 {
		z0, z1, z2, z3 := zeroBits(x[i]), zeroBits(x[i+1]), zeroBits(x[i+2]), zeroBits(x[i+3])
		if min(z0, z1, z2, z3) != 0 {
			if run != 0 {
				a.endRun(a.n+int64(i), run, minGap)
				run = 0
			}
			continue
		}
		for k, z := range [4]uint32{z0, z1, z2, z3} {
			if z == 0 {
				run++
			} else if run != 0 {
				a.endRun(a.n+int64(i+k), run, minGap)
				run = 0
			}
		}
	}
	for ; i < len(x); i++ {
		if zeroBits(x[i]) == 0 {
			run++
		} else if run != 0 {
			a.endRun(a.n+int64(i), run, minGap)
			run = 0
		}
	}
	a.run = run
	if a.format.IsFloat() {
		a.addLevel(x)
	}
	if t := a.thr; t > 0 {
		a.addOccupancy(x, t)
	}
	a.n += int64(len(x))
}

// zeroBits is the bits of v without the sign: 0 exactly for ±0.
func zeroBits(v float32) uint32 { return math.Float32bits(v) << 1 }

// addLevel adds components to the sum of squares and the peak (float
// formats: the unnormalised test), in float32 partial sums of feChunk
// values at most, eight at a time into four sums and two peaks (short
// dependency chains).
func (a *FrontEndCheck) addLevel(v []float32) {
	pk := a.peak
	for c := 0; c < len(v); c += feChunk {
		blk := v[c:min(c+feChunk, len(v))]
		var s0, s1, s2, s3 float32
		p0, p1 := pk, pk
		i := 0
		for ; i+7 < len(blk); i += 8 {
			w := blk[i : i+8 : i+8]
			s0 += w[0]*w[0] + w[1]*w[1]
			s1 += w[2]*w[2] + w[3]*w[3]
			s2 += w[4]*w[4] + w[5]*w[5]
			s3 += w[6]*w[6] + w[7]*w[7]
			m0 := max(math.Float32bits(w[0])&^signBit, math.Float32bits(w[1])&^signBit)
			m1 := max(math.Float32bits(w[2])&^signBit, math.Float32bits(w[3])&^signBit)
			m2 := max(math.Float32bits(w[4])&^signBit, math.Float32bits(w[5])&^signBit)
			m3 := max(math.Float32bits(w[6])&^signBit, math.Float32bits(w[7])&^signBit)
			p0 = max(p0, max(m0, m1))
			p1 = max(p1, max(m2, m3))
		}
		for ; i < len(blk); i++ {
			s0 += blk[i] * blk[i]
			p0 = max(p0, math.Float32bits(blk[i])&^signBit)
		}
		pk = max(p0, p1)
		a.sum += float64(s0) + float64(s1) + float64(s2) + float64(s3)
	}
	a.peak = pk
}

// addOccupancy counts the components beyond the magnitude threshold t,
// without branches (the outcome is a coin toss on 2-bit data): for
// non-negative floats the order of the bits is the order of the values.
func (a *FrontEndCheck) addOccupancy(v []float32, t float32) {
	tb := math.Float32bits(t)
	var out int64
	for _, u := range v {
		out += int64((tb - math.Float32bits(u)&^signBit) >> 31)
	}
	a.outer += out
	a.comps += int64(len(v))
}

// noSigns masks the sign bits of a complex64's two float32s.
const noSigns = 0x7fffffff_7fffffff

// wordsOf views complex samples as 64-bit words (one sample each) for bit
// tests; see realsOf for the layout.
func wordsOf(x []complex64) []uint64 {
	if len(x) == 0 {
		return nil
	}
	return unsafe.Slice((*uint64)(unsafe.Pointer(unsafe.SliceData(x))), len(x))
}

func abs32(v float32) float32 { return math.Float32frombits(math.Float32bits(v) &^ signBit) }

// endRun notes a run of zeros of length run ending before sample end.
func (a *FrontEndCheck) endRun(end, run, minGap int64) {
	a.zero += run
	if run < minGap {
		return
	}
	a.gapCount++
	a.gapSum += run
	if a.ngaps < MaxGaps {
		a.gaps[a.ngaps] = Gap{Start: end - run, Count: run}
		a.ngaps++
	}
}

// Result is what the samples added so far show; the check may go on.
func (a *FrontEndCheck) Result() FrontEnd {
	minGap := a.minGap()
	r := FrontEnd{Samples: a.n, Real: a.real, MinGap: minGap, Levels: a.levels,
		Peak: float64(math.Float32frombits(a.peak))}
	// The run still open at the end.
	zero, gapCount, gapSum, gaps := a.zero+a.run, a.gapCount, a.gapSum, a.gaps
	ngaps := a.ngaps
	allZero := a.n > 0 && zero == a.n
	if a.run >= minGap && !allZero {
		gapCount++
		gapSum += a.run
		if ngaps < MaxGaps {
			gaps[ngaps] = Gap{Start: a.n - a.run, Count: a.run}
			ngaps++
		}
	}
	r.Zero = zero
	if !allZero {
		r.Gaps = append([]Gap(nil), gaps[:ngaps]...)
		r.GapCount, r.GapSamples = gapCount, gapSum
	}
	if a.n > 0 {
		r.RMS = math.Sqrt(a.sum / float64(a.n))
	}
	if a.comps > 0 {
		r.Occupancy, r.HasOccupancy = float64(a.outer)/float64(a.comps), true
	}
	unit := "samples"
	if a.real {
		unit = "real samples"
	}
	switch {
	case a.n < minGap:
		// Too short to judge dead or stuck.
	case allZero:
		r.Fault = Fault{FaultDead, fmt.Sprintf("all %d %s are exactly zero: the front end delivered no signal.", a.n, unit)}
	case a.real && !a.vary[0]:
		r.Fault = Fault{FaultStuck, fmt.Sprintf("all %d %s hold the same value %g: the converter is stuck.", a.n, unit, a.first[0])}
	case !a.real && !a.vary[0] && !a.vary[1]:
		r.Fault = Fault{FaultStuck, fmt.Sprintf("all %d samples hold the same value (I %g, Q %g): the converter is stuck.", a.n, a.first[0], a.first[1])}
	case !a.real && (!a.vary[0] || !a.vary[1]):
		c, o, v := "I", "Q", a.first[0]
		if a.vary[0] {
			c, o, v = "Q", "I", a.first[1]
		}
		r.Fault = Fault{FaultStuck, fmt.Sprintf("%s is %g in all %d samples while %s varies: one channel of the front end is dead or stuck, or real samples were stored as complex.", c, v, a.n, o)}
	}
	if r.Fault.Kind == "" && a.format.IsFloat() && (r.RMS > UnnormalisedRMS || r.Peak > UnnormalisedPeak) {
		r.Fault = Fault{FaultUnnormalised, fmt.Sprintf("float samples have RMS %.4g and peak %.4g where full scale is 1 (limits RMS %d, peak %d): they look like integer codes stored as floats without scaling, so every dBFS figure is off.", r.RMS, r.Peak, UnnormalisedRMS, UnnormalisedPeak)}
	}
	if r.Fault.Kind == "" && r.GapCount > 0 {
		g := r.Gaps[0]
		r.Fault = Fault{FaultGap, fmt.Sprintf("%d run(s) of at least %d exact zeros (%d %s in all) inside a live capture, the first at %s %d–%d: the recorder dropped data or the front end stopped.",
			r.GapCount, minGap, r.GapSamples, unit, unit, g.Start, g.Start+g.Count-1)}
	}
	return r
}
