package synth

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"

	"quietband/ingest/gpsca"
)

// Spoofer kinds (REFERENCES §11).
const (
	// SpoofCounterfeit sends every PRN it spoofs (by default every
	// satellite of the capture) at one uniform C/N0, at code phases and
	// Dopplers of its own: a simulator that pretends another place or
	// time.
	SpoofCounterfeit = "counterfeit"
	// SpoofMatchedPower sends a copy of each authentic signal a few dB
	// stronger and some chips away: a receiver-spoofer that follows the
	// sky it sees.
	SpoofMatchedPower = "matched_power"
	// SpoofMeaconing re-radiates the whole band, noise included, delayed
	// and amplified: every satellite gets a copy at one common delay,
	// and the noise floor rises with it.
	SpoofMeaconing = "meaconing"
)

// Spoofer is a source of false GPS L1 C/A signals in a capture, on from
// StartS to EndS (EndS 0: to the end). It transmits nothing: the
// synthesizer only writes files.
//
//   - counterfeit: every PRN of PRNs (default: the capture's satellites)
//     at CN0DBHz (default 50), code phase uniform in [0, 1023), Doppler
//     uniform within ±4500 Hz (a static receiver's range, REFERENCES §4),
//     data bits of its own. CodeCarrierHz > 0 models a low-grade generator
//     whose code and carrier oscillators are independent (REFERENCES
//     §11.4): each PRN's code runs at the code Doppler of its carrier
//     Doppler plus an offset drawn uniformly within ±CodeCarrierHz.
//   - matched_power: a copy of each authentic signal (of PRNs, default
//     all) PowerDB stronger (default 3), with its data and Doppler,
//     |delay| drawn uniformly within DelayChips (default [2, 20] chips),
//     earlier or later at random.
//   - meaconing: the band as the meacon receives it (the satellites and
//     its own thermal noise, as strong as the monitor's: REFERENCES
//     §11.1's model) re-radiated DelayS late (default 1.5 µs) and PowerDB
//     stronger than the authentic signals (default 4 dB): every satellite
//     gets a copy with its data at the common delay, a carrier phase of
//     its own (the paths differ per satellite, REFERENCES §11.5), and the
//     noise floor rises by 10·log10(1 + g), g = 10^(PowerDB/10).
//
// Powers are referred to the monitor's thermal noise, like the
// satellites' C/N0: a copy PowerDB over an authentic signal of C/N0 c has
// c + PowerDB there.
type Spoofer struct {
	Kind   string  `yaml:"kind" json:"kind"`
	Label  string  `yaml:"label,omitempty" json:"label,omitempty"`
	StartS float64 `yaml:"start_s,omitempty" json:"start_s"`
	EndS   float64 `yaml:"end_s,omitempty" json:"end_s"`
	PRNs   []int   `yaml:"prns,omitempty" json:"prns,omitempty"`
	// counterfeit
	CN0DBHz       float64 `yaml:"cn0_dbhz,omitempty" json:"cn0_dbhz,omitempty"`
	CodeCarrierHz float64 `yaml:"code_carrier_hz,omitempty" json:"code_carrier_hz,omitempty"`
	// matched_power, meaconing
	PowerDB float64 `yaml:"power_db,omitempty" json:"power_db,omitempty"`
	// matched_power
	DelayChips []float64 `yaml:"delay_chips,omitempty" json:"delay_chips,omitempty"`
	// meaconing
	DelayS float64 `yaml:"delay_s,omitempty" json:"delay_s,omitempty"`
}

// Multipath adds to every satellite of a capture one reflected copy:
// its delay drawn uniformly within DelayChips (default [0.2, 0.8] chips)
// and its power below the direct signal's by an amount drawn uniformly
// within WeakerDB (default [3, 6] dB), with its data, its Doppler and a
// carrier phase of its own. Reflections from nearby structures stay
// within about 1.5 chips and below the direct path, and their delays
// differ per satellite (REFERENCES §11.5): the false-alarm trap of the
// spoofing indicators.
type Multipath struct {
	DelayChips []float64 `yaml:"delay_chips,omitempty" json:"delay_chips,omitempty"`
	WeakerDB   []float64 `yaml:"weaker_db,omitempty" json:"weaker_db,omitempty"`
}

