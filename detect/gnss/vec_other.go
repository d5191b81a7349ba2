//go:build !amd64 || purego

package gnss

// hasVector is false where there are no vector kernels.
var hasVector = false

func mulToVector(dst, x, y []complex64) int                  { return 0 }
func addPowerVector(dst []float64, w []complex64) int        { return 0 }
func addDiffPowerVector(dst []float64, u, v []complex64) int { return 0 }
