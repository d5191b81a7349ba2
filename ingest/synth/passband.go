package synth

import (
	"fmt"
	"math"
	"math/cmplx"

	"gonum.org/v1/gonum/dsp/fourier"
)

// desiredDB is the passband's designed gain in dB at u = f/fs in [−½, ½]
// before the 0 Hz normalisation (see Passband).
func (p *Passband) desiredDB(u float64) float64 {
	g := p.TiltDB * u
	if p.RippleDB != 0 {
		g += p.RippleDB * math.Sin(2*math.Pi*p.RippleCycles*(u+0.5)+p.RipplePhaseDeg*math.Pi/180)
	}
	return g + 20*math.Log10(p.rolloff(u))
}

// rolloff is the raised-cosine edge R(u) of Passband: 1 in the flat part,
// falling as a + (1 − a)·(1 + cos(π·x))/2 to a = 10^(−rolloff_db/20) at
// the band edge, x going from 0 where the roll-off starts to 1 at |u| = ½.
func (p *Passband) rolloff(u float64) float64 {
	r := p.RolloffFraction
	u1 := (1 - r) / 2
	if r == 0 || math.Abs(u) <= u1 {
		return 1
	}
	a := math.Pow(10, -p.RolloffDB/20)
	x := min(1, (math.Abs(u)-u1)/(0.5-u1))
	return a + (1-a)*(1+math.Cos(math.Pi*x))/2
}

// Desired is the designed amplitude response |H| at offset f (Hz) of a
// capture at rate fs, normalised to 1 at 0 Hz: 10^((G(f/fs) − G(0))/20).
func (p *Passband) Desired(f, fs float64) float64 {
	return math.Pow(10, (p.desiredDB(f/fs)-p.desiredDB(0))/20)
}

// kaiserBeta is the Kaiser window's β for the passband FIR. β = 6 keeps
// the window's main lobe about 2·√(1 + (β/π)²)·2/L ≈ 8.6/L of the band
// wide, which is what smooths the designed response: features wider than
// ~16/L (the limit Passband checks for the ripple) come out within a few
// hundredths of a dB (TestPassbandDesign).
const kaiserBeta = 6.0

// passbandFIR is a designed passband: L = 2D + 1 complex taps, linear
// phase (h[D+m] = conj(h[D−m]), so H(f) = e^{−j2πfD/fs}·A(f) with A real)
// and A(0) = 1.
type passbandFIR struct {
	taps  []complex128
	delay int // D, samples
	grid  int // frequency-sampling grid points
}

// designPassband designs p's FIR by frequency sampling and a window: the
// desired amplitude A_d(u) (Passband.Desired, zero phase) is sampled on
// N = 16·L (rounded up to a power of two) frequencies, an inverse DFT
// gives the zero-phase impulse response (Hermitian, since A_d is real),
// whose L central taps are weighted by a Kaiser window (β = kaiserBeta;
// Kaiser 1974, the usual window-method design, e.g. Oppenheim & Schafer
// §7.5 [M]) and delayed by D = (L−1)/2 to make them causal. The taps are
// then scaled so that the realised A(0) is exactly 1 (0 dB at 0 Hz).
func designPassband(p *Passband) *passbandFIR {
	l := p.Taps
	if l == 0 {
		l = defaultTaps
	}
	d := (l - 1) / 2
	n := 1
	for n < 16*l {
		n *= 2
	}
	spec := make([]complex128, n)
	for k := range spec {
		u := float64(k) / float64(n)
		if k >= n/2 {
			u -= 1
		}
		spec[k] = complex(math.Pow(10, (p.desiredDB(u)-p.desiredDB(0))/20), 0)
	}
	h0 := fourier.NewCmplxFFT(n).Sequence(nil, spec) // Σ_k A_k e^{+j2πkm/n}
	taps := make([]complex128, l)
	w0 := besselI0(kaiserBeta)
	var sum complex128
	for j := range taps {
		m := j - d
		x := float64(m) / float64(d)
		w := besselI0(kaiserBeta*math.Sqrt(max(0, 1-x*x))) / w0
		taps[j] = h0[(m+n)%n] / complex(float64(n), 0) * complex(w, 0)
		sum += taps[j]
	}
	// A(0) = Σ h: real for Hermitian taps.
	g := real(sum)
	for j := range taps {
		taps[j] /= complex(g, 0)
	}
	return &passbandFIR{taps: taps, delay: d, grid: n}
}

