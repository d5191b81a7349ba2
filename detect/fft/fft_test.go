package fft

import (
	"fmt"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"strings"
	"testing"

	"gonum.org/v1/gonum/dsp/fourier"
)

// Error bounds.
//
// u is the unit roundoff of float32 (2⁻²⁴ ≈ 6e-8). Higham, "Accuracy and
// Stability of Numerical Algorithms", 2nd ed. (SIAM 2002), §24.1, Theorem
// 24.2 (from memory): a Cooley–Tukey FFT of length n = 2^t computed in
// floating point with twiddles accurate to μ satisfies
//
//	‖X̂ − X‖₂ / ‖X‖₂ ≤ t·η / (1 − t·η),  η = μ + γ₄(√2 + μ),  γ₄ = 4u/(1−4u),
//
// so the error grows like O(log n)·u, as is common practice to assume for
// FFTs. The twiddles are rounded from float64, so μ = u (the float64 error is
// below 1e-15 and is absorbed by rounding μ up to 1.01u). A radix-4 stage is
// two radix-2 levels (each a √2-scaled unitary map with unit-modulus
// entries), so the same per-level η applies, with t = ⌈log2 n⌉ levels. The
// componentwise form of the same analysis (the product of the absolute
// level matrices is the all-ones matrix, one path from each input to each
// output) bounds every bin:
//
//	|X̂[k] − X[k]| ≤ ((1+η)^t − 1)·Σ|x[m]|.
//
// For lengths that go through gonum's complex128 transform the only error
// is the final rounding to complex64 (≤ u per bin), inside both bounds.
const unitRoundoff = 1.0 / (1 << 24)

// eta is η of Higham's Theorem 24.2 for float32 with μ = 1.01u.
func eta() float64 {
	u := unitRoundoff
	mu := 1.01 * u
	g4 := 4 * u / (1 - 4*u)
	return mu + g4*(math.Sqrt2+mu)
}

// levels is t = ⌈log2 n⌉.
func levels(n int) int {
	t := 0
	for 1<<t < n {
		t++
	}
	return t
}

// normBound is Higham's relative normwise bound t·η/(1−t·η).
func normBound(n int) float64 {
	te := float64(levels(n)) * eta()
	return te / (1 - te)
}

// binBound is the componentwise factor (1+η)^t − 1.
func binBound(n int) float64 {
	return math.Pow(1+eta(), float64(levels(n))) - 1
}

// randomSignal returns n complex Gaussian samples of unit variance per
// component, from a fixed seed.
func randomSignal(n int, seed uint64) []complex64 {
	rng := rand.New(rand.NewPCG(seed, uint64(n)))
	x := make([]complex64, n)
	for i := range x {
		x[i] = complex(float32(rng.NormFloat64()), float32(rng.NormFloat64()))
	}
	return x
}

// directDFT returns bin k of Σ_m x[m]·e^{sign·j2πkm/n} computed in float64
// straight from the definition (Cooley & Tukey 1965 eq. 1), with the
// exponentials taken from a float64 table indexed by k·m mod n.
func directDFT(x []complex64, k int, table []complex128) complex128 {
	n := len(x)
	var s complex128
	idx := 0
	for _, v := range x {
		s += complex128(v) * table[idx]
		idx += k
		if idx >= n {
			idx %= n
		}
	}
	return s
}

// expTable returns e^{sign·j2πm/n} for m = 0…n−1 in float64.
func expTable(n int, sign float64) []complex128 {
	t := make([]complex128, n)
	for m := range t {
		s, c := math.Sincos(sign * 2 * math.Pi * float64(m) / float64(n))
		t[m] = complex(c, s)
	}
	return t
}

// compare checks got against want at the bins listed (all bins if bins is
// nil) with the componentwise bound, and, when all bins are given, with the
// normwise bound. It returns the observed relative normwise error (or the
// largest per-bin error relative to Σ|x| for spot checks).
func compare(t *testing.T, label string, x, got []complex64, want func(k int) complex128, bins []int) float64 {
	t.Helper()
	n := len(x)
	var l1 float64
	for _, v := range x {
		l1 += cmplx.Abs(complex128(v))
	}
	all := bins == nil
	if all {
		bins = make([]int, n)
		for k := range bins {
			bins[k] = k
		}
	}
	tolBin := binBound(n) * l1
	var errSq, refSq, worst float64
	for _, k := range bins {
		w := want(k)
		e := cmplx.Abs(complex128(got[k]) - w)
		if e > tolBin {
			t.Errorf("%s: bin %d: |error| %.3g > bound %.3g (got %v, want %v)", label, k, e, tolBin, got[k], w)
		}
		worst = max(worst, e/l1)
		errSq += e * e
		refSq += real(w)*real(w) + imag(w)*imag(w)
	}
	if !all {
		return worst
	}
	rel := 0.0
	if refSq > 0 {
		rel = math.Sqrt(errSq / refSq)
	}
	if nb := normBound(n); rel > nb {
		t.Errorf("%s: relative normwise error %.3g > Higham bound %.3g", label, rel, nb)
	}
	return rel
}

