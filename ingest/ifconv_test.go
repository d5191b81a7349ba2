package ingest

import (
	"bytes"
	"errors"
	"io"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"strings"
	"testing"
)

// halfBandResponse is the filter's frequency response at f (cycles per
// input sample) from the taps as the Reader uses them (float32, gain 2):
// H(f) = h0 + 2·Σ g_i·cos(2π·f·(2i−1)) for the zero-phase symmetric FIR.
func halfBandResponse(taps []float32, f float64) float64 {
	h := float64(taps[0])
	for i, g := range taps[1:] {
		h += 2 * float64(g) * math.Cos(2*math.Pi*f*float64(2*i+1))
	}
	return h
}

// TestHalfBandResponse checks the conversion filter against its stated
// design (HalfBandTaps' doc): passband 0…0.2·fs within ±0.0015 dB of gain 2,
// stopband 0.3…0.5·fs at least 75 dB down, computed on a 4001-point grid
// per band from the float32 taps [C]; the half-band identity H(f) +
// H(fs/2 − f) = H(0) (REFERENCES §12.1: "H(f) + H(fs/2 − f) = 1" for unit
// gain) to 1e-6; and the noise gain Σh² (Parseval: ∫|H|²df) between 1.90
// and 2: a brick wall of gain 2 over half the band gives 2, the transition
// band of a half-band filter passes 1 + d on one side and 1 − d on the
// other, |H|² summing to less than 4 (1.920, −0.18 dB, with these taps).
func TestHalfBandResponse(t *testing.T) {
	taps := HalfBandTaps()
	if len(taps) != hbK+1 || taps[0] != 1 {
		t.Fatalf("taps %v: want %d with centre 1", taps, hbK+1)
	}
	var ripple, stop float64
	for j := 0; j <= 4000; j++ {
		fp := 0.2 * float64(j) / 4000
		ripple = max(ripple, math.Abs(20*math.Log10(halfBandResponse(taps, fp)/2)))
		fs := 0.3 + 0.2*float64(j)/4000
		stop = max(stop, math.Abs(halfBandResponse(taps, fs))/2)
		if d := halfBandResponse(taps, fp) + halfBandResponse(taps, 0.5-fp) - 2; math.Abs(d) > 1e-6 {
			t.Fatalf("H(%g) + H(0.5 − %g) − H(0) = %g, want 0 (half-band)", fp, fp, d)
		}
	}
	atten := -20 * math.Log10(stop)
	t.Logf("passband ripple ±%.5f dB, stopband %.1f dB", ripple, atten)
	if ripple > 0.0015 {
		t.Errorf("passband ripple ±%.5f dB, want ≤ 0.0015 dB", ripple)
	}
	if atten < 75 {
		t.Errorf("stopband attenuation %.1f dB, want ≥ 75 dB", atten)
	}
	e := float64(taps[0] * taps[0])
	for _, g := range taps[1:] {
		e += 2 * float64(g) * float64(g)
	}
	if e < 1.90 || e > 2 {
		t.Errorf("noise gain Σh² = %.5f, want within [1.90, 2]", e)
	}
}

// noiseGain is Σh² of the conversion filter.
func noiseGain() float64 {
	taps := HalfBandTaps()
	e := float64(taps[0] * taps[0])
	for _, g := range taps[1:] {
		e += 2 * float64(g) * float64(g)
	}
	return e
}

// referenceIF converts real samples to complex baseband straight from the
// definition of REFERENCES §12.1, in float64: z[m] = Σ_k h[k]·x[2m−k]·
// e^(−j2π·IF·(2m−k)/fs), zero-phase h over offsets −(2K−1)…2K−1, samples
// outside the file zero; conjugated for a high-side LO.
func referenceIF(x []float64, ifHz, fs float64, side LOSide) []complex128 {
	taps := HalfBandTaps()
	h := func(k int) float64 {
		if k < 0 {
			k = -k
		}
		switch {
		case k == 0:
			return float64(taps[0])
		case k%2 == 1 && (k+1)/2 <= hbK:
			return float64(taps[(k+1)/2])
		}
		return 0
	}
	out := make([]complex128, len(x)/2)
	for m := range out {
		var z complex128
		for k := -(2*hbK - 1); k <= 2*hbK-1; k++ {
			n := 2*m - k
			if n < 0 || n >= len(x) || h(k) == 0 {
				continue
			}
			z += complex(h(k)*x[n], 0) * cmplx.Exp(complex(0, -2*math.Pi*ifHz*float64(n)/fs))
		}
		if side == HighSide {
			z = cmplx.Conj(z)
		}
		out[m] = z
	}
	return out
}

