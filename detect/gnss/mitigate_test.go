package gnss

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"quietband/ingest/gpsca"
)

// TestMitigateBlock: under interference strong enough for the Meter to
// track on mitigated blocks (≥ 90 % of the snapshot's power excised or
// 1 % of it blanked), tracking blocks mitigated with the snapshot's
// decisions (Mitigator.MitigateBlock) measure what blocks mitigated
// each on its own (Mitigator.Mitigate) measure: the same satellites, and
// C/N0 within 0.3 dB of each other where the interferer looks the same
// in every block (the moment estimates of 190 prompts scatter by
// 0.45–0.85 dB, TestTrackCN0Accuracy, so 0.3 dB is a change of method
// well inside the measurement's own spread). A slow sweep (1 ms) and a
// 20 MHz sweep make a block on its own re-decide the stages from block
// to block; there only the satellites are compared. Where excision takes
// a negligible part of the C/A spectrum (a CW: 5 bins of 4096; pulses:
// 5 % of the time blanked, −0.2 dB), the C/N0 is within 1.5 dB below to
// 0.85 dB above the synthesizer's (the estimator's scatter, and the
// loss). 0.25 s captures at 4 MS/s, four satellites at 42–50 dB-Hz, one
// interferer of the bank per case; no PRN outside the sky.
func TestMitigateBlock(t *testing.T) {
	const fs = 4e6
	cases := []struct {
		name   string
		jn     float64
		stable bool // the snapshot's decisions hold in every block
		narrow bool // excision takes a negligible part of the signal
	}{
		{"cw", 30, true, true}, {"tones", 30, true, false}, {"sweep-inband-15us", 20, true, false},
		{"sweep-inband-8us", 30, true, false}, {"sweep-slow-1ms", 20, false, false}, {"band-200kHz", 20, true, false},
		{"band-1MHz", 20, true, false}, {"dme-pairs", 30, true, true}, {"rect-10us-5pct", 30, true, true},
		{"sweep-20MHz-10us", 20, false, false},
	}
	all := append(slices.Clone(bank), fastSweeps...)
	rng := rand.New(rand.NewPCG(1410, 1))
	for _, tc := range cases {
		t.Run(fmt.Sprintf("%s/%gdB", tc.name, tc.jn), func(t *testing.T) {
			in := all[slices.IndexFunc(all, func(b interferer) bool { return b.name == tc.name })]
			sats := skyWithClock(rng, []float64{42, 45, 48, 50}, 0)
			c := synthesize(rng, fs, gpsca.L1, 1, int(0.25*fs), sats)
			in.add(rng, c.x, fs, 1, tc.jn)
			var got [2]Measurement
			for i, full := range []bool{false, true} {
				m := NewMeter(MeterConfig{Acq: AcqConfig{Pfa: pipelinePfa}})
				m.fullBlocks = full
				got[i] = measure(t, m, fs, c.x, 65536)
				if !m.mitTrack {
					t.Fatalf("not tracked on mitigated blocks (mitigation %+v)", got[i].Mitigation)
				}
			}
			blk, ref := got[0], got[1]
			if len(blk.Satellites) != len(ref.Satellites) {
				t.Errorf("%d satellites with the snapshot's decisions, %d with every block's own", len(blk.Satellites), len(ref.Satellites))
			}
			for _, s := range blk.Satellites {
				i := slices.IndexFunc(ref.Satellites, func(r Measured) bool { return r.PRN == s.PRN })
				j := slices.IndexFunc(sats, func(r satSpec) bool { return r.prn == s.PRN })
				if i < 0 || j < 0 {
					t.Errorf("PRN %d: not measured by the reference (%v) or not in the sky (%v)", s.PRN, i >= 0, j >= 0)
					continue
				}
				d, e := s.CN0dBHz-ref.Satellites[i].CN0dBHz, s.CN0dBHz-sats[j].cn0
				if tc.stable && math.Abs(d) > 0.3 || tc.narrow && (e < -1.5 || e > 0.85) {
					t.Errorf("PRN %d: C/N0 %.2f dB-Hz, %+.2f dB against every block's own mitigation, %+.2f dB against the truth", s.PRN, s.CN0dBHz, d, e)
				}
				t.Logf("PRN %2d truth %.0f: %.2f dB-Hz (%+.2f against every block's own, %+.2f against the truth)", s.PRN, sats[j].cn0, s.CN0dBHz, d, e)
			}
		})
	}
}
