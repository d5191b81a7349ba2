package detect

import "math"

// NoiseFloor measures what a receiver's AGC would see and reports a
// wideband floor rise.
//
// Per block: total power P = mean |x|² (dBFS), the noise floor, the AGC
// deviation 10·log10(P/P_base) against the site baseline, the clip
// fraction, and a Gaussianity statistic of the amplitude distribution, the
// kurtosis ratio r = E|x|⁴/(E|x|²)²: 2 for circular complex Gaussian noise,
// 1 for a constant envelope (CW, chirps), above 2 for pulses (REFERENCES
// §9). With |x|² exponential its estimate over K samples has variance
// about 4/K (delta method on the sample moments; the same 4/K as SK).
//
// The AGC relation ΔG = 10·log10(1 + J/N) (Bastide et al. 2003) ties a
// floor rise R to the interference: J/N = 10^(R/10) − 1.
//
// Wideband noise: with a baseline, the rise is the median bin ratio to the
// baseline, in dB (a narrow feature does not move a median), reported when
// it exceeds
// WidebandRiseDB in at least 6 of 8 sub-bands, so that a band-limited
// emitter is left to NoiseBand.
type NoiseFloor struct{}

// Name implements Detector.
func (NoiseFloor) Name() string { return "noise_floor" }

// wideSubbands is the number of sub-bands a rise must cover.
const wideSubbands = 8

// Detect implements Detector.
func (d NoiseFloor) Detect(in *BlockInput, out []Finding) []Finding {
	if !in.HasBaseline || in.F.Frames == 0 {
		return out
	}
	// A rise of R dB across the band raises the block's total power by R
	// dB: below half the threshold there is nothing to look for.
	if 10*math.Log10(in.F.Power/in.NoisePower) < in.Cfg.WidebandRiseDB/2 {
		return out
	}
	rise, covered := floorRise(in)
	if rise < in.Cfg.WidebandRiseDB || covered < wideSubbands*3/4 {
		return out
	}
	fs := in.F.Fs
	return append(out, Finding{Detector: d.Name(), Class: ClassWidebandNoise, LowHz: -fs / 2, HighHz: fs / 2,
		JN: math.Pow(10, rise/10) - 1, FloorRiseDB: rise})
}

// floorRise returns the floor rise in dB, from the median bin ratio to
// the baseline (robust against narrow features; the median of a mean of M
// exponentials is about 1 − 1/(3M) of its mean, Wilson–Hilferty), and how
// many sub-bands rose by more than half the threshold.
func floorRise(in *BlockInput) (rise float64, covered int) {
	f := in.F
	corr := 1 - 1/(3*float64(f.Frames))
	width := f.N / wideSubbands
	if cap(in.scratch2) < f.N {
		in.scratch2 = make([]float64, f.N)
	}
	vals := in.scratch2[:0]
	for b := 0; b < wideSubbands; b++ {
		sub := vals[len(vals):]
		for k := b * width; k < (b+1)*width; k++ {
			if !in.Excluded[k] {
				sub = append(sub, in.Ratio[k])
			}
		}
		if len(sub) > 0 && 10*math.Log10(medianScratch(&in.scratch, sub)/corr) > in.Cfg.WidebandRiseDB/2 {
			covered++
		}
		vals = vals[:len(vals)+len(sub)]
	}
	if len(vals) == 0 {
		return 0, 0
	}
	return 10 * math.Log10(medianScratch(&in.scratch, vals)/corr), covered
}
