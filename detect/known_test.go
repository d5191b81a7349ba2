package detect

import (
	"strings"
	"testing"

	"quietband/ingest/synth"
)

func TestKnownAs(t *testing.T) {
	const fc = 1575.42e6
	known := []KnownEmitter{
		{Class: ClassCW, FrequencyHz: fc + 511.5e3, ToleranceHz: 2e3, Label: "spur A"},
		{Class: ClassCW, FrequencyHz: fc - 580e3, ToleranceHz: 2e3, Label: "spur B"},
		{Class: ClassPulsed, FrequencyHz: 1176.45e6, ToleranceHz: 100e3, Label: "DME"},
	}
	cw := func(offs ...float64) Event {
		e := Event{Class: ClassCW, OffsetHz: offs[0]}
		for _, o := range offs {
			e.Params.Tones = append(e.Params.Tones, ToneParam{OffsetHz: o})
		}
		return e
	}
	for _, tc := range []struct {
		name      string
		e         Event
		center    float64
		hasCenter bool
		want      bool
		label     string
	}{
		{"spur within tolerance", cw(511.5e3 + 1.5e3), fc, true, true, "spur A"},
		{"spur beyond tolerance", cw(511.5e3 + 2.5e3), fc, true, false, ""},
		{"both spurs in one event", cw(511.5e3, -580e3), fc, true, true, "spur A"},
		{"a new tone beside a known spur", cw(511.5e3, 100e3), fc, true, false, ""},
		{"centre unknown", cw(511.5e3), 0, false, false, ""},
		{"other class at the spur", Event{Class: ClassNarrowbandNoise, OffsetHz: 511.5e3}, fc, true, false, ""},
		{"pulses at the DME channel", Event{Class: ClassPulsed, OffsetHz: 50e3}, 1176.45e6, true, true, "DME"},
	} {
		label, ok := knownAs(&tc.e, known, tc.center, tc.hasCenter)
		if ok != tc.want || label != tc.label {
			t.Errorf("%s: known %v %q, want %v %q", tc.name, ok, label, tc.want, tc.label)
		}
	}
}

func TestKnownEmitterValidate(t *testing.T) {
	for _, tc := range []struct {
		k    KnownEmitter
		want string
	}{
		{KnownEmitter{Class: "cn0_drop", FrequencyHz: 1, ToleranceHz: 1}, "class"},
		{KnownEmitter{Class: "cw", FrequencyHz: 0, ToleranceHz: 1}, "frequency_hz"},
		{KnownEmitter{Class: "cw", FrequencyHz: 1575e6, ToleranceHz: 0}, "tolerance_hz"},
	} {
		cfg := Config{KnownEmitters: []KnownEmitter{tc.k}}.Defaults(4e6)
		if err := cfg.Validate(); err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%+v: error %v, want one naming %s", tc.k, err, tc.want)
		}
	}
}

// TestKnownEmitterInPipeline: a site lists its amplifier spur as known;
// the spur's capture reports it, known, in each of two captures, as one
// episode; a noise jammer elsewhere is not known. (A new tone in the same
// cw event as the spur makes the event not known: TestKnownAs.)
func TestKnownEmitterInPipeline(t *testing.T) {
	spur := synth.Emitter{Kind: synth.KindCW, Tones: []synth.Tone{{OffsetHz: 312.5e3, JNDB: 3}}}
	jam := synth.Emitter{Kind: synth.KindNarrowbandNoise, OffsetHz: -700e3, BandwidthHz: 100e3, JNDB: 10}
	s := synth.Scenario{Name: "known", Site: "test", Format: "ci16_le", SampleRate: 4e6, CenterHz: 1575.42e6, NoiseDBFS: -30, Seed: 5,
		Captures: []synth.Capture{{Name: "k1", Emitters: []synth.Emitter{spur}}, {Name: "k2", OffsetS: 60, Emitters: []synth.Emitter{spur, jam}}}}
	p := NewPipeline(Config{KnownEmitters: []KnownEmitter{{Class: ClassCW, FrequencyHz: 1575.42e6 + 312.5e3, ToleranceHz: 1e3, Label: "amplifier spur"}}}, nil)
	_, res := processWith(t, s, p)
	var episodes []string
	for i, r := range res {
		var known, other int
		for _, e := range r.Events {
			if e.Known {
				known++
				episodes = append(episodes, e.Episode)
				if e.KnownAs != "amplifier spur" {
					t.Errorf("capture %d: known_as %q", i, e.KnownAs)
				}
			} else {
				other++
			}
		}
		if known != 1 || other != i {
			t.Errorf("capture %d: %d known and %d other events, want 1 and %d", i, known, other, i)
		}
	}
	if len(episodes) == 2 && episodes[0] != episodes[1] {
		t.Errorf("the spur's two captures are two episodes")
	}
}
