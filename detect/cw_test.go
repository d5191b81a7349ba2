package detect

import (
	"testing"

	"quietband/ingest/synth"
)

// TestCW: tones detected down to J/N −15 dB in 0.25 s at 10 MS/s, frequency
// within 0.1 bin, J/N within 1 dB, three simultaneous tones resolved.
func TestCW(t *testing.T) {
	const fs = 10e6
	bin := fs / float64(DefaultFFTSize(fs))
	for _, tc := range []struct {
		name  string
		tones []synth.Tone
	}{
		{"one tone at -15 dB", []synth.Tone{{OffsetHz: 1234567.8, JNDB: -15}}},
		{"one tone at 0 dB", []synth.Tone{{OffsetHz: -2718281.8, JNDB: 0}}},
		{"one tone at +20 dB", []synth.Tone{{OffsetHz: 400321, JNDB: 20}}},
		{"three tones", []synth.Tone{{OffsetHz: -3e6 + 1777, JNDB: -10}, {OffsetHz: 250e3 + 913, JNDB: 0}, {OffsetHz: 3.3e6 - 421, JNDB: 10}}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			ev := only(t, detectOne(t, fs, "ci16_le", 0.25, 5, synth.Emitter{Kind: synth.KindCW, Tones: tc.tones}), ClassCW)
			if len(ev.Params.Tones) != len(tc.tones) {
				t.Fatalf("%d tones, want %d: %+v", len(ev.Params.Tones), len(tc.tones), ev.Params.Tones)
			}
			for i, want := range tc.tones {
				got := ev.Params.Tones[i]
				within(t, "tone offset (bins)", got.OffsetHz/bin, want.OffsetHz/bin, 0.1)
				within(t, "tone J/N dB", got.JNDB, want.JNDB, 1)
			}
		})
	}
}

// BenchmarkCW runs the CW detector on a 10 MS/s block with one tone.
func BenchmarkCW(b *testing.B) {
	benchDetector(b, CW{}, benchBlock(b, 10e6, synth.Emitter{Kind: synth.KindCW, Tones: []synth.Tone{{OffsetHz: 1e6, JNDB: 0}}}))
}
