//go:build !purego

package fft

import "golang.org/x/sys/cpu"

// hasVector reports whether the AVX radix-4 kernel (radix4_amd64.s) can run:
// the CPU has AVX and the OS saves the YMM registers (cpu.X86.HasAVX checks
// both).
var hasVector = cpu.X86.HasAVX

// radix4AVX is the AVX form of radix4 over x[0:n] with the grouped
// twiddles of vectorTwiddles; q must be a multiple of 4 and n of 4q.
//
//go:noescape
func radix4AVX(x *complex64, n int, tw *complex64, q int, inv bool)

// radix4Vector runs radix4AVX on x with the stage's grouped twiddles.
func radix4Vector(x []complex64, tw []complex64, q int, inv bool) {
	radix4AVX(&x[0], len(x), &tw[0], q, inv)
}

// first4AVX is the AVX form of first4; q = len(src)/4 must be a multiple
// of 4.
//
//go:noescape
func first4AVX(dst, src *complex64, perm *int32, q int, inv bool)

// first4Vector runs first4AVX.
func first4Vector(dst, src []complex64, perm []int32, inv bool) {
	first4AVX(&dst[0], &src[0], &perm[0], len(perm), inv)
}

// first8AVX is the AVX form of first8; q = len(src)/8 must be a multiple
// of 4.
//
//go:noescape
func first8AVX(dst, src *complex64, perm *int32, q int, inv bool)

// first8Vector runs first8AVX.
func first8Vector(dst, src []complex64, perm []int32, inv bool) {
	first8AVX(&dst[0], &src[0], &perm[0], len(perm), inv)
}
