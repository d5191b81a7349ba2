package fft

import (
	"fmt"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/dsp/fourier"
)

// benchSizes are the transform lengths of BenchmarkForward and BenchmarkGonum.
var benchSizes = []int{64, 256, 1024, 2048, 4096, 16384, 65536}

// BenchmarkForwardScalar is BenchmarkForward with the vector kernel off: the
// pure-Go radix-4 stages (what a machine without AVX runs).
func BenchmarkForwardScalar(b *testing.B) {
	for _, n := range []int{1024, 2048, 4096} {
		b.Run(fmt.Sprintf("n=%d", n), func(b *testing.B) { benchForward(b, n, false) })
	}
}

// BenchmarkForward measures Plan.Forward (complex64, out of place, reused
// plan and dst).
func BenchmarkForward(b *testing.B) {
	for _, n := range benchSizes {
		b.Run(fmt.Sprintf("n=%d", n), func(b *testing.B) { benchForward(b, n, hasVector) })
	}
}

// benchForward times Forward of n random samples, with the vector kernel
// if vector.
func benchForward(b *testing.B, n int, vector bool) {
	rng := rand.New(rand.NewPCG(1, uint64(n)))
	src := make([]complex64, n)
	for i := range src {
		src[i] = complex(float32(rng.NormFloat64()), float32(rng.NormFloat64()))
	}
	dst := make([]complex64, n)
	p := NewPlan(n)
	p.vector = p.vector && vector
	b.SetBytes(int64(8 * n))
	b.ReportAllocs()
	for b.Loop() {
		p.Forward(dst, src)
	}
	b.ReportMetric(float64(n)*float64(b.N)/b.Elapsed().Seconds()/1e6, "MS/s")
}

// BenchmarkInverse measures Plan.Inverse in place.
func BenchmarkInverse(b *testing.B) {
	for _, n := range benchSizes {
		b.Run(fmt.Sprintf("n=%d", n), func(b *testing.B) {
			rng := rand.New(rand.NewPCG(2, uint64(n)))
			x := make([]complex64, n)
			for i := range x {
				x[i] = complex(float32(rng.NormFloat64()), float32(rng.NormFloat64()))
			}
			p := NewPlan(n)
			b.SetBytes(int64(8 * n))
			b.ReportAllocs()
			for b.Loop() {
				p.Inverse(x, x)
			}
			b.ReportMetric(float64(n)*float64(b.N)/b.Elapsed().Seconds()/1e6, "MS/s")
		})
	}
}

// BenchmarkGonum measures gonum's fourier.CmplxFFT.Coefficients (complex128,
// reused plan and dst) on the same lengths, as the reference point.
func BenchmarkGonum(b *testing.B) {
	for _, n := range benchSizes {
		b.Run(fmt.Sprintf("n=%d", n), func(b *testing.B) {
			rng := rand.New(rand.NewPCG(1, uint64(n)))
			src := make([]complex128, n)
			for i := range src {
				src[i] = complex(rng.NormFloat64(), rng.NormFloat64())
			}
			dst := make([]complex128, n)
			f := fourier.NewCmplxFFT(n)
			b.SetBytes(int64(16 * n))
			b.ReportAllocs()
			for b.Loop() {
				f.Coefficients(dst, src)
			}
			b.ReportMetric(float64(n)*float64(b.N)/b.Elapsed().Seconds()/1e6, "MS/s")
		})
	}
}
