package detect

import (
	"math"

	"quietband/detect/skstat"
)

// SpectralKurtosis flags non-Gaussian frequency bins with the generalized
// spectral kurtosis estimator of Nita & Gary (2010b, MNRAS 406:L60, eq. 8)
// over the M frames of a block, with N = 1 raw spectrum per accumulation and
// shape factor d = 1 (the power of a complex Gaussian FFT bin is
// exponential):
//
//	SK(k) = (M + 1)/(M − 1) · (M·S2(k)/S1(k)² − 1),
//
// S1 = Σ P_i(k), S2 = Σ P_i(k)². E[SK] = 1 for Gaussian noise. A steady
// tone gives SK = (1 + 2ρ)/(1 + ρ)² < 1 (ρ the per-bin INR); interference
// present in a fraction δ < ½ of the frames pushes SK above 1 (REFERENCES
// §2.5). Thresholds come from a Pearson type IV fit to the estimator's null
// moments (Nita & Gary 2010b eq. 9; skstat) for the configured false-alarm
// probability per bin and side, so they are derived, not tuned.
//
// SK is blind to pulses at 50 % duty cycle (SK = 1 exactly there), so it
// never raises an event alone: its findings are evidence that the
// classifier uses to tell CW and chirps (low) from pulses (high).
type SpectralKurtosis struct {
	cache map[int]skstat.Thresholds
}

// Name implements Detector.
func (*SpectralKurtosis) Name() string { return "spectral_kurtosis" }

// Compute fills in.SK and in.SKFlag for the block. It runs before every
// other detector, which may read the result.
func (d *SpectralKurtosis) Compute(in *BlockInput) {
	f := in.F
	if len(in.SK) != f.N {
		in.SK = make([]float64, f.N)
		in.SKFlag = make([]int8, f.N)
	}
	m := f.Frames
	if m < 16 {
		// Too few frames for a meaningful SK: no flags.
		for k := range in.SK {
			in.SK[k], in.SKFlag[k] = 1, 0
		}
		in.SKThreshold = [2]float64{0, math.Inf(1)}
		in.SKSigma = math.Inf(1)
		return
	}
	t := d.thresholds(m, in.Cfg.SKPfa)
	in.SKThreshold = [2]float64{t.Lower, t.Upper}
	in.SKSigma = math.Sqrt(skstat.NullMoments(m, 1, 1).Var)
	for k := range in.SK {
		sk := skstat.Estimate(f.S1[k], f.S2[k], m, 1, 1)
		if math.IsNaN(sk) {
			sk = 1
		}
		in.SK[k] = sk
		if in.Excluded[k] {
			in.SKFlag[k] = 0
			continue
		}
		in.SKFlag[k] = int8(t.Flags(sk))
	}
}

func (d *SpectralKurtosis) thresholds(m int, pfa float64) skstat.Thresholds {
	if d.cache == nil {
		d.cache = map[int]skstat.Thresholds{}
	}
	if t, ok := d.cache[m]; ok {
		return t
	}
	t, err := skstat.NewThresholds(m, 1, 1, pfa)
	if err != nil {
		// m ≥ 16 and pfa in (0, 0.1) are validated; fall back to the
		// Gaussian approximation rather than failing the capture.
		s := math.Sqrt(skstat.NullMoments(m, 1, 1).Var)
		t = skstat.Thresholds{Lower: 1 - 3*s, Upper: 1 + 3*s, Method: "normal"}
	}
	d.cache[m] = t
	return t
}

// minSKRun is how many adjacent bins must be flagged the same way before
// the flags are reported as evidence: neighbouring Hann-windowed bins are
// correlated, so single flags are common under noise.
const minSKRun = 4

// Detect reports runs of at least minSKRun adjacent bins flagged on the
// same side as sk_low or sk_high evidence.
func (d *SpectralKurtosis) Detect(in *BlockInput, out []Finding) []Finding {
	f := in.F
	for k := 0; k < f.N; {
		s := in.SKFlag[k]
		if s == 0 {
			k++
			continue
		}
		j := k
		for j < f.N && in.SKFlag[j] == s {
			j++
		}
		if j-k >= minSKRun {
			ev := "sk_low"
			if s > 0 {
				ev = "sk_high"
			}
			lo, hi := f.Offset(k), f.Offset(j-1)
			out = append(out, Finding{Detector: d.Name(), Evidence: ev, LowHz: lo, HighHz: hi,
				OffsetHz: (lo + hi) / 2, JN: in.bandPower(k, j-1) / in.NoisePower})
		}
		k = j
	}
	return out
}

// meanSK is the mean SK over bins lo..hi (centred indices), skipping
// excluded bins, and how many bins it averaged.
func (in *BlockInput) meanSK(lo, hi int) (float64, int) {
	var s float64
	var n int
	for k := max(lo, 0); k <= min(hi, in.F.N-1); k++ {
		if !in.Excluded[k] {
			s += in.SK[k]
			n++
		}
	}
	if n == 0 {
		return 1, 0
	}
	return s / float64(n), n
}