// TruthSpoofer is a spoofer as written: its configuration and every
// signal it sent.
type TruthSpoofer struct {
	Spoofer
	StartSample int64 `json:"start_sample"`
	EndSample   int64 `json:"end_sample"` // exclusive
	// Signals are the false signals, by PRN.
	Signals []TruthSpoofSignal `json:"signals"`
	// NoiseRiseDB is how much a meacon raises the noise floor,
	// 10·log10(1 + g) (REFERENCES §11.1).
	NoiseRiseDB float64 `json:"noise_rise_db,omitempty"`
}

// TruthSpoofSignal is one false signal.
type TruthSpoofSignal struct {
	PRN int `json:"prn"`
	// CN0DBHz is its C/N0 over the monitor's thermal N0.
	CN0DBHz        float64 `json:"cn0_dbhz"`
	DopplerHz      float64 `json:"doppler_hz"`
	CodePhaseChips float64 `json:"code_phase_chips"` // at the capture's first sample
	// CodeDopplerOffsetHz is the carrier Doppler its code rate follows
	// minus its actual carrier Doppler (counterfeit with code_carrier_hz).
	CodeDopplerOffsetHz float64 `json:"code_doppler_offset_hz,omitempty"`
	// For copies of an authentic signal (matched_power, meaconing):
	// DelayChips is the copy's arrival delay after the authentic signal
	// (chips; negative: earlier) and PowerOverAuthenticDB its power over
	// the authentic signal's.
	DelayChips           *float64 `json:"delay_chips,omitempty"`
	PowerOverAuthenticDB *float64 `json:"power_over_authentic_db,omitempty"`
}

// TruthPath is one reflected copy of a satellite (Multipath).
type TruthPath struct {
	PRN        int     `json:"prn"`
	DelayChips float64 `json:"delay_chips"`
	WeakerDB   float64 `json:"weaker_db"`
}

// Defaults of the spoofers and multipath.
const (
	defaultCounterfeitCN0 = 50
	defaultMatchedDB      = 3
	defaultMeaconDB       = 4
	defaultMeaconDelayS   = 1.5e-6
	counterfeitDopplerHz  = 4500
)

var (
	defaultMatchedDelay   = []float64{2, 20}
	defaultMultipathDelay = []float64{0.2, 0.8}
	defaultMultipathDB    = []float64{3, 6}
)

// normalize fills a spoofer's defaults and checks it against a capture of
// dur seconds whose satellites are sats.
func (sp *Spoofer) normalize(dur float64, sats []Satellite) error {
	if !finite(sp.StartS, sp.EndS, sp.CN0DBHz, sp.CodeCarrierHz, sp.PowerDB, sp.DelayS) || !finite(sp.DelayChips...) {
		return errors.New("every value must be a finite number")
	}
	if sp.EndS == 0 {
		sp.EndS = dur
	}
	if sp.StartS < 0 || sp.EndS > dur+1e-12 || sp.StartS >= sp.EndS {
		return fmt.Errorf("start_s %g / end_s %g must satisfy 0 ≤ start < end ≤ %g", sp.StartS, sp.EndS, dur)
	}
	seen := map[int]bool{}
	for _, p := range sp.PRNs {
		if p < 1 || p > 32 {
			return fmt.Errorf("prns: %d not in 1..32", p)
		}
		if seen[p] {
			return fmt.Errorf("prns: %d listed twice", p)
		}
		seen[p] = true
	}
	has := func(p int) bool { return slices.ContainsFunc(sats, func(s Satellite) bool { return s.PRN == p }) }
	switch sp.Kind {
	case SpoofCounterfeit:
		if sp.CN0DBHz == 0 {
			sp.CN0DBHz = defaultCounterfeitCN0
		}
		if sp.CN0DBHz < 0 || sp.CN0DBHz > 70 {
			return fmt.Errorf("cn0_dbhz %g out of range [0, 70]", sp.CN0DBHz)
		}
		if sp.CodeCarrierHz < 0 || sp.CodeCarrierHz > 20000 {
			return fmt.Errorf("code_carrier_hz %g out of range [0, 20000]", sp.CodeCarrierHz)
		}
		if len(sp.PRNs) == 0 && len(sats) == 0 {
			return errors.New("no prns given and the capture has no satellites to counterfeit")
		}
	case SpoofMatchedPower, SpoofMeaconing:
		for _, p := range sp.PRNs {
			if !has(p) {
				return fmt.Errorf("prns: %d is not a satellite of the capture (a %s spoofer copies the authentic signals)", p, sp.Kind)
			}
		}
		if sp.PowerDB == 0 {
			sp.PowerDB = defaultMatchedDB
			if sp.Kind == SpoofMeaconing {
				sp.PowerDB = defaultMeaconDB
			}
		}
		if sp.PowerDB < -20 || sp.PowerDB > 30 {
			return fmt.Errorf("power_db %g out of range [−20, 30]", sp.PowerDB)
		}
		if sp.Kind == SpoofMatchedPower {
			if len(sp.DelayChips) == 0 {
				sp.DelayChips = slices.Clone(defaultMatchedDelay)
			}
			if err := checkRange("delay_chips", sp.DelayChips, 0, 511); err != nil {
				return err
			}
			if sp.DelayS != 0 || sp.CN0DBHz != 0 || sp.CodeCarrierHz != 0 {
				return errors.New("delay_s, cn0_dbhz and code_carrier_hz are not for matched_power")
			}
		} else {
			if sp.DelayS == 0 {
				sp.DelayS = defaultMeaconDelayS
			}
			if sp.DelayS < 0 || sp.DelayS > 100e-6 {
				return fmt.Errorf("delay_s %g out of range [0, 1e-4]", sp.DelayS)
			}
			if len(sp.DelayChips) > 0 || sp.CN0DBHz != 0 || sp.CodeCarrierHz != 0 {
				return errors.New("delay_chips, cn0_dbhz and code_carrier_hz are not for meaconing (delay_s sets the delay)")
			}
		}
	default:
		return fmt.Errorf("kind %q is not one of counterfeit, matched_power, meaconing", sp.Kind)
	}
	return nil
}

