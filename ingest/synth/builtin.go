package synth

import (
	"fmt"
	"sort"
)

// The built-in scenarios are invented: the sites, the vehicles and the
// emitters are ours, made up to exercise every detector. Sites: Kestrel
// Quay (an ideal front end), Wrenfold Mast, Saltmire Beacon, Tarnhollow
// Ridge, Brackenlow Yard and Fellgate Hut (front ends of their own), and
// Harrowmere Pier (spoofers, a meacon and multipath).

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

	// Sites with a real front end, each exercising the front-end model.
	"two-bit-spur": func() Scenario {
		return Scenario{Name: "two-bit-spur", Site: "wrenfold-mast", Format: "ri8", SampleRate: 4.092e6, CenterHz: 1575.42e6,
			NoiseDBFS: -30, Seed: 31,
			Description: "a 2-bit real-IF front end (8.184 MS/s, IF 2.046 MHz, levels ±1/±3, threshold at σ, no AGC) with a clock spur and a warming amplifier; a CW jammer in the third capture",
			Sky:         RandomSky(9, 21),
			RealIF:      &RealIF{IFHz: 2.046e6, LOSide: "low"},
			FrontEnd: &FrontEnd{
				Passband:              &Passband{RolloffDB: 15, RolloffFraction: 0.2},
				Quantization:          &Quantization{Bits: 2, ThresholdSigma: 1},
				Spurs:                 []Tone{{OffsetHz: 1.1e6, JNDB: 0}},
				GainDriftDBPerCapture: ref(0.3),
				ClockPPM:              ref(1.2),
			},
			Captures: []Capture{{Name: "wrenfold-1"}, {Name: "wrenfold-2", OffsetS: 60},
				{Name: "wrenfold-3", OffsetS: 120, Emitters: []Emitter{{Kind: KindCW, Label: "carrier jammer",
					StartS: 0.08, OffsetHz: -600e3, JNDB: 15}}},
				{Name: "wrenfold-4", OffsetS: 180}}}
	},
	"beacon-first": func() Scenario {
		dme := Emitter{Kind: KindPulsed, Label: "DME-like beacon", Pulse: "gaussian_pair", JNDB: 18, PRIS: 370e-6, OffsetHz: 550e3}
		return Scenario{Name: "beacon-first", Site: "saltmire-beacon", Format: "ci16_le", SampleRate: 8e6, CenterHz: 1176.45e6,
			NoiseDBFS: -30, Seed: 32,
			Description: "an L5-band site whose very first capture already has a DME-like beacon (pairs 12 µs apart, 550 kHz up); a hopping data link keys up in bursts; no satellites are synthesized at L5",
			FrontEnd: &FrontEnd{
				Passband: &Passband{TiltDB: -2, RolloffDB: 20, RolloffFraction: 0.15},
				DCOffset: &IQValue{I: 0.002, Q: -0.001},
				ClockPPM: ref(0.5),
			},
			Captures: []Capture{{Name: "saltmire-1", Emitters: []Emitter{dme}},
				{Name: "saltmire-2", OffsetS: 60, Emitters: []Emitter{dme, {Kind: KindPulsed, Label: "hopping link", Pulse: "rect",
					WidthS: 6.4e-6, PRIS: 26e-6, JNDB: 12, ChannelsHz: []float64{-3.45e6, -0.45e6, 2.55e6},
					On: [][]float64{{0.02, 0.05}, {0.11, 0.13}, {0.2, 0.24}}}}},
				{Name: "saltmire-3", OffsetS: 120, Emitters: []Emitter{dme}}}}
	},
	"strong-sky": func() Scenario {
		return Scenario{Name: "strong-sky", Site: "tarnhollow-ridge", Format: "ci16_le", SampleRate: 4e6, CenterHz: 1575.42e6,
			NoiseDBFS: -30, Seed: 33,
			Description: "12 satellites up to 53 dB-Hz whose Dopplers drift from capture to capture, through a tilted, rippled passband and a 0.8 ppm clock; a noise jammer in the last capture",
			Sky:         RandomSky(12, 7),
			FrontEnd: &FrontEnd{
				Passband: &Passband{TiltDB: 4, RippleDB: 0.4, RippleCycles: 3, RolloffDB: 18, RolloffFraction: 0.15},
				ClockPPM: ref(0.8),
			},
			Captures: []Capture{{Name: "tarnhollow-1"}, {Name: "tarnhollow-2", OffsetS: 60}, {Name: "tarnhollow-3", OffsetS: 120},
				{Name: "tarnhollow-4", OffsetS: 180, Emitters: []Emitter{{Kind: KindWidebandNoise, Label: "noise jammer",
					StartS: 0.1, FloorRiseDB: 3}}}}}
	},
	"wide-sweeper": func() Scenario {
		sweep := Emitter{Kind: KindSwept, Label: "24 MHz chirp jammer", JNDB: 18, LowHz: -12e6, HighHz: 12e6, PeriodS: 80e-6, Shape: "up"}
		keyed := sweep
		keyed.On = [][]float64{{0.03, 0.06}, {0.1, 0.12}, {0.17, 0.22}}
		return Scenario{Name: "wide-sweeper", Site: "brackenlow-yard", Format: "cu8", SampleRate: 2.048e6, CenterHz: 1575.42e6,
			NoiseDBFS: -30, Seed: 34,
			Description: "a cheap 8-bit dongle (I/Q imbalance, DC offset, 25 ppm clock) sees a jammer sweeping 24 MHz, far wider than its band, keyed on and off beside an amplifier tone",
			Sky:         RandomSky(8, 11),
			FrontEnd: &FrontEnd{
				DCOffset:     &IQValue{I: 0.01, Q: -0.008},
				IQImbalance:  &IQImbalance{GainError: 0.03, PhaseDeg: 2},
				Quantization: &Quantization{Bits: 8, SigmaLSB: 8},
				ClockPPM:     ref(25.0),
			},
			Captures: []Capture{{Name: "brackenlow-1"},
				{Name: "brackenlow-2", OffsetS: 60, Emitters: []Emitter{keyed, {Kind: KindCW, Label: "amplifier tone", OffsetHz: 300e3, JNDB: 6}}},
				{Name: "brackenlow-3", OffsetS: 120, Emitters: []Emitter{sweep}}}}
	},
	"spoofing": func() Scenario {
		return Scenario{Name: "spoofing", Site: "harrowmere-pier", Format: "ci16_le", SampleRate: 4e6, CenterHz: 1575.42e6,
			NoiseDBFS: -30, Seed: 36,
			Description: "a pier where ships pass: a clear morning with a reflecting crane, then a counterfeit sky at 50 dB-Hz, a matched-power spoofer 3 dB over every satellite, and a meacon re-radiating the band 1.5 µs late and 4 dB up",
			Sky:         RandomSky(10, 41),
			Captures: []Capture{{Name: "harrowmere-1"}, {Name: "harrowmere-2", OffsetS: 60},
				{Name: "harrowmere-3", OffsetS: 120, Multipath: &Multipath{}},
				{Name: "harrowmere-4", OffsetS: 180, Spoofers: []Spoofer{{Kind: SpoofCounterfeit, Label: "counterfeit sky", CN0DBHz: 50}}},
				{Name: "harrowmere-5", OffsetS: 240, Spoofers: []Spoofer{{Kind: SpoofMatchedPower, Label: "matched-power spoofer", PowerDB: 3}}},
				{Name: "harrowmere-6", OffsetS: 300, Spoofers: []Spoofer{{Kind: SpoofMeaconing, Label: "meacon", DelayS: 1.5e-6, PowerDB: 4}}},
				{Name: "harrowmere-7", OffsetS: 360}}}
	},
	"jam-then-spoof": func() Scenario {
		jam := Emitter{Kind: KindWidebandNoise, Label: "noise jammer", FloorRiseDB: 15}
		fake := Spoofer{Kind: SpoofCounterfeit, Label: "counterfeit sky", CN0DBHz: 48}
		late := jam
		late.EndS = 0.1
		lateFake := fake
		lateFake.StartS = 0.1
		return Scenario{Name: "jam-then-spoof", Site: "harrowmere-pier", Format: "ci16_le", SampleRate: 4e6, CenterHz: 1575.42e6,
			NoiseDBFS: -30, Seed: 37,
			Description: "a noise jammer takes the satellites away, then stops as a counterfeit sky at 48 dB-Hz takes their place: the receivers nearby reacquire the false signals",
			Sky:         RandomSky(9, 43),
			Captures: []Capture{{Name: "jts-1"}, {Name: "jts-2", OffsetS: 60},
				{Name: "jts-3", OffsetS: 120, Emitters: []Emitter{jam}},
				{Name: "jts-4", OffsetS: 180, Emitters: []Emitter{late}, Spoofers: []Spoofer{lateFake}},
				{Name: "jts-5", OffsetS: 240, Spoofers: []Spoofer{fake}},
				{Name: "jts-6", OffsetS: 300, Spoofers: []Spoofer{fake}}}}
	},
	"recorder-faults": func() Scenario {
		return Scenario{Name: "recorder-faults", Site: "fellgate-hut", Format: "cf32_le", SampleRate: 4.092e6, CenterHz: 1575.42e6,
			NoiseDBFS: -30, Seed: 35,
			Description: "a recorder that loses a USB buffer, zero-fills a gap, then writes a dead, a stuck and an unnormalised capture",
			Sky:         RandomSky(8, 3),
			FrontEnd:    &FrontEnd{},
			Captures: []Capture{{Name: "fellgate-1"},
				{Name: "fellgate-2", OffsetS: 60, FrontEnd: &FrontEnd{SampleDrops: []SampleDrop{{AtS: 0.1, Samples: 16384}},
					Gaps: []Gap{{AtS: 0.18, Samples: 4096}}}},
				{Name: "fellgate-3", OffsetS: 120, FrontEnd: &FrontEnd{Dead: ref(true)}},
				{Name: "fellgate-4", OffsetS: 180, FrontEnd: &FrontEnd{Stuck: &IQValue{I: 0.125, Q: -0.0625}}},
				{Name: "fellgate-5", OffsetS: 240, FrontEnd: &FrontEnd{UnnormalisedScale: ref(2048.0)}}}}
	},
}

// Demo is the scenario of `quietband demo`: the clean morning at Kestrel
// Quay, then a van with a chirp jammer passes, a mast-head amplifier spurs,
// a pulsed emitter keys up, a noise jammer raises the floor, and, once the
// sky is clear again, a spoofer on a passing boat counterfeits the
// satellites.
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
		Capture{Name: "quay-0608", Spoofers: []Spoofer{{Kind: SpoofCounterfeit, Label: "spoofer on a passing boat", CN0DBHz: 48}}},
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
