package gnss

import (
	"math/rand/v2"
	"testing"
)

// TestVectorKernels checks that the AVX forms of mulTo, addPower and
// addDiffPower give exactly the values of the Go loops (the same float32
// products and sums in the same order, then the same float64 additions),
// for lengths that exercise the scalar tail too.
func TestVectorKernels(t *testing.T) {
	if !hasVector {
		t.Skip("no vector kernels on this machine (needs amd64 with AVX, without the purego tag)")
	}
	rng := rand.New(rand.NewPCG(7, 7))
	cplx := func(n int) []complex64 {
		v := make([]complex64, n)
		for i := range v {
			v[i] = complex(float32(rng.NormFloat64()), float32(rng.NormFloat64()))
		}
		return v
	}
	run := func(vector bool, f func()) {
		old := useVector
		useVector = vector
		defer func() { useVector = old }()
		f()
	}
	for _, n := range []int{1, 3, 4, 5, 8, 1023, 1024, 2048, 2047} {
		x, y := cplx(n), cplx(n)
		base := make([]float64, n)
		for i := range base {
			base[i] = rng.Float64()
		}
		var m [2][]complex64
		var p, d [2][]float64
		for k, vec := range []bool{false, true} {
			m[k] = make([]complex64, n)
			p[k] = append([]float64(nil), base...)
			d[k] = append([]float64(nil), base...)
			run(vec, func() {
				mulTo(m[k], x, y)
				addPower(p[k], x)
				addDiffPower(d[k], x, y)
			})
		}
		for i := range n {
			if m[0][i] != m[1][i] || p[0][i] != p[1][i] || d[0][i] != d[1][i] {
				t.Fatalf("n=%d i=%d: mulTo %v/%v addPower %v/%v addDiffPower %v/%v (Go/vector)",
					n, i, m[0][i], m[1][i], p[0][i], p[1][i], d[0][i], d[1][i])
			}
		}
	}
}
