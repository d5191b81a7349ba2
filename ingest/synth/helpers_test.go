package synth

import (
	"io"
	"math"
	"math/cmplx"
	"path/filepath"
	"sort"
	"testing"
	"time"

	"gonum.org/v1/gonum/dsp/fourier"

	"quietband/ingest"
)

// Helpers shared by the tests. Every measurement starts from the bytes on
// disk: a capture is opened with ingest.Open and streamed with its Reader
// (which also checks the length and, for SigMF, the core:sha512).

// testStart is the start time used by the test scenarios.
var testStart = time.Date(2026, 5, 1, 12, 0, 0, 0, time.UTC)

// oneCapture returns a scenario with a single capture.
func oneCapture(format string, fs, noiseDBFS, dur float64, seed uint64, c Capture) Scenario {
	c.DurationS = dur
	if c.Name == "" {
		c.Name = "cap"
	}
	return Scenario{Name: "test", Site: "bench", Format: format, SampleRate: fs,
		NoiseDBFS: noiseDBFS, Start: testStart, Seed: seed, Captures: []Capture{c}}
}

// writeScenario writes s into a fresh temporary folder.
func writeScenario(t testing.TB, s Scenario) (string, []Truth) {
	t.Helper()
	dir := t.TempDir()
	truths, err := Write(&s, dir)
	if err != nil {
		t.Fatalf("Write: %v", err)
	}
	if len(truths) != len(s.Captures) {
		t.Fatalf("Write returned %d truths for %d captures", len(truths), len(s.Captures))
	}
	return dir, truths
}

// readCapture opens the capture described by tr in dir and reads all of its
// samples back.
func readCapture(t testing.TB, dir string, tr Truth) []complex64 {
	t.Helper()
	path := filepath.Join(dir, tr.Capture)
	c, err := ingest.Open(path, ingest.RawSettings{SampleRate: tr.SampleRate})
	if err != nil {
		t.Fatalf("Open: %v", err)
	}
	if c.Samples != tr.Samples {
		t.Fatalf("%s holds %d samples, truth says %d", path, c.Samples, tr.Samples)
	}
	if c.SampleRate != tr.SampleRate {
		t.Fatalf("%s: sample rate %g, truth %g", path, c.SampleRate, tr.SampleRate)
	}
	r, err := c.NewReader(1 << 15)
	if err != nil {
		t.Fatalf("NewReader: %v", err)
	}
	defer r.Close()
	out := make([]complex64, 0, c.Samples)
	for {
		b, err := r.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatalf("read %s: %v", path, err)
		}
		out = append(out, b.Samples...)
	}
	return out
}

// writeAndRead writes a one-capture scenario and reads the capture back.
func writeAndRead(t testing.TB, s Scenario) (Truth, []complex64) {
	t.Helper()
	dir, truths := writeScenario(t, s)
	return truths[0], readCapture(t, dir, truths[0])
}

func db(x float64) float64   { return 10 * math.Log10(x) }
func undb(x float64) float64 { return math.Pow(10, x/10) }
func abs2(v complex64) float64 {
	return float64(real(v))*float64(real(v)) + float64(imag(v))*float64(imag(v))
}

// meanPower is mean |x|² over x.
func meanPower(x []complex64) float64 {
	var s float64
	for _, v := range x {
		s += abs2(v)
	}
	return s / float64(len(x))
}

// kurtosisRatio is E|x|⁴ / (E|x|²)²: 2 for circular complex Gaussian data,
// 1 for a constant envelope (REFERENCES §9 [C]).
func kurtosisRatio(x []complex64) float64 {
	var s2, s4 float64
	for _, v := range x {
		p := abs2(v)
		s2 += p
		s4 += p * p
	}
	n := float64(len(x))
	return (s4 / n) / ((s2 / n) * (s2 / n))
}

// toneCorrelation is (1/M) Σ x[n] e^{−j2π f n/fs} over n in [lo, hi), with
// the sample index n counted from the start of the capture.
func toneCorrelation(x []complex64, lo, hi int, f, fs float64) complex128 {
	var acc complex128
	const reanchor = 4096
	var rot, p complex128
	for n := lo; n < hi; n++ {
		if (n-lo)%reanchor == 0 {
			// Exact phase at n, then a rotation for the next samples.
			_, frac := math.Modf(f / fs * float64(n))
			p = cmplx.Rect(1, -2*math.Pi*frac)
			rot = cmplx.Rect(1, -2*math.Pi*f/fs)
		}
		acc += complex128(x[n]) * p
		p *= rot
	}
	return acc / complex(float64(hi-lo), 0)
}

// fftFreq is the frequency of bin k of an n-point DFT at rate fs, in
// (−fs/2, fs/2].
func fftFreq(k, n int, fs float64) float64 {
	if k > n/2 {
		k -= n
	}
	return float64(k) * fs / float64(n)
}

// welch is the averaged periodogram of x (Welch 1967): segments of n
// samples with a Hann window and 50 % overlap, scaled to a power spectral
// density (power per Hz, so that Σ psd·fs/n is the mean power). Bins are in
// FFT order (use fftFreq).
func welch(x []complex64, n int, fs float64) []float64 {
	plan := fourier.NewCmplxFFT(n)
	win := make([]float64, n)
	var w2 float64
	for i := range win {
		win[i] = 0.5 - 0.5*math.Cos(2*math.Pi*float64(i)/float64(n))
		w2 += win[i] * win[i]
	}
	seg := make([]complex128, n)
	coef := make([]complex128, n)
	psd := make([]float64, n)
	segs := 0
	for s := 0; s+n <= len(x); s += n / 2 {
		for i := range seg {
			seg[i] = complex128(x[s+i]) * complex(win[i], 0)
		}
		plan.Coefficients(coef, seg)
		for i, c := range coef {
			psd[i] += real(c)*real(c) + imag(c)*imag(c)
		}
		segs++
	}
	for i := range psd {
		psd[i] /= float64(segs) * w2 * fs
	}
	return psd
}

// median returns the median of v (v is not modified).
func median(v []float64) float64 {
	s := append([]float64(nil), v...)
	sort.Float64s(s)
	if len(s)%2 == 1 {
		return s[len(s)/2]
	}
	return (s[len(s)/2-1] + s[len(s)/2]) / 2
}

// meanStd returns the mean and the sample standard deviation of v.
func meanStd(v []float64) (mean, std float64) {
	for _, x := range v {
		mean += x
	}
	mean /= float64(len(v))
	for _, x := range v {
		std += (x - mean) * (x - mean)
	}
	return mean, math.Sqrt(std / float64(len(v)-1))
}
