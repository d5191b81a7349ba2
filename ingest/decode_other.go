//go:build !amd64 || purego

package ingest

// hasVectorDecode is false where there is no vector decoder.
var hasVectorDecode = false

func decodeCI16LEVector(dst []complex64, src []byte) (done, clipped int) { return 0, 0 }
