package gnss

import "quietband/detect/fft"

// transformer is the small FFT interface the acquisition needs: unnormalized
// forward and inverse complex transforms of one fixed length, dst-first,
// allocation-free once built. It is satisfied by *fft.Plan from
// quietband/detect/fft; any other implementation (for example one built on
// gonum's dsp/fourier) can be swapped in through newTransformer.
type transformer interface {
	Forward(dst, src []complex64) []complex64
	Inverse(dst, src []complex64) []complex64
}

// newTransformer returns the FFT used for n-point transforms.
var newTransformer = func(n int) transformer { return fft.NewPlan(n) }
