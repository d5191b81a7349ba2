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
// Wideband noise: with a baseline, the rise is the block's noise level
// over the baseline's (NoiseReference: a lower quantile of the bins'
// ratios to the baseline passband, which narrow interference does not
// move), in dB, reported when it exceeds WidebandRiseDB and when at least
// 6 of 8 sub-bands rose by more than half of it, so that a band-limited
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
	rise := 10 * math.Log10(in.LevelRise)
	if rise < in.Cfg.WidebandRiseDB {
		return out
	}
	covered := 0
	for _, r := range in.SubbandRise {
		if 10*math.Log10(r) > in.Cfg.WidebandRiseDB/2 {
			covered++
		}
	}
	if covered < wideSubbands*3/4 {
		return out
	}
	fs := in.F.Fs
	return append(out, Finding{Detector: d.Name(), Class: ClassWidebandNoise, LowHz: -fs / 2, HighHz: fs / 2,
		JN: in.LevelRise - 1, FloorRiseDB: rise, keyed: steps(in.F)})
}

// steps reports whether a block's power steps within it: the mean frame
// power of its first and last halves differ by more than 1.5 dB (a noise
// jammer switched on or off inside the block).
func steps(f *Features) bool {
	h := f.Frames / 2
	if h == 0 {
		return false
	}
	var a, b float64
	for i := 0; i < h; i++ {
		a += f.FramePower[i]
		b += f.FramePower[f.Frames-1-i]
	}
	if a <= 0 || b <= 0 {
		return false
	}
	return math.Abs(10*math.Log10(a/b)) > 1.5
}

// widebandFootprint is what a noise jammer accounts for besides itself,
// in the blocks where it switches on or off: there the bins' powers are
// means over frames of two levels, more spread than a stationary floor's
// (Gamma(M)) threshold allows, and single bins or short runs cross it;
// such findings standing 20 dB or more below the jammer are its own.
func widebandFootprint(c, x *Finding, g *grid) bool {
	return c.keyed && (x.Class == ClassCW || x.Class == ClassNarrowbandNoise || x.Class == ClassPulsed) &&
		x.JN <= c.JN/100
}
