package ingest

import (
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"
)

// Levels says which values a capture's first samples take, when they are
// few: the output of a 1-, 2- or 3-bit quantizer, such as the sign and
// magnitude bits of a GNSS front end written as ±1, ±3 in an int8 file
// (REFERENCES §12.3). It is measured from the data: the distinct values of
// up to levelScan components (I and Q, or real values) at the start of the
// capture.
type Levels struct {
	// Measured is how many components were looked at; 0: not measured.
	Measured int
	// Values are the distinct values seen, ascending, in the file's own
	// units (the integer codes of an integer format, the values of a float
	// one), when there are at most 8 (3 bits' worth); nil when there are
	// more: a quantizer of more than 3 bits.
	Values []float64
	// decoded are Values decoded (full scale 1), ascending.
	decoded []float32
}

// levelScan bounds how many components the level count looks at (cheap:
// a fraction of a millisecond once per capture).
const levelScan = 1 << 16

// maxLevels is the most distinct values counted as a low-bit quantizer's
// (3 bits).
const maxLevels = 8

// Bits is the number of bits the values need: 1 (two levels), 2 (three or
// four), 3 (five to eight); 0 when not measured, when there is one value
// only, or when there are more than 8.
func (l Levels) Bits() int {
	switch n := len(l.Values); {
	case n < 2:
		return 0
	case n == 2:
		return 1
	case n <= 4:
		return 2
	default:
		return 3
	}
}

// LowBit reports whether the capture holds 1- to 3-bit data.
func (l Levels) LowBit() bool { return l.Bits() > 0 }

// Symmetric reports whether the decoded levels come in ± pairs (with 0
// allowed), as a sign-magnitude or odd mid-rise quantizer's do; raw 2-bit
// two's complement (−2, −1, 0, +1) does not.
func (l Levels) Symmetric() bool {
	if len(l.decoded) == 0 {
		return false
	}
	for i, v := range l.decoded {
		if l.decoded[len(l.decoded)-1-i] != -v {
			return false
		}
	}
	return true
}

// Threshold is the magnitude threshold between the two smallest magnitudes
// of symmetric low-bit levels, in decoded units (full scale 1): the T of
// the magnitude-bit occupancy p = P(|x| > T) (REFERENCES §12.3; between
// ±1 and ±3, or between 0 and ±1 for three levels). ok is false when there
// is no magnitude information (1 bit, one level, asymmetric or more than 3
// bits).
func (l Levels) Threshold() (t float32, ok bool) {
	if !l.LowBit() || !l.Symmetric() {
		return 0, false
	}
	var mags []float32
	for _, v := range l.decoded {
		if v >= 0 {
			mags = append(mags, v)
		}
	}
	if len(mags) < 2 {
		return 0, false
	}
	return (mags[0] + mags[1]) / 2, true
}

// String says what the levels are, e.g. "2-bit: levels ±1, ±3", "1-bit:
// levels ±1", "3-bit: levels 0, ±1, ±2, ±3", "2-bit: levels −2, −1, 0, 1",
// "one level only: 0", "more than 3 bits" or "not measured".
func (l Levels) String() string {
	switch {
	case l.Measured == 0:
		return "not measured"
	case l.Values == nil:
		return "more than 3 bits"
	case len(l.Values) == 1:
		return "one level only: " + num(l.Values[0])
	}
	var parts []string
	if l.Symmetric() && symmetricValues(l.Values) {
		for _, v := range l.Values {
			switch {
			case v == 0:
				parts = append(parts, "0")
			case v > 0:
				parts = append(parts, "±"+num(v))
			}
		}
	} else {
		for _, v := range l.Values {
			parts = append(parts, num(v))
		}
	}
	return fmt.Sprintf("%d-bit: levels %s", l.Bits(), strings.Join(parts, ", "))
}

// symmetricValues reports whether the values themselves (not only their
// decoded forms) are symmetric about 0: codes of a signed format, values
// of a float one.
func symmetricValues(v []float64) bool {
	for i, x := range v {
		if v[len(v)-1-i] != -x {
			return false
		}
	}
	return true
}

func num(v float64) string {
	if v < 0 {
		return "−" + strconv.FormatFloat(-v, 'g', 6, 64)
	}
	return strconv.FormatFloat(v, 'g', 6, 64)
}

// levelCounter collects up to maxLevels distinct values; full once a
// (maxLevels+1)th is seen.
type levelCounter struct {
	vals [maxLevels]float32
	n    int
	full bool
	seen int
}

func (c *levelCounter) add(v float32) {
	c.seen++
	for _, x := range c.vals[:c.n] {
		if x == v {
			return
		}
	}
	if c.n == maxLevels {
		c.full = true
		return
	}
	c.vals[c.n] = v
	c.n++
}

// levels converts the count into Levels in the units of format f.
func (c *levelCounter) levels(f Format) Levels {
	l := Levels{Measured: c.seen}
	if c.full || c.seen == 0 {
		return l
	}
	l.decoded = append([]float32(nil), c.vals[:c.n]...)
	slices.Sort(l.decoded)
	scale, offset := f.complexTwin().scale()
	for _, d := range l.decoded {
		v := float64(d)
		if !f.IsFloat() {
			v = math.Round(v*scale + offset)
		}
		l.Values = append(l.Values, v)
	}
	return l
}

func levelsOfReal(x []float32, f Format) Levels {
	var c levelCounter
	for _, v := range x[:min(len(x), levelScan)] {
		if c.add(v); c.full {
			break
		}
	}
	return c.levels(f)
}

func levelsOfComplex(x []complex64, f Format) Levels {
	var c levelCounter
	for _, v := range x[:min(len(x), levelScan/2)] {
		c.add(real(v))
		if c.add(imag(v)); c.full {
			break
		}
	}
	return c.levels(f)
}

// OccupancySaturation is the magnitude-bit occupancy above which
// OccupancyLevelDB is flagged: the estimate saturates there (REFERENCES
// §12.3, "above p ≈ 0.95").
const OccupancySaturation = 0.95

// OccupancyLevelDB is the input level of low-bit data, from the magnitude
// bit's occupancy p = P(|x| > T) of a Gaussian input: p = erfc(T/(σ√2)),
// so σ/T = 1/(√2·erfc⁻¹(p)), reported as 20·log10(σ/T) dB: 0 dB when σ = T
// (p = 0.3173), +3.42 dB at p = 0.5, +24.05 dB at p = 0.95 (REFERENCES
// §12.3 table). It is relative to the quantizer's threshold T, whose value
// in volts is unknown: compare captures of the same front end, not
// front ends. saturated is true when p > OccupancySaturation (the estimate
// runs away; a CW also reads high, §12.3) or p is 0 or 1 (no estimate:
// ±Inf).
func OccupancyLevelDB(p float64) (db float64, saturated bool) {
	switch {
	case !(p > 0):
		return math.Inf(-1), true
	case p >= 1:
		return math.Inf(1), true
	}
	sigmaOverT := 1 / (math.Sqrt2 * math.Erfcinv(p))
	return 20 * math.Log10(sigmaOverT), p > OccupancySaturation
}
