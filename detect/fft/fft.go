package fft

import (
	"math"
	"math/bits"

	"gonum.org/v1/gonum/dsp/fourier"
)

// Plan holds the precomputed state for transforms of one length n: the
// twiddle factors, first-pass permutation and in-place scratch buffer of the
// radix-4 algorithm for n a power of two, or a gonum fourier.CmplxFFT with a
// preallocated complex128 buffer for other lengths. Building a Plan
// allocates; using it does not.
//
// A Plan is not safe for concurrent use: Forward and Inverse write to
// buffers held in the Plan. Make one Plan per goroutine.
type Plan struct {
	n int

	// Power-of-two lengths n ≥ 4.
	perm    []int32      // first-pass block order (bit reversal)
	first8  bool         // log2(n) odd: the first pass is radix-8
	stages  [][]twiddle3 // forward twiddles of each radix-4 stage, smallest first
	istages [][]twiddle3 // the same, conjugated, for Inverse
	scratch []complex64  // copy of src when the transform runs in place

	// The same twiddles grouped for the vector kernel (see vectorTwiddles),
	// when vector is set.
	vector            bool
	vstages, vistages [][]complex64

	// Other lengths.
	cmplx *fourier.CmplxFFT
	wide  []complex128
}

// NewPlan returns a Plan for transforms of length n. Any n ≥ 1 is accepted;
// powers of two use the package's radix-4 algorithm and other lengths
// gonum's mixed-radix transform. NewPlan panics if n < 1.
func NewPlan(n int) *Plan {
	if n < 1 {
		panic("fft: length must be at least 1")
	}
	p := &Plan{n: n}
	switch {
	case n <= 2:
		// Written out in transform.
	case n&(n-1) == 0:
		p.initPow2()
	default:
		p.cmplx = fourier.NewCmplxFFT(n)
		p.wide = make([]complex128, n)
	}
	return p
}

// initPow2 fills in the tables of the power-of-two algorithm for n ≥ 4.
func (p *Plan) initPow2() {
	n := p.n
	lg := bits.TrailingZeros(uint(n))
	p.first8 = lg%2 == 1
	r := 2 // log2 of the first pass radix
	if p.first8 {
		r = 3
	}
	// Position i of the bit-reversed input holds x[rev(i)]; for i = 2^r·m + j,
	// rev(i) = rev_{lg−r}(m) + rev_r(j)·n/2^r, so block m of the first pass
	// holds the stride-n/2^r subsequence that starts at rev_{lg−r}(m).
	p.perm = make([]int32, n>>r)
	for m := range p.perm {
		if lg > r {
			p.perm[m] = int32(bits.Reverse(uint(m)) >> (bits.UintSize - (lg - r)))
		}
	}
	for s := 4 << r; s <= n; s *= 4 {
		q := s / 4
		fw := make([]twiddle3, q)
		iw := make([]twiddle3, q)
		for k := range q {
			w1 := twiddle(k, s)
			w2 := twiddle(2*k, s)
			w3 := twiddle(3*k, s)
			fw[k] = twiddle3{w1, w2, w3}
			iw[k] = twiddle3{conj(w1), conj(w2), conj(w3)}
		}
		p.stages = append(p.stages, fw)
		p.istages = append(p.istages, iw)
		if hasVector && q%4 == 0 {
			p.vstages = append(p.vstages, vectorTwiddles(fw))
			p.vistages = append(p.vistages, vectorTwiddles(iw))
		}
	}
	p.vector = hasVector && len(p.vstages) == len(p.stages)
	p.scratch = make([]complex64, n)
}

// vectorTwiddles lays the twiddles of a stage out for the vector kernel:
// for each group of four k, W^k of the four, then W^{2k}, then W^{3k}.
func vectorTwiddles(tw []twiddle3) []complex64 {
	v := make([]complex64, 0, 3*len(tw))
	for k := 0; k < len(tw); k += 4 {
		for j := range 4 {
			v = append(v, tw[k+j].w1)
		}
		for j := range 4 {
			v = append(v, tw[k+j].w2)
		}
		for j := range 4 {
			v = append(v, tw[k+j].w3)
		}
	}
	return v
}