// readAll streams a real capture through NewIFReader in blocks of bs and
// returns the samples.
func readAll(t *testing.T, f Format, raw []byte, n int64, bs int, fs float64, conv IFConversion) []complex64 {
	t.Helper()
	r, err := NewIFReader(bytes.NewReader(raw), "mem", f, bs, n, fs, conv)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	var out []complex64
	for {
		b, err := r.Next()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		if b.Start != int64(len(out)) {
			t.Fatalf("block starts at %d, want %d", b.Start, len(out))
		}
		out = append(out, b.Samples...)
	}
	return out
}

// TestIFReaderMatchesReference streams random real samples through the
// Reader with block sizes from 1 sample to more than the capture, for
// the multiplier-free fs/4 mixer and for an NCO (IF = 0.2417·fs), both LO
// sides and an odd number of file samples, and compares every output with
// referenceIF (the formula, in float64, on the same decoded values): equal
// to 2e-6 of full scale (float32 arithmetic over 25 taps [C]), whatever
// the block size, so the filter state carries across blocks exactly.
func TestIFReaderMatchesReference(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	const fs = 12e6
	for _, n := range []int64{2001, 1000, 2, 3} {
		vals := make([]float32, n)
		for i := range vals {
			vals[i] = float32(rng.NormFloat64() * 0.2)
		}
		raw := make([]byte, n*4)
		RF32LE.EncodeReal(raw, vals)
		x := make([]float64, n)
		for i, v := range vals {
			x[i] = float64(v)
		}
		for _, conv := range []IFConversion{{3e6, LowSide}, {3e6, HighSide}, {2.9e6, LowSide}, {3.31e6, HighSide}} {
			want := referenceIF(x, conv.IFHz, fs, conv.Side)
			for _, bs := range []int{1, 7, 64, 1000, 5000} {
				got := readAll(t, RF32LE, raw, n, bs, fs, conv)
				if len(got) != len(want) {
					t.Fatalf("n %d %+v block %d: %d samples, want %d", n, conv, bs, len(got), len(want))
				}
				worst := 0.0
				for m := range got {
					worst = max(worst, cmplx.Abs(complex128(got[m])-want[m]))
				}
				if worst > 2e-6 {
					t.Errorf("n %d IF %g %s block %d: largest difference from the formula %g", n, conv.IFHz, conv.Side, bs, worst)
				}
			}
		}
	}
}

// TestIFToneUpright puts a real tone at the RF centre + 700 kHz through the
// conversion (ri16_le at 12 MS/s; IF 3 MHz = fs/4 and an NCO IF of 2.9
// MHz; low-side LO: the tone at IF + 700 kHz; high-side: at IF − 700 kHz,
// REFERENCES §12.2) and checks that the complex stream, at 6 MS/s, holds
// it at +700 kHz with the tone's amplitude (gain 2 of the half-band: a real
// tone A·cos becomes A·e^{jωt}), the phase of the file sample 2m it is
// centred on (zero delay; conjugated for a high-side LO), and its mirror at
// −700 kHz at least 70 dB down (stopband ≥ 75 dB, less the ri16
// quantisation noise in one DFT bin) [C].
func TestIFToneUpright(t *testing.T) {
	const (
		fs    = 12e6
		off   = 700e3
		amp   = 0.5
		phase = 0.3
		n     = 16000
	)
	for _, conv := range []IFConversion{{3e6, LowSide}, {3e6, HighSide}, {2.9e6, LowSide}, {2.9e6, HighSide}} {
		tone := conv.IFHz + off
		ph := phase
		if conv.Side == HighSide {
			tone, ph = conv.IFHz-off, -phase
		}
		vals := make([]float32, n)
		for i := range vals {
			vals[i] = float32(amp * math.Cos(2*math.Pi*tone*float64(i)/fs+phase))
		}
		raw := make([]byte, 2*n)
		RI16LE.EncodeReal(raw, vals)
		z := readAll(t, RI16LE, raw, n, 1024, fs, conv)
		// One DFT bin of 6000 samples (1 kHz apart) away from the ends,
		// where the zero padding shortens the filter.
		const m0, count = 500, 6000
		var at, mirror complex128
		for m := m0; m < m0+count; m++ {
			w := 2 * math.Pi * off * float64(2*m) / fs
			at += complex128(z[m]) * cmplx.Exp(complex(0, -w))
			mirror += complex128(z[m]) * cmplx.Exp(complex(0, w))
		}
		at /= count
		mirror /= count
		if d := 20 * math.Log10(cmplx.Abs(at)/amp); math.Abs(d) > 0.01 {
			t.Errorf("%+v: tone at +700 kHz has amplitude %.5f, %.4f dB from %g", conv, cmplx.Abs(at), d, amp)
		}
		if d := math.Remainder(cmplx.Phase(at)-ph, 2*math.Pi); math.Abs(d) > 1e-3 {
			t.Errorf("%+v: tone phase %.5f rad, want %.5f (centred on file sample 2m)", conv, cmplx.Phase(at), ph)
		}
		if r := 20 * math.Log10(cmplx.Abs(mirror)/cmplx.Abs(at)); r > -70 {
			t.Errorf("%+v: mirror at −700 kHz only %.1f dB below the tone", conv, r)
		}
	}
}