// TestAgainstDirectDFT compares Forward and Inverse with the DFT sums of
// their definitions, evaluated in float64.
func TestAgainstDirectDFT(t *testing.T) {
	tests := []struct {
		n    int
		bins []int // nil: all bins
		path string
	}{
		{n: 1, path: "copy"},
		{n: 2, path: "direct"},
		{n: 4, path: "radix-4 first pass"},
		{n: 8, path: "radix-8 first pass"},
		{n: 16, path: "radix-4"},
		{n: 32, path: "radix-8 + radix-4"},
		{n: 64, path: "radix-4"},
		{n: 128, path: "radix-8 + radix-4"},
		{n: 256, path: "radix-4"},
		{n: 1024, path: "radix-4"},
		{n: 2048, path: "radix-8 + radix-4"},
		{n: 4096, path: "radix-4"},
		{n: 65536, bins: []int{0, 1, 2, 3, 1000, 16383, 16384, 32767, 32768, 32769, 49152, 65534, 65535}, path: "radix-4, spot bins"},
		{n: 3, path: "gonum"},
		{n: 12, path: "gonum"},
		{n: 100, path: "gonum"},
		{n: 1000, path: "gonum"},
	}
	for _, tc := range tests {
		t.Run(fmt.Sprintf("n=%d", tc.n), func(t *testing.T) {
			x := randomSignal(tc.n, 1)
			p := NewPlan(tc.n)
			fwd := p.Forward(nil, x)
			inv := p.Inverse(nil, x)
			ft := expTable(tc.n, -1) // X[k] = Σ x[m] e^{−j2πkm/n}
			it := expTable(tc.n, +1) // x[m] = Σ X[k] e^{+j2πkm/n}
			ef := compare(t, "Forward", x, fwd, func(k int) complex128 { return directDFT(x, k, ft) }, tc.bins)
			ei := compare(t, "Inverse", x, inv, func(k int) complex128 { return directDFT(x, k, it) }, tc.bins)
			if tc.bins == nil {
				t.Logf("%s: relative normwise error forward %.2g, inverse %.2g (bound %.2g)", tc.path, ef, ei, normBound(tc.n))
			} else {
				t.Logf("%s: largest bin error / Σ|x| forward %.2g, inverse %.2g (bound %.2g)", tc.path, ef, ei, binBound(tc.n))
			}
		})
	}
}

// TestAgainstGonum cross-checks Forward and Inverse with gonum's
// fourier.CmplxFFT (FFTPACK port, complex128) on the same input, for every
// bin, including the full 65536-point transform.
func TestAgainstGonum(t *testing.T) {
	tests := []struct{ n int }{
		{4}, {8}, {16}, {32}, {64}, {128}, {512}, {1024}, {2048}, {4096}, {8192}, {16384}, {32768}, {65536}, {100}, {1000},
	}
	for _, tc := range tests {
		t.Run(fmt.Sprintf("n=%d", tc.n), func(t *testing.T) {
			x := randomSignal(tc.n, 2)
			wide := make([]complex128, tc.n)
			for i, v := range x {
				wide[i] = complex128(v)
			}
			ref := fourier.NewCmplxFFT(tc.n)
			wantF := ref.Coefficients(nil, wide)
			wantI := ref.Sequence(nil, wide)
			p := NewPlan(tc.n)
			ef := compare(t, "Forward vs gonum Coefficients", x, p.Forward(nil, x), func(k int) complex128 { return wantF[k] }, nil)
			ei := compare(t, "Inverse vs gonum Sequence", x, p.Inverse(nil, x), func(k int) complex128 { return wantI[k] }, nil)
			t.Logf("relative error forward %.2g, inverse %.2g (bound %.2g)", ef, ei, normBound(tc.n))
		})
	}
}

