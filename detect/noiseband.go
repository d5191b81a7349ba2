package detect

import "math"

// NoiseBand finds band-limited noise: contiguous runs of bins whose power
// ratio to the floor exceeds the bin threshold, wider than a tone, with SK
// near 1 (Gaussian), covering less than three quarters of the band (a wider
// rise is wideband noise, NoiseFloor's).
//
// Bandwidth is measured at half of the run's median excess (−3 dB), the
// edges interpolated linearly between bins; the centre is the midpoint.
// J/N is the run's excess power over the noise power in the capture
// bandwidth. The mean SK over the run must lie within 4 standard errors
// of 1 (σ_SK/√bins; Nita & Gary 2010b eq. 9 for σ_SK): a constant-envelope
// run (SK low) belongs to CW or Swept, an intermittent one (SK high) to
// Pulse.
type NoiseBand struct{}

// Name implements Detector.
func (NoiseBand) Name() string { return "noise_band" }

// minBandBins is the narrowest run reported as a noise band.
const minBandBins = 4

// Detect implements Detector.
func (d NoiseBand) Detect(in *BlockInput, out []Finding) []Finding {
	f := in.F
	if f.Frames == 0 {
		return out
	}
	above := func(k int) bool { return !in.Excluded[k] && in.Ratio[k] > in.BinThreshold }
	for k := 0; k < f.N; {
		if !above(k) {
			k++
			continue
		}
		// Extend the run, bridging gaps of up to 2 bins and excluded bins
		// (the DC bin inside a band must not split it).
		j, last, gap := k, k, 0
		for j < f.N && gap <= 2 {
			switch {
			case above(j):
				last, gap = j, 0
			case !in.Excluded[j]:
				gap++
			}
			j++
		}
		lo, hi := k, last
		k = last + 1
		if hi-lo+1 < minBandBins || hi-lo+1 > f.N*3/4 {
			continue
		}
		sk, nb := in.meanSK(lo, hi)
		if nb == 0 || math.Abs(sk-1) > 4*in.SKSigma/math.Sqrt(float64(nb)) {
			continue
		}
		ex := in.scratch2[:0]
		for i := lo; i <= hi; i++ {
			ex = append(ex, in.excess(i))
		}
		in.scratch2 = ex
		med := medianScratch(&in.scratch, ex)
		half := med / 2
		lowEdge := edge(in, lo, -1, half)
		highEdge := edge(in, hi, +1, half)
		out = append(out, Finding{Detector: d.Name(), Class: ClassNarrowbandNoise, LowHz: lowEdge, HighHz: highEdge,
			OffsetHz: (lowEdge + highEdge) / 2, JN: (in.bandPower(lo-1, hi+1) - tonesWithin(in, out, lo, hi, med)) / in.NoisePower})
	}
	return out
}

// tonesWithin is the power the block's CW findings (already in out: the
// CW detector runs first) put into bins lo…hi beyond the band's own
// median excess med per bin: a tone inside a noise band is its own
// emitter, and counted into the band's J/N it would make the band's level
// follow the tone's keying (the tracker then dates the band by the tone).
// Each tone holds its Hann main lobe, ±2 bins (common practice).
//
// Not in a compressed block (low-bit samples, clipping): there the tone
// and the band drive the quantizer together and their intermodulation
// products are bands whose level follows both (nonlinear.go weighs them
// against the band's level with the tone in it).
func tonesWithin(in *BlockInput, out []Finding, lo, hi int, med float64) float64 {
	if in.Compressed {
		return 0
	}
	var s float64
	for i := range out {
		if out[i].Class != ClassCW {
			continue
		}
		for _, t := range out[i].Tones {
			k := in.F.Bin(t.OffsetHz)
			if k < lo || k > hi {
				continue
			}
			a, b := max(k-2, lo), min(k+2, hi)
			s += max(in.bandPower(a, b)-float64(b-a+1)*med, 0)
		}
	}
	return s
}

// edge walks from bin k in direction dir to where the excess falls below
// level and returns the interpolated frequency of the crossing.
func edge(in *BlockInput, k, dir int, level float64) float64 {
	f := in.F
	bin := f.Fs / float64(f.N)
	// Move inward first if the run's end bin is itself below the level.
	for in.excess(k) < level && k-dir >= 0 && k-dir < f.N {
		k -= dir
	}
	for {
		nx := k + dir
		if nx < 0 || nx >= f.N {
			return f.Offset(k) + float64(dir)*bin/2
		}
		a, b := in.excess(k), in.excess(nx)
		if b < level {
			t := 0.5
			if a > b {
				t = (a - level) / (a - b)
			}
			return f.Offset(k) + float64(dir)*t*bin
		}
		k = nx
	}
}

// bandFootprint is what a noise band accounts for besides itself:
// fragments of itself (another, weaker noise band inside its edges ± 2
// bins, split off where the band's own fluctuations dip), and "pulses"
// inside it no higher than its own envelope's peaks: the power of
// Gaussian noise exceeds 20 times its mean with probability e^−20 ≈ 2·10⁻⁹
// (its power is exponential), so a pulse whose peak J/N stands at most 25×
// the band's J/N is the band's own fluctuation; and peaks of that
// fluctuation standing in single bins. A tone inside a band standing
// well above its density is another emitter and stays.
func bandFootprint(c, x *Finding, g *grid) bool {
	class, lo, hi, jn := x.Class, x.LowHz, x.HighHz, x.JN
	inside := lo >= c.LowHz-2*g.bin && hi <= c.HighHz+2*g.bin
	switch class {
	case ClassNarrowbandNoise:
		return inside && jn <= c.JN
	case ClassPulsed:
		return overlaps(lo, hi, c.LowHz-2*g.bin, c.HighHz+2*g.bin) && jn <= 25*c.JN
	case ClassCW:
		// A peak of the band's own fluctuation: one bin's mean over the
		// frames may stand several of its standard deviations above the
		// band's density; a tone that is another emitter stands at least
		// twice the band's power in the bins a tone covers.
		// (A "band" not much wider than a tone is that tone, keyed or
		// drifting: it explains nothing.)
		w := float64(2*maxToneHalfWidth+1) * g.bin
		return inside && c.HighHz-c.LowHz > 4*w && jn <= 2*c.JN*w/(c.HighHz-c.LowHz)
	}
	return false
}