// normalize fills the defaults of a capture's multipath and checks it.
func (m *Multipath) normalize() error {
	if len(m.DelayChips) == 0 {
		m.DelayChips = slices.Clone(defaultMultipathDelay)
	}
	if len(m.WeakerDB) == 0 {
		m.WeakerDB = slices.Clone(defaultMultipathDB)
	}
	if err := checkRange("delay_chips", m.DelayChips, 0, 10); err != nil {
		return err
	}
	return checkRange("weaker_db", m.WeakerDB, 0, 40)
}

// checkRange checks a [min, max] pair within [lo, hi].
func checkRange(name string, r []float64, lo, hi float64) error {
	if len(r) != 2 || !finite(r...) || r[0] > r[1] || r[0] < lo || r[1] > hi {
		return fmt.Errorf("%s %v must be [min, max] with %g ≤ min ≤ max ≤ %g", name, r, lo, hi)
	}
	return nil
}

// uniformIn draws uniformly within a [min, max] pair.
func uniformIn(r *rand.Rand, v []float64) float64 { return v[0] + (v[1]-v[0])*r.Float64() }

// authentic is what a capture's copies need of one authentic satellite.
type authentic struct {
	sat  Satellite
	bits []int8
	cn0  float64 // after attenuation
}

// copySource makes a copy of the authentic satellite au arriving delay
// chips later (earlier when negative) at C/N0 cn0, with the same data,
// Doppler and Doppler rate, carrier phase phase0. The copy's chip count
// runs delay chips behind the original's, unwrapped, so that its data bits
// change delay chips later too; before the first bit of the array it
// reads the array's last entry, as the original does (the bit before the
// capture), which no sample of the capture reaches otherwise.
func copySource(au authentic, delay, cn0, phase0, sigma2, fs float64, ck clock) *movingSatellite {
	code, _ := gpsca.Code(au.sat.PRN)
	amp := math.Sqrt(math.Pow(10, cn0/10) * sigma2 / fs)
	s := newMovingSatellite(amp, code, au.bits, au.sat, fs, ck, phase0)
	s.chip0 = gpsca.WrapChips(au.sat.CodePhaseChips) - delay
	return s
}

