package detect

import (
	"fmt"
	"testing"

	"quietband/ingest/synth"
)

// TestPulsed: DME-like pairs and rectangular pulses of 2–50 µs every
// 100 µs – 5 ms at peak J/N ≥ 10 dB: width within 10 %, PRI within 1 %,
// pair spacing within 0.5 µs.
func TestPulsed(t *testing.T) {
	const fs = 10e6
	for _, tc := range []synth.Emitter{
		{Kind: synth.KindPulsed, Pulse: "gaussian_pair", JNDB: 10, PRIS: 370e-6, OffsetHz: 1e6},
		{Kind: synth.KindPulsed, Pulse: "gaussian_pair", JNDB: 20, PRIS: 1e-3, OffsetHz: -2e6},
		{Kind: synth.KindPulsed, Pulse: "rect", JNDB: 10, WidthS: 2e-6, PRIS: 100e-6},
		{Kind: synth.KindPulsed, Pulse: "rect", JNDB: 12, WidthS: 10e-6, PRIS: 1e-3, OffsetHz: 500e3},
		{Kind: synth.KindPulsed, Pulse: "rect", JNDB: 10, WidthS: 50e-6, PRIS: 5e-3, OffsetHz: -1.5e6},
	} {
		t.Run(fmt.Sprintf("%s-%gus-%gus", tc.Pulse, tc.WidthS*1e6, tc.PRIS*1e6), func(t *testing.T) {
			ev := only(t, detectOne(t, fs, "ci16_le", 0.25, 7, tc), ClassPulsed)
			p := ev.Params
			want := tc.WidthS
			if tc.Pulse == "gaussian_pair" {
				want = 3.5e-6 // ICAO Annex 10 DME pulse duration (half amplitude)
			}
			within(t, "pulse width", *p.PulseWidthS, want, 0.1*want)
			within(t, "PRI", *p.PRIS, tc.PRIS, 0.01*tc.PRIS)
			if tc.Pulse == "gaussian_pair" {
				if p.PairSpacingS == nil {
					t.Fatal("no pair spacing")
				}
				within(t, "pair spacing", *p.PairSpacingS, synth.DMEPairSpacing, 0.5e-6)
			}
			within(t, "peak J/N dB", ev.JNDB, tc.JNDB, 1)
		})
	}
}

// BenchmarkPulse runs the pulse detector on a 10 MS/s block with DME-like
// pulse pairs.
func BenchmarkPulse(b *testing.B) {
	benchDetector(b, &Pulse{}, benchBlock(b, 10e6, synth.Emitter{Kind: synth.KindPulsed, Pulse: "gaussian_pair", JNDB: 15, PRIS: 370e-6}))
}
