package synth

import (
	"fmt"
	"sort"
)

// The built-in scenarios are invented: the site, the vehicles and the
// emitters are ours, made up to exercise every detector.

// siteSky is the sky over the invented Kestrel Quay pilot station: eight
// satellites with fixed Doppler and code phase.
func siteSky(offsetDB float64) []Satellite {
	sky := []Satellite{
		{PRN: 3, CN0DBHz: 46, DopplerHz: -2150, CodePhaseChips: 112.5},
		{PRN: 7, CN0DBHz: 44, DopplerHz: 1320, CodePhaseChips: 804.25},
		{PRN: 11, CN0DBHz: 42, DopplerHz: 3475, CodePhaseChips: 377},
		{PRN: 14, CN0DBHz: 45, DopplerHz: -640, CodePhaseChips: 951.75},
		{PRN: 19, CN0DBHz: 40, DopplerHz: -3810, CodePhaseChips: 58.5},
		{PRN: 22, CN0DBHz: 43, DopplerHz: 2590, CodePhaseChips: 640},
		{PRN: 27, CN0DBHz: 39, DopplerHz: 4120, CodePhaseChips: 233.125},
		{PRN: 31, CN0DBHz: 41, DopplerHz: -1275, CodePhaseChips: 505},
	}
	for i := range sky {
		sky[i].CN0DBHz += offsetDB
	}
	return sky
}

func quayScenario(name, desc string, caps ...Capture) Scenario {
	for i := range caps {
		if caps[i].Satellites == nil {
			caps[i].Satellites = siteSky(0)
		}
		if caps[i].OffsetS == 0 {
			caps[i].OffsetS = float64(i) * 60
		}
	}
	return Scenario{Name: name, Description: desc, Site: "kestrel-quay", Format: "ci16_le",
		SampleRate: 4e6, CenterHz: 1575.42e6, NoiseDBFS: -30, Seed: 7, Captures: caps}
}

var builtins = map[string]func() Scenario{
	"clean": func() Scenario {
		return quayScenario("clean", "a quiet hour: satellites and thermal noise only",
			Capture{Name: "quay-clean-1"}, Capture{Name: "quay-clean-2"},
			Capture{Name: "quay-clean-3"}, Capture{Name: "quay-clean-4"})
	},
	"chirp-van": func() Scenario {
		return quayScenario("chirp-van", "a delivery van with an in-car chirp jammer idles at the gate",
			Capture{Name: "quay-before"},
			Capture{Name: "quay-chirp", Emitters: []Emitter{{Kind: KindSwept, Label: "van jammer",
				StartS: 0.05, EndS: 0.2, JNDB: 10, LowHz: -1.5e6, HighHz: 1.5e6, PeriodS: 12e-6, Shape: "up"}}},
			Capture{Name: "quay-after"})
	},
	"cw-spur": func() Scenario {
		return quayScenario("cw-spur", "a faulty mast-head amplifier oscillates on two tones",
			Capture{Name: "quay-spur", Emitters: []Emitter{{Kind: KindCW, Label: "amplifier spur",
				Tones: []Tone{{OffsetHz: 312.5e3, JNDB: 5}, {OffsetHz: -720e3, JNDB: 0}}}}})
	},
	"pulses": func() Scenario {
		return quayScenario("pulses", "a pulsed emitter: Gaussian pulse pairs 12 µs apart, and a rectangular train",
			Capture{Name: "quay-pairs", Emitters: []Emitter{{Kind: KindPulsed, Label: "pulse pairs",
				JNDB: 15, Pulse: "gaussian_pair", PRIS: 370e-6, OffsetHz: 250e3}}},
			Capture{Name: "quay-rect", Emitters: []Emitter{{Kind: KindPulsed, Label: "pulse train",
				JNDB: 12, Pulse: "rect", WidthS: 10e-6, PRIS: 1e-3, OffsetHz: -400e3}}})
	},
	"wideband": func() Scenario {
		return quayScenario("wideband", "a broadband noise jammer raises the floor by 6 dB",
			Capture{Name: "quay-noise", Emitters: []Emitter{{Kind: KindWidebandNoise, Label: "noise jammer",
				FloorRiseDB: 6}}})
	},
	"narrowband": func() Scenario {
		return quayScenario("narrowband", "band-limited noise 200 kHz wide, 800 kHz above centre",
			Capture{Name: "quay-band", Emitters: []Emitter{{Kind: KindNarrowbandNoise, Label: "band noise",
				JNDB: 3, OffsetHz: 800e3, BandwidthHz: 200e3}}})
	},
	"obstructed": func() Scenario {
		return quayScenario("obstructed", "a crane parks over the antenna: every satellite 8 dB down",
			Capture{Name: "quay-open"}, Capture{Name: "quay-blocked", AttenuationDB: 8})
	},
	"demo": Demo,
}

// Demo is the scenario of `quietband demo`: the clean morning at Kestrel
// Quay, then a van with a chirp jammer passes, a mast-head amplifier spurs,
// a pulsed emitter keys up, and a noise jammer raises the floor.
func Demo() Scenario {
	return quayScenario("demo", "Kestrel Quay pilot station, one morning",
		Capture{Name: "quay-0600"},
		Capture{Name: "quay-0601"},
		Capture{Name: "quay-0602"},
		Capture{Name: "quay-0603", Emitters: []Emitter{{Kind: KindSwept, Label: "passing van",
			StartS: 0.06, EndS: 0.22, JNDB: 12, LowHz: -1.2e6, HighHz: 1.2e6, PeriodS: 15e-6, Shape: "up"}}},
		Capture{Name: "quay-0604", Emitters: []Emitter{{Kind: KindCW, Label: "amplifier spur",
			Tones: []Tone{{OffsetHz: 312.5e3, JNDB: 3}}}}},
		Capture{Name: "quay-0605", Emitters: []Emitter{{Kind: KindPulsed, Label: "pulse pairs",
			JNDB: 15, Pulse: "gaussian_pair", PRIS: 370e-6, OffsetHz: 250e3}}},
		Capture{Name: "quay-0606", Emitters: []Emitter{{Kind: KindWidebandNoise, Label: "noise jammer",
			FloorRiseDB: 6}}},
		Capture{Name: "quay-0607"},
	)
}

// Builtin returns the named built-in scenario.
func Builtin(name string) (Scenario, error) {
	f, ok := builtins[name]
	if !ok {
		return Scenario{}, fmt.Errorf("no built-in scenario %q (have: %v)", name, BuiltinNames())
	}
	s := f()
	return s, s.Normalize()
}

// BuiltinNames lists the built-in scenarios, sorted.
func BuiltinNames() []string {
	var out []string
	for k := range builtins {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}
