package detect

import (
	"math"

	"quietband/detect/fft"
)

// Spectrum is the spectrum engine: it makes the one FFT pass over a block
// that every spectral detector reads. Frames of N samples, non-overlapping
// (overlap would correlate the SK accumulations and change their variance,
// Nita & Gary 2010b), each multiplied by a periodic Hann window
// w[n] = sin²(πn/N) and transformed.
//
// For bin k of frame i, the normalized power is
//
//	P_i(k) = |Σ_n w[n]·x[n]·e^{−j2πkn/N}|² / (N·Σ_n w[n]²),
//
// so that white noise of variance σ² gives E[Σ_k P_i(k)] = σ² and a tone of
// amplitude A gives Σ_k P_i(k) = A². A Hann-windowed bin of complex
// Gaussian noise is still complex Gaussian, so P_i(k) stays exponential
// (SK shape factor d = 1).
//
// A Spectrum is not safe for concurrent use; make one per goroutine.
type Spectrum struct {
	n      int
	fs     float64
	win    []float32
	norm   float32
	plan   *fft.Plan
	buf    []complex64
	feat   Features
	frames int
}

// Features is what the engine extracts from one block. Bins are in
// centred order: index i is the frequency offset (i − N/2)·fs/N.
type Features struct {
	Start   int64 // first sample of the block in the capture
	Samples int   // block length
	Frames  int   // complete frames in the block (M)
	N       int   // FFT size
	Fs      float64

	S1, S2 []float64 // Σ P_i(k) and Σ P_i(k)² over the frames
	PSD    []float64 // S1/M: mean power per bin
	// FramePSD is the M×N matrix of P_i(k), frame-major.
	FramePSD []float32
	// FramePower is the total power of each frame, Σ_k P_i(k).
	FramePower []float64

	Power   float64 // mean |x|² over the block
	Moment4 float64 // mean |x|⁴ over the block
	Clipped int
}

// NewSpectrum makes an engine for frames of n samples (a power of two) at
// sample rate fs, for blocks of up to frames frames.
func NewSpectrum(n, frames int, fs float64) *Spectrum {
	s := &Spectrum{n: n, fs: fs, plan: fft.NewPlan(n), buf: make([]complex64, n),
		win: make([]float32, n), frames: frames}
	var sum2 float64
	for i := range s.win {
		v := math.Sin(math.Pi * float64(i) / float64(n))
		s.win[i] = float32(v * v)
		sum2 += float64(s.win[i]) * float64(s.win[i])
	}
	s.norm = float32(1 / (float64(n) * sum2))
	f := &s.feat
	f.N, f.Fs = n, fs
	f.S1, f.S2, f.PSD = make([]float64, n), make([]float64, n), make([]float64, n)
	f.FramePSD = make([]float32, frames*n)
	f.FramePower = make([]float64, frames)
	return s
}

// BinHz is the bin spacing fs/N.
func (s *Spectrum) BinHz() float64 { return s.fs / float64(s.n) }

// Analyze makes the FFT pass over one block and returns its features. The
// result is owned by the engine and valid until the next call. It does not
// allocate.
func (s *Spectrum) Analyze(start int64, samples []complex64, clipped int) *Features {
	f := &s.feat
	n := s.n
	m := min(len(samples)/n, s.frames)
	f.Start, f.Samples, f.Frames, f.Clipped = start, len(samples), m, clipped
	clear(f.S1)
	clear(f.S2)
	half := n / 2
	// The moments are summed in four interleaved partial sums (sample j
	// into sum j mod 4), added up at the end: four independent chains of
	// additions instead of one, whose latency bounded the loop.
	var p2, p4 [4]float64
	for i := 0; i < m; i++ {
		frame := samples[i*n : (i+1)*n]
		buf := s.buf[:len(frame)]
		win := s.win[:len(frame)]
		// Window, and the sample moments for the Gaussianity statistic, in
		// one pass over the frame (n is a multiple of 4).
		for j := 0; j+4 <= len(frame); j += 4 {
			v := frame[j : j+4 : j+4]
			w := win[j : j+4 : j+4]
			b := buf[j : j+4 : j+4]
			for l := range 4 {
				re, im := real(v[l]), imag(v[l])
				pw := float64(re*re + im*im)
				p2[l] += pw
				p4[l] += pw * pw
				b[l] = complex(re*w[l], im*w[l])
			}
		}
		s.plan.Forward(s.buf, s.buf)
		row := f.FramePSD[i*n : (i+1)*n]
		// Centred order: FFT bin k goes to index (k + N/2) mod N, so the
		// upper half of the FFT output fills the lower half of the row.
		tot := s.accumulate(row[half:], f.S1[half:], f.S2[half:], s.buf[:half])
		tot += s.accumulate(row[:half], f.S1[:half], f.S2[:half], s.buf[half:])
		f.FramePower[i] = tot
	}
	if m > 0 {
		inv := 1 / float64(m)
		for k := range f.PSD {
			f.PSD[k] = f.S1[k] * inv
		}
	} else {
		clear(f.PSD)
	}
	// Samples past the last whole frame count in the moments too.
	for j, v := range samples[m*n:] {
		re, im := real(v), imag(v)
		pw := float64(re*re + im*im)
		p2[j&3] += pw
		p4[j&3] += pw * pw
	}
	if len(samples) > 0 {
		f.Power = ((p2[0] + p2[1]) + (p2[2] + p2[3])) / float64(len(samples))
		f.Moment4 = ((p4[0] + p4[1]) + (p4[2] + p4[3])) / float64(len(samples))
	}
	return f
}

// accumulate writes the normalized powers of spectrum x into row and adds
// them and their squares to s1 and s2; it returns their sum.
func (s *Spectrum) accumulate(row []float32, s1, s2 []float64, x []complex64) float64 {
	row = row[:len(x)]
	s1 = s1[:len(x)]
	s2 = s2[:len(x)]
	norm := s.norm
	// Four interleaved partial sums of the total, as in Analyze.
	var tot [4]float64
	for k := 0; k+4 <= len(x); k += 4 {
		v := x[k : k+4 : k+4]
		r := row[k : k+4 : k+4]
		a := s1[k : k+4 : k+4]
		b := s2[k : k+4 : k+4]
		for l := range 4 {
			p := (real(v[l])*real(v[l]) + imag(v[l])*imag(v[l])) * norm
			r[l] = p
			pf := float64(p)
			a[l] += pf
			b[l] += pf * pf
			tot[l] += pf
		}
	}
	return (tot[0] + tot[1]) + (tot[2] + tot[3])
}

// Offset is the frequency offset of centred bin index i.
func (f *Features) Offset(i int) float64 { return float64(i-f.N/2) * f.Fs / float64(f.N) }

// Bin is the centred bin index nearest to offset hz, clamped to the band.
func (f *Features) Bin(hz float64) int {
	i := int(math.Round(hz*float64(f.N)/f.Fs)) + f.N/2
	return min(max(i, 0), f.N-1)
}

// Frame returns the normalized powers of frame i.
func (f *Features) Frame(i int) []float32 { return f.FramePSD[i*f.N : (i+1)*f.N] }