// besselI0 is the modified Bessel function of the first kind, order 0, by
// its power series Σ ((x/2)^k / k!)² (Abramowitz & Stegun 9.6.12), to
// float64 precision for the arguments of a Kaiser window.
func besselI0(x float64) float64 {
	sum, term := 1.0, 1.0
	for k := 1; k < 200; k++ {
		term *= (x / 2) / float64(k)
		t2 := term * term
		sum += t2
		if t2 < 1e-17*sum {
			break
		}
	}
	return sum
}

// describe says how the FIR was designed, for the truth.
func (f *passbandFIR) describe() string {
	return fmt.Sprintf("linear-phase FIR, %d taps (delay %d samples, compensated), frequency sampling of the designed response on %d points, Kaiser window β = %g, overlap-save", len(f.taps), f.delay, f.grid, kaiserBeta)
}

// amplitude is the realised zero-phase response A(u) at u = f/fs:
// Σ_m h[D+m]·e^{−j2πum}, real up to rounding.
func (f *passbandFIR) amplitude(u float64) float64 {
	var acc complex128
	for j, h := range f.taps {
		acc += h * cmplx.Rect(1, -2*math.Pi*u*float64(j-f.delay))
	}
	return real(acc)
}

// powerGain is Σ|h|², the FIR's gain for white noise (Parseval: the mean
// of |H|² over the band).
func (f *passbandFIR) powerGain() float64 {
	var s float64
	for _, h := range f.taps {
		s += real(h)*real(h) + imag(h)*imag(h)
	}
	return s
}

// firFilter applies a FIR to a stream by overlap-save (Oppenheim &
// Schafer §8.7.3 [M]): blocks of nfft samples, the last L−1 of which
// overlap the previous block, multiplied in the frequency domain; the
// first L−1 outputs of each block (circular wrap) are discarded. It is
// causal, y[i] = Σ_k h[k]·x[i−k] with x = 0 before the first sample, and
// carries its L−1 samples of history across calls.
type firFilter struct {
	plan      *fourier.CmplxFFT
	hf        []complex128 // FFT of the taps, divided by nfft
	l, hop    int
	hist      []complex128
	buf, spec []complex128
}

func newFIRFilter(taps []complex128) *firFilter {
	l := len(taps)
	nfft := 4096
	for nfft < 8*l {
		nfft *= 2
	}
	f := &firFilter{plan: fourier.NewCmplxFFT(nfft), l: l, hop: nfft - (l - 1),
		hist: make([]complex128, l-1), buf: make([]complex128, nfft), spec: make([]complex128, nfft)}
	h := make([]complex128, nfft)
	copy(h, taps)
	f.hf = f.plan.Coefficients(nil, h)
	for i := range f.hf {
		f.hf[i] /= complex(float64(nfft), 0)
	}
	return f
}

// filter writes the next len(x) outputs into y (y may be x).
func (f *firFilter) filter(y, x []complex64) {
	for off := 0; off < len(x); off += f.hop {
		c := min(f.hop, len(x)-off)
		copy(f.buf, f.hist)
		for i := 0; i < c; i++ {
			f.buf[f.l-1+i] = complex128(x[off+i])
		}
		clear(f.buf[f.l-1+c:])
		copy(f.hist, f.buf[c:c+f.l-1])
		f.plan.Coefficients(f.spec, f.buf)
		for i := range f.spec {
			f.spec[i] *= f.hf[i]
		}
		f.plan.Sequence(f.buf, f.spec)
		for i := 0; i < c; i++ {
			y[off+i] = complex64(f.buf[f.l-1+i])
		}
	}
}