// twiddle returns e^{−j2πk/s}, computed in float64 and rounded to
// complex64 (the float64 error, ~1e-16, is far below float32 rounding).
func twiddle(k, s int) complex64 {
	sn, c := math.Sincos(-2 * math.Pi * float64(k%s) / float64(s))
	return complex(float32(c), float32(sn))
}

func conj(z complex64) complex64 { return complex(real(z), -imag(z)) }

// Len returns the transform length n of the Plan.
func (p *Plan) Len() int { return p.n }

// Forward computes the unnormalized discrete Fourier transform of src,
//
//	X[k] = Σ_{n=0}^{N−1} x[n]·e^{−j2πkn/N},  k = 0…N−1,
//
// places it in dst and returns dst. If dst is nil a new slice is allocated;
// otherwise len(dst) must be N. dst may be the same slice as src (an in-place
// transform) but must not overlap it otherwise. Forward panics with
// "fft: length mismatch" if len(src) or len(dst) is not N.
func (p *Plan) Forward(dst, src []complex64) []complex64 {
	return p.transform(dst, src, false)
}

// Inverse computes the unnormalized inverse discrete Fourier transform of
// src,
//
//	x[n] = Σ_{k=0}^{N−1} X[k]·e^{+j2πkn/N},  n = 0…N−1,
//
// places it in dst and returns dst. No 1/N factor is applied, so
// Inverse(Forward(x)) = N·x. dst and src follow the rules of Forward.
func (p *Plan) Inverse(dst, src []complex64) []complex64 {
	return p.transform(dst, src, true)
}

func (p *Plan) transform(dst, src []complex64, inv bool) []complex64 {
	n := p.n
	if len(src) != n {
		panic("fft: length mismatch")
	}
	if dst == nil {
		dst = make([]complex64, n)
	} else if len(dst) != n {
		panic("fft: length mismatch")
	}
	switch {
	case n == 1:
		dst[0] = src[0]
	case n == 2:
		a, b := src[0], src[1]
		dst[0], dst[1] = a+b, a-b
	case p.cmplx != nil:
		w := p.wide
		for i, v := range src {
			w[i] = complex128(v)
		}
		if inv {
			p.cmplx.Sequence(w, w)
		} else {
			p.cmplx.Coefficients(w, w)
		}
		for i, v := range w {
			dst[i] = complex64(v)
		}
	default:
		if &dst[0] == &src[0] {
			copy(p.scratch, src)
			src = p.scratch
		}
		switch {
		case p.first8 && p.vector && len(p.perm)%4 == 0:
			first8Vector(dst, src, p.perm, inv)
		case p.first8:
			first8(dst, src, p.perm, inv)
		case p.vector && len(p.perm)%4 == 0:
			first4Vector(dst, src, p.perm, inv)
		default:
			first4(dst, src, p.perm, inv)
		}
		if p.vector {
			stages := p.vstages
			if inv {
				stages = p.vistages
			}
			for _, tw := range stages {
				radix4Vector(dst, tw, len(tw)/3, inv)
			}
			break
		}
		stages := p.stages
		if inv {
			stages = p.istages
		}
		for _, tw := range stages {
			radix4(dst, tw, inv)
		}
	}
	return dst
}

// BinFrequency returns the signed frequency in Hz of bin k of an n-point
// transform of samples taken at fs Hz: k·fs/n for k < n/2 and (k−n)·fs/n
// otherwise (n/2 taken exactly, so for even n the bin k = n/2 is −fs/2 and
// for odd n the bins k ≤ (n−1)/2 are non-negative). It panics if n < 1 or k
// is not in [0, n).
func BinFrequency(k, n int, fs float64) float64 {
	if n < 1 {
		panic("fft: length must be at least 1")
	}
	if k < 0 || k >= n {
		panic("fft: bin index out of range")
	}
	if 2*k < n {
		return float64(k) * fs / float64(n)
	}
	return float64(k-n) * fs / float64(n)
}