// TestRoundTrip checks Inverse(Forward(x)) = n·x (DFT inversion formula,
// Oppenheim & Schafer, Discrete-Time Signal Processing, 3rd ed., eq. 8.67–8.68,
// from memory). Each transform contributes at most the normwise bound b of
// Higham's Theorem 24.2 and ‖X‖₂ = √n·‖x‖₂, so ‖x̂ − n·x‖₂ ≤ b(2+b)·n·‖x‖₂.
func TestRoundTrip(t *testing.T) {
	for _, n := range []int{1, 2, 4, 8, 16, 32, 256, 1024, 2048, 4096, 65536, 12, 1000} {
		t.Run(fmt.Sprintf("n=%d", n), func(t *testing.T) {
			x := randomSignal(n, 3)
			p := NewPlan(n)
			y := p.Inverse(nil, p.Forward(nil, x))
			var errSq, xSq float64
			for i := range x {
				d := complex128(y[i]) - complex(float64(n), 0)*complex128(x[i])
				errSq += real(d)*real(d) + imag(d)*imag(d)
				xSq += float64(real(x[i])*real(x[i]) + imag(x[i])*imag(x[i]))
			}
			b := normBound(n)
			got := math.Sqrt(errSq) / (float64(n) * math.Sqrt(xSq))
			if tol := b * (2 + b); got > tol {
				t.Errorf("‖Inverse(Forward(x)) − n·x‖/(n‖x‖) = %.3g > %.3g", got, tol)
			}
		})
	}
}

// TestParseval checks Σ|x[m]|² = (1/n)·Σ|X[k]|² (Parseval's relation for the
// DFT, Oppenheim & Schafer, Discrete-Time Signal Processing, 3rd ed., §8.6,
// from memory). With ‖X̂‖₂ within (1 ± b)·‖X‖₂ (Higham Theorem 24.2) the
// relative difference is at most (1+b)² − 1.
func TestParseval(t *testing.T) {
	for _, n := range []int{2, 4, 8, 64, 512, 1024, 4096, 65536, 100, 1000} {
		t.Run(fmt.Sprintf("n=%d", n), func(t *testing.T) {
			x := randomSignal(n, 4)
			X := NewPlan(n).Forward(nil, x)
			var ex, eX float64
			for i := range x {
				ex += sq(x[i])
				eX += sq(X[i])
			}
			eX /= float64(n)
			b := normBound(n)
			if rel := math.Abs(eX-ex) / ex; rel > (1+b)*(1+b)-1 {
				t.Errorf("Σ|x|² = %.9g, Σ|X|²/n = %.9g: relative difference %.3g > %.3g", ex, eX, rel, (1+b)*(1+b)-1)
			}
		})
	}
}

func sq(z complex64) float64 {
	r, i := float64(real(z)), float64(imag(z))
	return r*r + i*i
}

// TestTone checks that a complex exponential at a bin frequency transforms
// into a single spike: x[m] = A·e^{j2πf0·m/fs} with f0 = k0·fs/n gives
// X[k0] = A·n and X[k] = 0 elsewhere (orthogonality of the DFT basis,
// Oppenheim & Schafer, 3rd ed., eq. 8.58, from memory), at the signed
// frequency BinFrequency(k0, n, fs) = f0; and that Inverse maps the spike
// A·n·δ[k−k0] back to n·x, which pins its e^{+j…} sign. Tolerances are the
// componentwise bound plus the rounding of the complex64 input (u per
// sample, ≤ u·n·A in any bin).
func TestTone(t *testing.T) {
	tests := []struct {
		n      int
		fs, f0 float64 // Hz; f0 on a bin, signed
		amp    float64
	}{
		{n: 4, fs: 4, f0: 1, amp: 1},
		{n: 8, fs: 8e6, f0: -3e6, amp: 0.5},
		{n: 64, fs: 2.048e6, f0: 0, amp: 2},
		{n: 256, fs: 2.56e6, f0: 300e3, amp: 1},
		{n: 1024, fs: 4.096e6, f0: -1.2e6, amp: 0.01},
		{n: 1024, fs: 4.096e6, f0: -2.048e6, amp: 1}, // k0 = n/2, the −fs/2 bin
		{n: 2048, fs: 10.24e6, f0: 5.115e6, amp: 1},  // k0 = n/2 − 1
		{n: 4096, fs: 20.48e6, f0: -5e3, amp: 1},     // k0 = n − 1
		{n: 65536, fs: 65.536e6, f0: 12.345e6, amp: 1},
		{n: 1000, fs: 1e6, f0: -250e3, amp: 1}, // gonum path
		{n: 12, fs: 12, f0: 5, amp: 3},
	}
	for _, tc := range tests {
		t.Run(fmt.Sprintf("n=%d/f0=%g", tc.n, tc.f0), func(t *testing.T) {
			n := tc.n
			k0 := int(math.Round(tc.f0 / tc.fs * float64(n)))
			if k0 < 0 {
				k0 += n
			}
			x := make([]complex64, n)
			for m := range x {
				// Phase reduced mod n before scaling so it stays exact in float64.
				ph := 2 * math.Pi * float64((k0*m)%n) / float64(n)
				x[m] = complex64(cmplx.Rect(tc.amp, ph))
			}
			p := NewPlan(n)
			X := p.Forward(nil, x)
			tol := (binBound(n)*(1+unitRoundoff) + unitRoundoff) * float64(n) * tc.amp
			peak := 0
			for k := range X {
				want := 0.0
				if k == k0 {
					want = tc.amp * float64(n)
				}
				if e := cmplx.Abs(complex128(X[k]) - complex(want, 0)); e > tol {
					t.Errorf("X[%d] = %v, want %g (|error| %.3g > %.3g)", k, X[k], want, e, tol)
				}
				if cmplx.Abs(complex128(X[k])) > cmplx.Abs(complex128(X[peak])) {
					peak = k
				}
			}
			if peak != k0 {
				t.Errorf("peak at bin %d, want %d", peak, k0)
			}
			if f := BinFrequency(peak, n, tc.fs); math.Abs(f-tc.f0) > 1e-9*tc.fs {
				t.Errorf("BinFrequency(%d, %d, %g) = %g Hz, want %g Hz", peak, n, tc.fs, f, tc.f0)
			}
			spike := make([]complex64, n)
			spike[k0] = complex(float32(tc.amp*float64(n)), 0)
			y := p.Inverse(nil, spike)
			for m := range y {
				if e := cmplx.Abs(complex128(y[m]) - complex(float64(n), 0)*complex128(x[m])); e > tol {
					t.Errorf("Inverse(spike)[%d] = %v, want %v (|error| %.3g > %.3g)", m, y[m], complex(float64(n), 0)*complex128(x[m]), e, tol)
					break
				}
			}
		})
	}
}

