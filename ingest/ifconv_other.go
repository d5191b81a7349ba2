//go:build !amd64 || purego

package ingest

// useVectorHalfBand is false where there is no vector kernel.
var useVectorHalfBand = false

func halfBandQuarterAVX(dst *complex64, even, odd *float32, n int, taps *[hbK][8]float32, signs *[2][8]float32) {
	panic("ingest: no vector half-band kernel")
}
