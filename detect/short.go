package detect

import "fmt"

// Captures shorter than one block.
//
// A block is M frames of N samples (Config.Frames, Config.FFTSize): 64 ×
// 1024 samples, 16 ms, at 4 MS/s. A shorter capture (a recorder's 4 or
// 10 ms snapshot) would leave the bank with fewer frames than the
// spectral kurtosis and the bin statistics need (minFrames), and nothing
// but the pulse search would run. fitShort makes such a capture one block
// of its own: the frames it holds, up to M, and, when it holds fewer than
// minFrames frames of N, a frame length halved until it holds minFrames
// (down to 64 samples). The detectors' thresholds follow M and N (they
// are computed from the Config), so their false-alarm rates hold; the
// frequency resolution is coarser, and a baseline learned with frames of
// another length is not used (BaselineKey includes N). The capture
// record says what was done.

// minShortFFT is the shortest frame fitShort uses (Config.Validate's
// lower bound).
const minShortFFT = 64

// fitShort fits cfg to a capture of n complex samples and returns the
// note for its record: "" when the capture holds a block, else what the
// analysis was (or that there was none).
func fitShort(cfg *Config, n int64) string {
	block := int64(cfg.FFTSize) * int64(cfg.Frames)
	if n >= block {
		return ""
	}
	if n < int64(minFrames*minShortFFT) {
		return fmt.Sprintf("no spectral analysis: the capture's %d samples are fewer than the %d of the shortest block (%d frames of %d)",
			n, minFrames*minShortFFT, minFrames, minShortFFT)
	}
	N := cfg.FFTSize
	for N > minShortFFT && n < int64(minFrames*N) {
		N /= 2
	}
	M := int(min(n/int64(N), int64(cfg.Frames)))
	note := fmt.Sprintf("the capture (%d samples) is shorter than one block (%d): analysed as one block of %d frames of %d samples", n, block, M, N)
	if N != cfg.FFTSize {
		note += fmt.Sprintf("; the site baseline (frames of %d) is not used", cfg.FFTSize)
	}
	cfg.FFTSize, cfg.Frames = N, M
	return note
}
