package skstat

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
)

// CalibrateMonteCarlo returns SK limits for m accumulated power values
// (N = d = 1) taken from the empirical quantiles of trials simulated
// Gaussian-noise SK values, so that a fraction pfa of them lies below Lower
// and a fraction pfa above Upper. The power of a bin of a complex Gaussian
// FFT is exponentially distributed, so each simulated value is Estimate
// applied to m draws of rng.ExpFloat64. Quantiles interpolate linearly
// between order statistics at rank (trials−1)·pfa and (trials−1)·(1−pfa).
// The result is an estimate: its lower limit has a standard error of about
// √(pfa/trials)/f(Lower), f being the null density.
//
// CalibrateMonteCarlo panics if m < 2, trials < 2, pfa is not in (0, 0.5)
// or rng is nil.
func CalibrateMonteCarlo(m int, pfa float64, trials int, rng *rand.Rand) Thresholds {
	if m < 2 || trials < 2 || !(pfa > 0 && pfa < 0.5) || rng == nil {
		panic(fmt.Sprintf("skstat: CalibrateMonteCarlo(m=%d, pfa=%v, trials=%d) out of domain", m, pfa, trials))
	}
	sk := simulateNull(make([]float64, trials), m, rng)
	slices.Sort(sk)
	return Thresholds{
		Lower:  quantileSorted(sk, pfa),
		Upper:  quantileSorted(sk, 1-pfa),
		Method: MethodMonteCarlo,
	}
}

// simulateNull fills dst with SK values (N = d = 1) of m exponential power
// values each and returns it.
func simulateNull(dst []float64, m int, rng *rand.Rand) []float64 {
	for i := range dst {
		var s1, s2 float64
		for range m {
			p := rng.ExpFloat64()
			s1 += p
			s2 += p * p
		}
		dst[i] = Estimate(s1, s2, m, 1, 1)
	}
	return dst
}

// quantileSorted returns the q-quantile of the sorted sample s by linear
// interpolation between the order statistics around rank (len(s)−1)·q.
func quantileSorted(s []float64, q float64) float64 {
	h := float64(len(s)-1) * q
	i := int(math.Floor(h))
	if i >= len(s)-1 {
		return s[len(s)-1]
	}
	return s[i] + (h-float64(i))*(s[i+1]-s[i])
}