// TestInPlace checks that dst == src gives bit-for-bit the out-of-place
// result (same operations on the same values).
func TestInPlace(t *testing.T) {
	for _, n := range []int{1, 2, 4, 8, 16, 32, 1024, 2048, 65536, 12, 1000} {
		t.Run(fmt.Sprintf("n=%d", n), func(t *testing.T) {
			x := randomSignal(n, 5)
			p := NewPlan(n)
			for _, dir := range []struct {
				name string
				f    func(dst, src []complex64) []complex64
			}{{"Forward", p.Forward}, {"Inverse", p.Inverse}} {
				want := dir.f(make([]complex64, n), x)
				buf := append([]complex64(nil), x...)
				got := dir.f(buf, buf)
				if &got[0] != &buf[0] {
					t.Fatalf("%s in place did not return dst", dir.name)
				}
				for k := range want {
					if got[k] != want[k] {
						t.Fatalf("%s in place: bin %d = %v, out of place %v", dir.name, k, got[k], want[k])
					}
				}
			}
		})
	}
}

// TestZeroAllocs checks that Forward and Inverse allocate nothing with a
// caller-supplied dst, out of place and in place.
func TestZeroAllocs(t *testing.T) {
	for _, n := range []int{1024, 2048, 1000} {
		x := randomSignal(n, 6)
		dst := make([]complex64, n)
		p := NewPlan(n)
		tests := []struct {
			name string
			f    func()
		}{
			{"Forward", func() { p.Forward(dst, x) }},
			{"Inverse", func() { p.Inverse(dst, x) }},
			{"Forward in place", func() { p.Forward(dst, dst) }},
			{"Inverse in place", func() { p.Inverse(dst, dst) }},
		}
		for _, tc := range tests {
			if a := testing.AllocsPerRun(20, tc.f); a != 0 {
				t.Errorf("n=%d %s: %v allocations per call, want 0", n, tc.name, a)
			}
		}
	}
}

// TestNilDst checks that a nil dst yields a fresh slice of length n and
// leaves src untouched.
func TestNilDst(t *testing.T) {
	for _, n := range []int{1, 8, 1024, 100} {
		x := randomSignal(n, 7)
		orig := append([]complex64(nil), x...)
		p := NewPlan(n)
		for _, f := range []func(dst, src []complex64) []complex64{p.Forward, p.Inverse} {
			got := f(nil, x)
			if len(got) != n || &got[0] == &x[0] {
				t.Errorf("n=%d: nil dst gave len %d, aliasing src %v", n, len(got), &got[0] == &x[0])
			}
			for i := range x {
				if x[i] != orig[i] {
					t.Fatalf("n=%d: src modified at %d", n, i)
				}
			}
		}
		if p.Len() != n {
			t.Errorf("Len() = %d, want %d", p.Len(), n)
		}
	}
}

