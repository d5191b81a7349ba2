// Package detect is quietband's DSP: a spectrum engine that makes one
// windowed FFT pass over each block of a capture, a bank of detectors that
// read that pass (and, when the spectral evidence calls for it, the block's
// samples), and a classifier that fuses their findings into events.
//
// Flow of one capture (Pipeline.Process):
//
//	ingest.Reader -> block of M·N samples -> Spectrum.Analyze (M FFTs of N,
//	  Hann window, non-overlapping) -> Features (per-bin S1, S2, mean PSD,
//	  per-frame powers) -> each Detector -> Findings -> classifier
//	  (per-block fusion, merging across blocks, hysteresis, edge refinement)
//	  -> Events and capture Stats.
//
// Each detector is one file with its formula and source in its doc
// comment, its test file and its benchmark:
//
//	kurtosis.go   SpectralKurtosis: generalized SK (Nita & Gary 2010b)
//	noisefloor.go NoiseFloor: total power, floor, AGC deviation, clipping,
//	              Gaussianity, wideband floor rise
//	cw.go         CW: tones with interpolated frequency and J/N
//	swept.go      Swept: chirp period, edges, rate, shape
//	pulse.go      Pulse: width, PRI, duty cycle, pairs, peak J/N
//	noiseband.go  NoiseBand: band-limited noise, centre and bandwidth
//
// PSD units: a bin's value is its share of the capture power, so that for
// white noise of variance σ² the bins sum to σ², and a tone of amplitude A
// sums to A² over its bins. dBFS is 10·log10 of power relative to full
// scale 1.0.
package detect
