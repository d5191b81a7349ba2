package detect

import (
	"math"
	"math/rand/v2"
	"testing"

	"quietband/detect/skstat"
)

// TestSpectralKurtosisOnNoise feeds the engine complex Gaussian noise and
// checks the per-bin SK: mean 1 (Nita & Gary 2010b: E[SK] = 1 for every
// M), variance the eq. 9 value, and the share of flagged bins near the
// configured false-alarm probability per side (within a factor of 2, the
// detector issue's requirement).
func TestSpectralKurtosisOnNoise(t *testing.T) {
	const n, m, blocks = 256, 128, 40
	rng := rand.New(rand.NewPCG(3, 4))
	x := make([]complex64, n*m)
	eng := NewSpectrum(n, m, 1e6)
	cfg := Config{SKPfa: 0.01}.Defaults(1e6)
	cfg.DCExcludeHz = 1 // nothing excluded but the DC bin itself
	sk := &SpectralKurtosis{}
	in := &BlockInput{Cfg: &cfg, Excluded: make([]bool, n)}
	exclusions(in.Excluded, n, 1e6, &cfg, 0, false)
	var sum, sum2 float64
	var count, low, high int
	for b := 0; b < blocks; b++ {
		for i := range x {
			x[i] = complex(float32(rng.NormFloat64()), float32(rng.NormFloat64()))
		}
		in.F, in.Samples = eng.Analyze(0, x, 0), x
		sk.Compute(in)
		for k, v := range in.SK {
			if in.Excluded[k] {
				continue
			}
			sum += v
			sum2 += v * v
			count++
			switch in.SKFlag[k] {
			case -1:
				low++
			case 1:
				high++
			}
		}
	}
	mean := sum / float64(count)
	variance := sum2/float64(count) - mean*mean
	want := skstat.NullMoments(m, 1, 1).Var
	if math.Abs(mean-1) > 0.01 {
		t.Errorf("mean SK %.4f, want 1 ± 1 %%", mean)
	}
	if math.Abs(variance/want-1) > 0.1 {
		t.Errorf("SK variance %.5f, eq. 9 gives %.5f", variance, want)
	}
	for side, got := range map[string]int{"low": low, "high": high} {
		rate := float64(got) / float64(count)
		if rate < cfg.SKPfa/2 || rate > cfg.SKPfa*2 {
			t.Errorf("%s-side false alarms %.4f, configured %.4f", side, rate, cfg.SKPfa)
		}
	}
}

// BenchmarkSpectralKurtosis is the per-bin SK and its flags for one block
// of 64 frames of 2048 bins.
func BenchmarkSpectralKurtosis(b *testing.B) {
	in := benchBlock(b, 10e6)
	sk := &SpectralKurtosis{}
	b.ReportAllocs()
	for b.Loop() {
		sk.Compute(in)
	}
}
