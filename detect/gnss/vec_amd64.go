//go:build !purego

package gnss

import "golang.org/x/sys/cpu"

// hasVector reports whether the AVX kernels of vec_amd64.s can run.
var hasVector = cpu.X86.HasAVX

//go:noescape
func mulToAVX(dst, x, y *complex64, n int)

//go:noescape
func addPowerAVX(dst *float64, w *complex64, n int)

//go:noescape
func addDiffPowerAVX(dst *float64, u, v *complex64, n int)

// mulToVector, addPowerVector and addDiffPowerVector run the AVX kernels
// on the first n&^3 elements and return how many they did.
func mulToVector(dst, x, y []complex64) int {
	n := len(dst) &^ 3
	if n > 0 {
		mulToAVX(&dst[0], &x[0], &y[0], n)
	}
	return n
}

func addPowerVector(dst []float64, w []complex64) int {
	n := len(dst) &^ 3
	if n > 0 {
		addPowerAVX(&dst[0], &w[0], n)
	}
	return n
}

func addDiffPowerVector(dst []float64, u, v []complex64) int {
	n := len(dst) &^ 3
	if n > 0 {
		addDiffPowerAVX(&dst[0], &u[0], &v[0], n)
	}
	return n
}
