package detect

import "math"

// CW finds continuous-wave tones: narrow peaks of the block's mean PSD
// above the noise reference.
//
// A bin is a candidate when its power ratio to the floor exceeds the bin
// threshold and it is a local maximum. It is a tone when its excess falls
// to a quarter (−6 dB) within maxToneHalfWidth bins on both sides (a Hann
// window's main lobe is ±2 bins) and, when the tone is well above the noise
// (per-bin INR ρ > 3), its SK is below the lower threshold, as a steady
// carrier's must be: SK = (1 + 2ρ)/(1 + ρ)² (REFERENCES §2.5). A narrow
// Gaussian feature fails that test and is left to NoiseBand.
//
// Frequency: with magnitudes a = |X(k)| and b = |X(k±1)| of the larger
// neighbour, the Hann window gives the exact interpolation
// δ = (2b/a − 1)/(b/a + 1) for a single tone (Grandke 1983, IEEE Trans.
// Instrum. Meas. 32(2), from memory); magnitudes come from the excess power
// averaged over the frames.
//
// Power: the excess summed over k ± 3 bins is the tone power A² (the PSD
// normalization puts a tone's whole power in its bins). J/N = A²/N, N the
// noise power in the capture bandwidth.
type CW struct{}

// Name implements Detector.
func (CW) Name() string { return "cw" }

const maxToneHalfWidth = 3

// Detect implements Detector.
func (d CW) Detect(in *BlockInput, out []Finding) []Finding {
	f := in.F
	if f.Frames == 0 {
		return out
	}
	var tones []ToneParam
	lo, hi := math.Inf(1), math.Inf(-1)
	var total float64
	for k := 1; k < f.N-1; k++ {
		if in.Excluded[k] || in.Ratio[k] <= in.BinThreshold || f.PSD[k] < f.PSD[k-1] || f.PSD[k] < f.PSD[k+1] {
			continue
		}
		peak := in.excess(k)
		if !narrowPeak(in, k, peak) {
			continue
		}
		rho := peak / in.Floor[k]
		if rho > 3 && in.SKFlag[k] >= 0 {
			continue // not constant-envelope: noise-like or pulsed
		}
		a := math.Sqrt(peak)
		bl, br := math.Sqrt(in.excess(k-1)), math.Sqrt(in.excess(k+1))
		var delta float64
		if br >= bl && a > 0 {
			r := br / a
			delta = (2*r - 1) / (r + 1)
		} else if a > 0 {
			r := bl / a
			delta = -(2*r - 1) / (r + 1)
		}
		delta = math.Max(-1, math.Min(1, delta))
		off := f.Offset(k) + delta*f.Fs/float64(f.N)
		p := in.bandPower(k-maxToneHalfWidth, k+maxToneHalfWidth)
		tones = append(tones, ToneParam{OffsetHz: off, JNDB: 10 * math.Log10(p/in.NoisePower)})
		lo, hi = math.Min(lo, off), math.Max(hi, off)
		total += p
		k += maxToneHalfWidth // one tone per main lobe
	}
	if len(tones) == 0 {
		return out
	}
	strongest := strongestTone(tones)
	bin := f.Fs / float64(f.N)
	return append(out, Finding{Detector: d.Name(), Class: ClassCW, LowHz: lo - bin, HighHz: hi + bin,
		OffsetHz: strongest.OffsetHz, JN: total / in.NoisePower, Tones: tones})
}

// strongestTone returns the tone of largest J/N (the first of equals);
// tones must not be empty.
func strongestTone(tones []ToneParam) ToneParam {
	strongest := tones[0]
	for _, t := range tones {
		if t.JNDB > strongest.JNDB {
			strongest = t
		}
	}
	return strongest
}

// narrowPeak reports whether the excess around bin k falls below a quarter
// of peak within maxToneHalfWidth bins on both sides.
func narrowPeak(in *BlockInput, k int, peak float64) bool {
	for _, dir := range [2]int{-1, 1} {
		ok := false
		for j := 1; j <= maxToneHalfWidth+1; j++ {
			i := k + dir*j
			if i < 0 || i >= in.F.N || in.excess(i) < peak/4 {
				ok = true
				break
			}
		}
		if !ok {
			return false
		}
	}
	return true
}

// transientEdges is how many on/off edges a keyed tone is allowed per
// block in its footprint.
const transientEdges = 2

// cwFootprint is what a tone accounts for besides itself: within
// maxToneHalfWidth bins, its own main lobe and close-in leakage (anything
// weaker and no wider than a tone); and, when it keys on or off inside the block, the transient: a
// tone cut inside a frame leaks like the Hann window's edge, the power at
// k bins and beyond being about 2/(π²k) of the tone's in that frame (a
// cut spectrum falls as 1/(πk) in amplitude, both sides; common practice),
// so over M frames with e edges a band k bins away holds at most
// 2e/(π²kM) of the tone's power (4× margin for the scatter of one block).
func cwFootprint(c, x *Finding, g *grid) bool {
	class, lo, hi, jn := x.Class, x.LowHz, x.HighHz, x.JN
	bin := g.bin
	if class == ClassWidebandNoise {
		return false
	}
	for _, t := range c.Tones {
		tj := fromDB(t.JNDB)
		d := 0.0
		switch {
		case t.OffsetHz < lo:
			d = lo - t.OffsetHz
		case t.OffsetHz > hi:
			d = t.OffsetHz - hi
		}
		k := d / bin
		// Its own main lobe: a narrow finding (a tone's width) beside it.
		// A wider one holding the tone is another emitter: a tone inside
		// a noise band.
		if k <= maxToneHalfWidth && jn <= tj && hi-lo <= float64(2*maxToneHalfWidth+1)*bin {
			return true
		}
		if c.keyed && jn <= 4*tj*2*transientEdges/(math.Pi*math.Pi*math.Max(k, 1)*float64(g.frames)) {
			return true
		}
	}
	return false
}