// spoofSources makes the sources of capture c's spoofers and multipath
// (each drawing from a stream of its own, newRNG(spoofStream + j) and
// newRNG(multipathStream)) and their truth. sats are the capture's
// authentic satellites as built; all is the span a source covering the
// whole capture has; capIdx maps stream to capture indices.
func spoofSources(c Capture, sats []authentic, fs, sigma2 float64, ck clock, newRNG func(int) *rand.Rand,
	all span, streamLen, n int64, capIdx func(int64) int64, truth *Truth) []source {
	var srcs []source
	byPRN := func(p int) (authentic, bool) {
		i := slices.IndexFunc(sats, func(a authentic) bool { return a.sat.PRN == p })
		if i < 0 {
			return authentic{}, false
		}
		return sats[i], true
	}
	ptr := func(v float64) *float64 { return &v }
	for j, sp := range c.Spoofers {
		r := newRNG(spoofStream + j)
		// On from start_s to end_s; from the stream's lead-in when it
		// starts with the capture, to its lead-out when it ends with it
		// (the passband filter sees it on both sides).
		on := span{int64(math.Round(sp.StartS * fs)), min(n, int64(math.Round(sp.EndS*fs)))}
		if sp.StartS == 0 {
			on.lo = all.lo
		}
		if sp.EndS >= c.DurationS {
			on.hi = all.hi
		}
		ts := TruthSpoofer{Spoofer: sp, StartSample: capIdx(max(on.lo, 0)), EndSample: capIdx(min(on.hi, streamLen))}
		prns := sp.PRNs
		if len(prns) == 0 {
			for _, a := range sats {
				prns = append(prns, a.sat.PRN)
			}
		}
		var group []source
		switch sp.Kind {
		case SpoofCounterfeit:
			for _, p := range prns {
				code, _ := gpsca.Code(p)
				bits := make([]int8, int(float64(streamLen+2*(-all.lo))/fs*50)+3)
				for k := range bits {
					bits[k] = int8(1 - 2*r.IntN(2))
				}
				sat := Satellite{PRN: p, CN0DBHz: sp.CN0DBHz, DopplerHz: math.Round(10*(2*r.Float64()-1)*counterfeitDopplerHz) / 10,
					CodePhaseChips: math.Round(1e3*gpsca.CodeLength*r.Float64()) / 1e3}
				off := 0.0
				if sp.CodeCarrierHz > 0 {
					off = math.Round((2*r.Float64()-1)*sp.CodeCarrierHz*10) / 10
				}
				amp := math.Sqrt(math.Pow(10, sp.CN0DBHz/10) * sigma2 / fs)
				s := newMovingSatellite(amp, code, bits, sat, fs, ck, 2*math.Pi*r.Float64())
				if off != 0 {
					s.c1 = gpsca.CodeRate(sat.DopplerHz+off) / ((1 + ck.eps) * fs)
				}
				group = append(group, s)
				ts.Signals = append(ts.Signals, TruthSpoofSignal{PRN: p, CN0DBHz: sp.CN0DBHz, DopplerHz: sat.DopplerHz,
					CodePhaseChips: sat.CodePhaseChips, CodeDopplerOffsetHz: off})
			}
		case SpoofMatchedPower, SpoofMeaconing:
			g := math.Pow(10, sp.PowerDB/10)
			meacon := sp.Kind == SpoofMeaconing
			delayC := sp.DelayS * gpsca.ChipRate
			for _, p := range prns {
				au, _ := byPRN(p)
				d := delayC
				if !meacon {
					d = uniformIn(r, sp.DelayChips)
					if r.IntN(2) == 1 {
						d = -d
					}
					d = math.Round(d*1e3) / 1e3
				}
				cn0 := au.cn0 + sp.PowerDB
				group = append(group, copySource(au, d, cn0, 2*math.Pi*r.Float64(), sigma2, fs, ck))
				ts.Signals = append(ts.Signals, TruthSpoofSignal{PRN: p, CN0DBHz: cn0, DopplerHz: au.sat.DopplerHz,
					CodePhaseChips: gpsca.WrapChips(au.sat.CodePhaseChips - d), DelayChips: ptr(d), PowerOverAuthenticDB: ptr(sp.PowerDB)})
			}
			if meacon {
				// The meacon's own thermal noise, re-radiated: g·σ².
				group = append(group, newGaussian(r, g*sigma2, span{math.MinInt64, math.MaxInt64}))
				ts.NoiseRiseDB = 10 * math.Log10(1+g)
			}
		}
		for _, x := range group {
			srcs = append(srcs, &keyed{src: x, on: []span{on}})
		}
		truth.Spoofers = append(truth.Spoofers, ts)
	}
	if m := c.Multipath; m != nil {
		r := newRNG(multipathStream)
		for _, au := range sats {
			d := math.Round(uniformIn(r, m.DelayChips)*1e3) / 1e3
			w := math.Round(uniformIn(r, m.WeakerDB)*100) / 100
			srcs = append(srcs, copySource(au, d, au.cn0-w, 2*math.Pi*r.Float64(), sigma2, fs, ck))
			truth.Multipath = append(truth.Multipath, TruthPath{PRN: au.sat.PRN, DelayChips: d, WeakerDB: w})
		}
	}
	return srcs
}

// Streams of newRNG used by the spoofers (spoofStream + index) and by
// multipath: far from the emitters' indices.
const (
	spoofStream     = 1 << 16
	multipathStream = 1 << 17
)
