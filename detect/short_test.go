package detect

import (
	"math"
	"slices"
	"strings"
	"testing"

	"quietband/ingest/synth"
)

func TestFitShort(t *testing.T) {
	for _, tc := range []struct {
		n        int64
		fft, m   int
		noteHas  string
		unchaged bool
	}{
		{n: 1 << 20, fft: 1024, m: 64, unchaged: true},
		{n: 65536, fft: 1024, m: 64, unchaged: true},
		{n: 48000, fft: 1024, m: 46, noteHas: "46 frames of 1024"},
		{n: 16000, fft: 512, m: 31, noteHas: "baseline (frames of 1024) is not used"},
		{n: 1024, fft: 64, m: 16, noteHas: "16 frames of 64"},
		{n: 1000, fft: 1024, m: 64, noteHas: "no spectral analysis"},
	} {
		cfg := Config{}.Defaults(4e6)
		note := fitShort(&cfg, tc.n)
		if cfg.FFTSize != tc.fft || cfg.Frames != tc.m || (note == "") != tc.unchaged || !strings.Contains(note, tc.noteHas) {
			t.Errorf("%d samples: %d frames of %d, note %q; want %d of %d, note with %q", tc.n, cfg.Frames, cfg.FFTSize, note, tc.m, tc.fft, tc.noteHas)
		}
		if note == "" || !strings.HasPrefix(note, "no spectral") {
			if err := cfg.Validate(); err != nil {
				t.Errorf("%d samples: %v", tc.n, err)
			}
		}
	}
}

// TestShortCaptures: a tone at J/N 10 dB in captures of 4 ms (shorter than
// a block: analysed with shorter frames) and of one block and 100
// samples (whose last block holds no frame) is found at its J/N (within
// 1 dB, as the bank's tests) with its impact, and the 4 ms record says
// how it was analysed; a 0.2 ms capture is not analysed, and says so.
func TestShortCaptures(t *testing.T) {
	const fs = 4e6
	tone := synth.Emitter{Kind: synth.KindCW, Tones: []synth.Tone{{OffsetHz: 300e3, JNDB: 10}}}
	s := synth.Scenario{Name: "short", Site: "test", Format: "ci16_le", SampleRate: fs, CenterHz: 1575.42e6, NoiseDBFS: -30, Seed: 3,
		Captures: []synth.Capture{
			{Name: "s4ms", DurationS: 0.004, Emitters: []synth.Emitter{tone}},
			{Name: "block-plus", DurationS: float64(65536+100) / fs, OffsetS: 10, Emitters: []synth.Emitter{tone}},
			{Name: "s0.2ms", DurationS: 0.0002, OffsetS: 20, Emitters: []synth.Emitter{tone}}}}
	truths, res := processAll(t, s)
	for i, r := range res {
		name := truths[i].Capture
		if i == 2 {
			if len(r.Events) != 0 || !slices.ContainsFunc(r.Record.Notes, func(n string) bool { return strings.HasPrefix(n, "no spectral analysis") }) {
				t.Errorf("%s: %d events, notes %q; want none and a note that no spectral analysis ran", name, len(r.Events), r.Record.Notes)
			}
			continue
		}
		if len(r.Events) != 1 || r.Events[0].Class != ClassCW {
			t.Errorf("%s: %d events, want one cw", name, len(r.Events))
			continue
		}
		e := r.Events[0]
		if math.Abs(e.JNDB-10) > 1 || e.PowerDBFS < -100 || e.Impact == nil || e.Impact.CN0DegradationDB < 1 {
			t.Errorf("%s: J/N %.1f dB, power %.1f dBFS, impact %+v", name, e.JNDB, e.PowerDBFS, e.Impact)
		}
		if i == 0 && !slices.ContainsFunc(r.Record.Notes, func(n string) bool { return strings.Contains(n, "shorter than one block") }) {
			t.Errorf("%s: notes %q lack how it was analysed", name, r.Record.Notes)
		}
	}
}