// TestPanics checks the programmer-error panics and their "fft:" prefix.
func TestPanics(t *testing.T) {
	p := NewPlan(16)
	q := NewPlan(10)
	tests := []struct {
		name string
		f    func()
		want string
	}{
		{"NewPlan(0)", func() { NewPlan(0) }, "fft: "},
		{"NewPlan(-4)", func() { NewPlan(-4) }, "fft: "},
		{"short src", func() { p.Forward(nil, make([]complex64, 15)) }, "fft: length mismatch"},
		{"long src", func() { p.Inverse(nil, make([]complex64, 17)) }, "fft: length mismatch"},
		{"short dst", func() { p.Forward(make([]complex64, 8), make([]complex64, 16)) }, "fft: length mismatch"},
		{"empty dst", func() { p.Inverse(make([]complex64, 0), make([]complex64, 16)) }, "fft: length mismatch"},
		{"fallback dst", func() { q.Forward(make([]complex64, 11), make([]complex64, 10)) }, "fft: length mismatch"},
		{"BinFrequency k = n", func() { BinFrequency(8, 8, 1) }, "fft: "},
		{"BinFrequency k < 0", func() { BinFrequency(-1, 8, 1) }, "fft: "},
		{"BinFrequency n = 0", func() { BinFrequency(0, 0, 1) }, "fft: "},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			defer func() {
				r := recover()
				s, ok := r.(string)
				if !ok || !strings.HasPrefix(s, tc.want) {
					t.Errorf("panic %v, want one starting with %q", r, tc.want)
				}
			}()
			tc.f()
		})
	}
}

// TestBinFrequency checks the signed bin frequencies against the definition
// k·fs/n (k < n/2) and (k−n)·fs/n (k ≥ n/2), and against gonum's
// CmplxFFT.Freq (relative frequency, times fs) for every bin of even and odd n.
func TestBinFrequency(t *testing.T) {
	tests := []struct {
		k, n int
		fs   float64
		want float64
	}{
		{0, 1024, 2.048e6, 0},
		{1, 1024, 2.048e6, 2000},
		{511, 1024, 2.048e6, 1.022e6},
		{512, 1024, 2.048e6, -1.024e6},
		{1023, 1024, 2.048e6, -2000},
		{2, 5, 5, 2},  // odd n: (n−1)/2 is the last positive bin
		{3, 5, 5, -2}, // and the next is negative
		{0, 1, 10, 0},
	}
	for _, tc := range tests {
		if got := BinFrequency(tc.k, tc.n, tc.fs); math.Abs(got-tc.want) > 1e-12*tc.fs {
			t.Errorf("BinFrequency(%d, %d, %g) = %g, want %g", tc.k, tc.n, tc.fs, got, tc.want)
		}
	}
	for _, n := range []int{1, 2, 7, 8, 1000, 1024} {
		ref := fourier.NewCmplxFFT(n)
		const fs = 3e6
		for k := range n {
			if got, want := BinFrequency(k, n, fs), ref.Freq(k)*fs; math.Abs(got-want) > 1e-9 {
				t.Errorf("n=%d: BinFrequency(%d) = %g, gonum Freq·fs = %g", n, k, got, want)
			}
		}
	}
}

// TestVectorKernel checks that the vector radix-4 kernel gives the same
// values as the scalar one (it performs the same float32 operations in the
// same order, so the results agree exactly; == also equates −0 and +0,
// which the kernels may differ in for the k = 0 butterflies that the
// scalar kernel does without twiddles). The transforms themselves are
// checked against the direct DFT and gonum above, through whichever kernel
// this machine runs.
func TestVectorKernel(t *testing.T) {
	if !hasVector {
		t.Skip("no vector kernel on this machine (needs amd64 with AVX, without the purego tag)")
	}
	for lg := 2; lg <= 16; lg++ {
		n := 1 << lg
		x := randomSignal(n, uint64(lg))
		vp, sp := NewPlan(n), NewPlan(n)
		sp.vector = false
		if n >= 16 && !vp.vector {
			t.Fatalf("n=%d: plan does not use the vector kernel", n)
		}
		for _, inv := range []bool{false, true} {
			got := vp.transform(nil, x, inv)
			want := sp.transform(nil, x, inv)
			for k := range got {
				if got[k] != want[k] {
					t.Fatalf("n=%d inverse=%v bin %d: vector %v, scalar %v", n, inv, k, got[k], want[k])
				}
			}
		}
	}
}