// TestIFNoiseLevel checks the level convention of the half-band's doc:
// white real Gaussian noise of variance σ² becomes complex noise of mean
// |z|² = Σh²·σ² (filtering white noise, Parseval), 1.92·σ²: RMS σ per
// component less 0.18 dB. 10⁵ output samples give a relative standard
// deviation of the mean |z|² near 0.5 %; the tolerance is 2 % [C].
func TestIFNoiseLevel(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	const n, sigma = 200000, 0.1
	vals := make([]float32, n)
	for i := range vals {
		vals[i] = float32(rng.NormFloat64() * sigma)
	}
	raw := make([]byte, 4*n)
	RF32LE.EncodeReal(raw, vals)
	z := readAll(t, RF32LE, raw, n, 4096, 4e6, IFConversion{1e6, LowSide})
	var p float64
	for _, v := range z {
		p += float64(real(v))*float64(real(v)) + float64(imag(v))*float64(imag(v))
	}
	p /= float64(len(z))
	if want := noiseGain() * sigma * sigma; math.Abs(p/want-1) > 0.02 {
		t.Errorf("mean |z|² = %.6f, want Σh²·σ² = %.6f", p, want)
	}
}

// TestIFCheck checks the refusals of IFConversion.Check: each error names
// the setting to give.
func TestIFCheck(t *testing.T) {
	cases := []struct {
		conv IFConversion
		fs   float64
		want []string
	}{
		{IFConversion{0, LowSide}, 12e6, []string{"IF is not known", "--if", "if_hz", "quietband:if_hz"}},
		{IFConversion{3e6, LOSideUnknown}, 12e6, []string{"LO side is not known", "--lo-side", "lo_side", "quietband:lo_side"}},
		{IFConversion{-3e6, LowSide}, 12e6, []string{"positive"}},
		{IFConversion{math.NaN(), LowSide}, 12e6, []string{"positive"}},
		{IFConversion{1e6, LowSide}, 12e6, []string{"0.2–0.3", "mirror"}},
		{IFConversion{4e6, HighSide}, 12e6, []string{"0.2–0.3", "3e+06 Hz"}},
	}
	for _, tc := range cases {
		err := tc.conv.Check(tc.fs)
		if err == nil {
			t.Errorf("%+v at %g: accepted", tc.conv, tc.fs)
			continue
		}
		for _, w := range tc.want {
			if !strings.Contains(err.Error(), w) {
				t.Errorf("%+v: error %q does not mention %q", tc.conv, err, w)
			}
		}
	}
	for _, ok := range []IFConversion{{3e6, LowSide}, {2.4e6, HighSide}, {3.6e6, LowSide}} {
		if err := ok.Check(12e6); err != nil {
			t.Errorf("%+v: %v", ok, err)
		}
	}
	if s, err := ParseLOSide("high"); s != HighSide || err != nil || s.String() != "high" {
		t.Errorf("ParseLOSide(high) = %v, %v", s, err)
	}
	if _, err := ParseLOSide("upper"); err == nil || !strings.Contains(err.Error(), "low") {
		t.Errorf("ParseLOSide(upper): %v", err)
	}
}

// TestRealsOfLayout checks the memory layout realsOf relies on: a
// complex64 is its real part then its imaginary part.
func TestRealsOfLayout(t *testing.T) {
	p := []complex64{complex(1, 2), complex(3, 4)}
	r := realsOf(p)
	if len(r) != 4 || r[0] != 1 || r[1] != 2 || r[2] != 3 || r[3] != 4 {
		t.Fatalf("realsOf = %v, want [1 2 3 4]", r)
	}
	if realsOf(nil) != nil {
		t.Fatal("realsOf(nil) not nil")
	}
}

