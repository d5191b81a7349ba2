//go:build !purego

package ingest

import "golang.org/x/sys/cpu"

// hasVectorDecode reports whether the AVX2 ci16 decoder of decode_amd64.s
// can run (it also uses POPCNT, which every AVX2 processor has).
var hasVectorDecode = cpu.X86.HasAVX2 && cpu.X86.HasPOPCNT

//go:noescape
func decodeCI16LEAVX2(dst *complex64, src *byte, n int) (clipped int)

// decodeCI16LEVector decodes the first len(dst)&^7 samples of src and
// returns how many it did and how many of those were clipped.
func decodeCI16LEVector(dst []complex64, src []byte) (done, clipped int) {
	n := len(dst) &^ 7
	if n == 0 {
		return 0, 0
	}
	_ = src[4*n-1]
	return n, decodeCI16LEAVX2(&dst[0], &src[0], n)
}
