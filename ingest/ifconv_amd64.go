//go:build !purego

package ingest

import "golang.org/x/sys/cpu"

// useVectorHalfBand selects the AVX kernel of the fs/4 conversion
// (ifconv_amd64.s) where the CPU has AVX; it gives the same samples as
// halfBandQuarterGo (TestVectorHalfBand).
var useVectorHalfBand = cpu.X86.HasAVX

//go:noescape
func halfBandQuarterAVX(dst *complex64, even, odd *float32, n int, taps *[hbK][8]float32, signs *[2][8]float32)
