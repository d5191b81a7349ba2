// Package fft computes complex64 discrete Fourier transforms for the
// spectrum engine.
//
// The forward transform of x[0…N−1] is
//
//	X[k] = Σ_{n=0}^{N−1} x[n]·e^{−j2πkn/N},  k = 0…N−1,
//
// and the inverse transform is
//
//	x[n] = Σ_{k=0}^{N−1} X[k]·e^{+j2πkn/N},
//
// both unnormalized, so Inverse(Forward(x)) = N·x. Bin k < N/2 is the
// frequency k·fs/N and bin k ≥ N/2 the negative frequency (k−N)·fs/N (see
// BinFrequency).
//
// For N a power of two the package uses the Cooley–Tukey algorithm
// (J. W. Cooley and J. W. Tukey, "An algorithm for the machine calculation of
// complex Fourier series", Math. Comp. 19(90):297–301, 1965) in its
// decimation-in-time form with radix 4: a first pass takes the input in
// bit-reversed order and computes the 4-point DFTs (8-point DFTs when log2 N
// is odd) of its stride-N/4 (stride-N/8) subsequences, then log4(N/4)
// (log4(N/8)) in-place radix-4 stages follow, each butterfly combining four
// quarter-length DFTs with the twiddle factors W^k, W^{2k}, W^{3k}
// (W = e^{−j2π/s} for stage size s). N = 1 and N = 2 are written out.
// Twiddles are computed in float64 and stored as complex64; the arithmetic
// is float32.
// A Stockham autosort radix-4 variant (W. T. Cochran et al., "What is the
// fast Fourier transform?", Proc. IEEE 55(10):1664–1674, 1967) was measured
// as well and was 1.2–1.9× slower on amd64, so it is not used.
//
// On amd64 with AVX (and without the purego build tag) the first pass and
// the radix-4 stages run as assembly kernels (radix4_amd64.s) that process
// four butterflies at once in 256-bit registers. They perform the same
// float32 operations in the same order as the Go kernels of kernels.go,
// without fused multiply-adds, so both give the same values (a test
// checks this) and results do not depend on the machine. At 1024 points
// that is about 6× the Go kernels' speed (BenchmarkForward,
// BenchmarkForwardScalar).
//
// Other lengths use gonum's dsp/fourier.CmplxFFT (a port of FFTPACK's
// mixed-radix transform, complex128), with the widened copy held in the Plan.
//
// Rounding: with unit roundoff u = 2⁻²⁴ of float32, a radix-2-based
// Cooley–Tukey FFT has a normwise error ‖X̂−X‖₂ ≤ log2(N)·η/(1−log2(N)·η)·‖X‖₂
// with η ≈ 7u (N. J. Higham, "Accuracy and Stability of Numerical Algorithms",
// 2nd ed., SIAM 2002, §24.1, Theorem 24.2; from memory): about 4e-6 relative
// at N = 1024. The tests check that bound.
//
// A Plan holds the tables for one N and the buffers for in-place use; it is
// not safe for concurrent use, so each goroutine makes its own. Forward and
// Inverse allocate nothing unless dst is nil.
package fft
