package detect

import (
	"fmt"
	"testing"

	"quietband/ingest/synth"
)

// TestNoiseBands: band-limited noise at J/N ≥ 0 dB with bandwidth within
// 15 % and centre within 5 % of the bandwidth.
func TestNoiseBands(t *testing.T) {
	const fs = 4e6
	for _, tc := range []struct{ off, bw, jn float64 }{
		{800e3, 200e3, 0}, {-1.2e6, 500e3, 3}, {300e3, 1e6, 0}, {-500e3, 60e3, 6},
	} {
		t.Run(fmt.Sprintf("band-%gkHz-%gkHz-%gdB", tc.off/1e3, tc.bw/1e3, tc.jn), func(t *testing.T) {
			ev := only(t, detectOne(t, fs, "ci16_le", 0.1, 9, synth.Emitter{Kind: synth.KindNarrowbandNoise,
				OffsetHz: tc.off, BandwidthHz: tc.bw, JNDB: tc.jn}), ClassNarrowbandNoise)
			within(t, "bandwidth", ev.BandwidthHz, tc.bw, 0.15*tc.bw)
			within(t, "centre", ev.OffsetHz, tc.off, 0.05*tc.bw)
			within(t, "J/N dB", ev.JNDB, tc.jn, 1)
		})
	}
}

// BenchmarkNoiseBand runs the noise-band detector on a 10 MS/s block with
// band-limited noise.
func BenchmarkNoiseBand(b *testing.B) {
	benchDetector(b, NoiseBand{}, benchBlock(b, 10e6, synth.Emitter{Kind: synth.KindNarrowbandNoise, OffsetHz: 1e6, BandwidthHz: 500e3, JNDB: 3}))
}
