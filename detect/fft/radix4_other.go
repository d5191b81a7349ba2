//go:build !amd64 || purego

package fft

// hasVector is false where there is no vector kernel: radix4 runs.
var hasVector = false

func radix4Vector(x []complex64, tw []complex64, q int, inv bool) {
	panic("fft: no vector kernel on this platform")
}

func first4Vector(dst, src []complex64, perm []int32, inv bool) {
	panic("fft: no vector kernel on this platform")
}

func first8Vector(dst, src []complex64, perm []int32, inv bool) {
	panic("fft: no vector kernel on this platform")
}