// BenchmarkIFConvert measures the conversion alone (filter and, for an IF
// other than fs/4, the mixer), per complex output sample, on 64 Ki
// outputs from decoded pairs.
func BenchmarkIFConvert(b *testing.B) {
	for _, tc := range []struct {
		name string
		conv IFConversion
	}{{"quarter", IFConversion{3e6, LowSide}}, {"nco", IFConversion{2.9e6, LowSide}}} {
		b.Run(tc.name, func(b *testing.B) {
			v := newIFConverter(tc.conv, 12e6, benchSamples)
			defer v.release()
			p := v.slot(benchSamples + hbK)
			copy(p, noise(13, len(p), 0.1))
			v.commit(len(p))
			dst := make([]complex64, benchSamples)
			b.ReportAllocs()
			for b.Loop() {
				if !v.quarter {
					v.mix(0, benchSamples+hbK) // the mixer runs once per pair read
				}
				v.output(dst, 0)
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/benchSamples, "ns/sample")
		})
	}
}

// BenchmarkReaderRealIF streams 16 MiB of ri8 (real, fs/4 IF, and an IF
// of 0.2417·fs through the NCO) and ri16_le through the Reader from
// memory, in blocks of 64 Ki complex samples (read, SHA-256, decode,
// convert), against the same bytes read as ci8 (complex: read,
// SHA-256, decode): both give 8 Mi complex samples, so the difference is
// the cost of the conversion as the pipeline sees it; ns/sample per
// complex sample.
func BenchmarkReaderRealIF(b *testing.B) {
	data := make([]byte, 16<<20)
	rand.NewChaCha8([32]byte{3}).Read(data)
	for _, tc := range []struct {
		f    Format
		name string
		conv IFConversion
	}{{CI8, "ci8", IFConversion{}}, {RI8, "ri8", IFConversion{3e6, LowSide}}, {RI16LE, "ri16_le", IFConversion{3e6, LowSide}},
		{RI8, "ri8-nco", IFConversion{2.9e6, LowSide}}} {
		f := tc.f
		b.Run(tc.name, func(b *testing.B) {
			raw := data
			if f == RI16LE {
				raw = data[:len(data)/2*2]
			}
			n := int64(len(raw) / f.SampleBytes())
			out := n
			if f.IsReal() {
				out = n / 2
			}
			b.SetBytes(int64(len(raw)))
			for b.Loop() {
				var r *Reader
				if f.IsReal() {
					r, _ = NewIFReader(bytes.NewReader(raw), "bench", f, benchSamples, n, 12e6, tc.conv)
				} else {
					r = NewReader(bytes.NewReader(raw), "bench", f, benchSamples, n)
				}
				for {
					if _, err := r.Next(); err != nil {
						break
					}
				}
				r.Close()
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(out), "ns/sample")
		})
	}
}

// TestVectorHalfBand checks that the AVX kernel of the fs/4 conversion
// gives exactly the samples of its Go twin, for random values (with exact
// zeros and both sign patterns), lengths with and without a scalar tail,
// and both LO sides.
func TestVectorHalfBand(t *testing.T) {
	if !useVectorHalfBand {
		t.Skip("no vector half-band kernel on this machine (needs amd64 with AVX, without the purego tag)")
	}
	rng := rand.New(rand.NewPCG(7, 7))
	for _, n := range []int{1, 7, 8, 9, 64, 1001, 65536} {
		even := make([]float32, n+2*hbK)
		odd := make([]float32, n+2*hbK)
		for i := range odd {
			even[i], odd[i] = float32(rng.NormFloat64()), float32(rng.NormFloat64())
			if rng.IntN(10) == 0 {
				odd[i] = 0
			}
		}
		for _, signs := range []*[2][8]float32{
			{{1, -1, 1, -1, 1, -1, 1, -1}, {-1, 1, -1, 1, -1, 1, -1, 1}},
			{{-1, 1, -1, 1, -1, 1, -1, 1}, {-1, 1, -1, 1, -1, 1, -1, 1}},
		} {
			var got [2][]complex64
			for k, vec := range []bool{false, true} {
				old := useVectorHalfBand
				useVectorHalfBand = vec
				got[k] = make([]complex64, n)
				halfBandQuarter(got[k], even, odd, hbK, signs)
				useVectorHalfBand = old
			}
			for i := range n {
				if got[0][i] != got[1][i] {
					t.Fatalf("n=%d output %d: %v (Go) vs %v (vector)", n, i, got[0][i], got[1][i])
				}
			}
		}
	}
}
