package detect

import (
	"math/rand/v2"
	"testing"
)

// BenchmarkPassband is the noise reference's passband fit of one block's
// PSD (2048 bins, 64 frames): what a block costs without a baseline.
func BenchmarkPassband(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 2))
	psd := make([]float64, 2048)
	for k := range psd {
		var s float64
		for range 64 {
			s += rng.ExpFloat64()
		}
		psd[k] = s / 64
	}
	p := NewPassband(len(psd))
	skip := make([]bool, len(psd))
	b.ReportAllocs()
	for b.Loop() {
		p.Fit(psd, 64, skip)
	}
}
