package detect

import (
	"fmt"
	"testing"

	"quietband/ingest/synth"
)

// TestWidebandRise: a wideband floor rise ≥ 1 dB is detected with an
// error ≤ 0.3 dB (the synthesizer adds white noise of 10^(R/10) − 1 times
// the thermal power, the AGC relation of Bastide et al. 2003).
func TestWidebandRise(t *testing.T) {
	const fs = 4e6
	for _, rise := range []float64{1, 3, 10} {
		t.Run(fmt.Sprintf("wideband-%gdB", rise), func(t *testing.T) {
			ev := only(t, detectOne(t, fs, "ci16_le", 0.1, 8, synth.Emitter{Kind: synth.KindWidebandNoise, FloorRiseDB: rise}), ClassWidebandNoise)
			within(t, "floor rise", *ev.Params.FloorRiseDB, rise, 0.3)
		})
	}
}

// BenchmarkNoiseFloor runs the floor-rise test on a 10 MS/s block with a
// wideband rise.
func BenchmarkNoiseFloor(b *testing.B) {
	benchDetector(b, NoiseFloor{}, benchBlock(b, 10e6, synth.Emitter{Kind: synth.KindWidebandNoise, FloorRiseDB: 3}))
}
