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

// TestPulseCountAcrossBlocks: a train of 10 or 20 µs rectangular pulses
// every 100 µs for 0.25 s holds 2499 or 2500 pulses (the first starts
// within the first PRI; the count is ⌊(D − t₀)/PRI⌋ + 1, common practice
// arithmetic), and a pulse that a block boundary cuts in two (one boundary
// in ten or in five here) must be counted once, not once in each block.
// Such long pulses at a 10 kHz rate have strong sinc² sidelobes, whose
// lines and humps must not be reported as CW or narrowband noise: only
// the pulsed event may appear.
func TestPulseCountAcrossBlocks(t *testing.T) {
	const fs, dur, pri = 10e6, 0.25, 100e-6
	for _, tc := range []struct {
		width, jn float64
	}{{10e-6, 12}, {20e-6, 15}} {
		t.Run(fmt.Sprintf("%gus-%gdB", tc.width*1e6, tc.jn), func(t *testing.T) {
			e := synth.Emitter{Kind: synth.KindPulsed, Pulse: "rect", JNDB: tc.jn, WidthS: tc.width, PRIS: pri}
			ev := only(t, detectOne(t, fs, "ci16_le", dur, 11, e), ClassPulsed)
			if ev.Params.Pulses == nil {
				t.Fatal("no pulse count")
			}
			if n := *ev.Params.Pulses; n < 2499 || n > 2500 {
				t.Errorf("pulses = %d, want 2499 or 2500", n)
			}
		})
	}
}

// TestPulseReachLeavesOthers: the sidelobe claim of a strong rectangular
// pulse train reaches as far as its spectrum stands above the floor, not
// across the band: a CW and a noise band 3 MHz away are still reported.
func TestPulseReachLeavesOthers(t *testing.T) {
	const fs = 10e6
	evs := detectOne(t, fs, "ci16_le", 0.25, 5,
		synth.Emitter{Kind: synth.KindPulsed, Pulse: "rect", JNDB: 12, WidthS: 10e-6, PRIS: 100e-6},
		synth.Emitter{Kind: synth.KindCW, JNDB: -10, OffsetHz: -3e6},
		synth.Emitter{Kind: synth.KindNarrowbandNoise, JNDB: -5, OffsetHz: 3e6, BandwidthHz: 200e3})
	for _, class := range []string{ClassPulsed, ClassCW, ClassNarrowbandNoise} {
		if n := count(evs, class); n != 1 {
			t.Errorf("%d %s events, want 1 (events: %v)", n, class, classes(evs))
			for _, e := range evs {
				t.Logf("%s %.0f Hz %d+%d", e.Class, e.OffsetHz, e.SampleStart, e.SampleCount)
			}
		}
	}
}

func count(evs []Event, class string) int {
	n := 0
	for _, e := range evs {
		if e.Class == class {
			n++
		}
	}
	return n
}
