// Package synth writes IQ captures with exactly known content, for demos,
// tests and benchmarks: GPS L1 C/A satellites at a stated C/N0, thermal
// noise, and interference (CW tones, swept chirps, pulse trains, wideband
// and band-limited noise, an obstructed antenna), each with its own start
// and end. Beside each capture it writes a truth sidecar in JSON.
//
// It only writes files. quietband never transmits; transmitting
// interference on GNSS bands is illegal in most countries.
//
// Levels: the thermal noise power per complex sample is σ² = N0·fs, set by
// NoiseDBFS (σ² = 10^(NoiseDBFS/10) of full scale). A satellite at C/N0 has
// carrier power C = C/N0·N0 = 10^(CN0/10)·σ²/fs. An interferer's J/N is its
// power over the noise power in the capture bandwidth, J = 10^(JN/10)·σ²;
// for pulses it is the in-pulse peak.
//
// What real recordings hold, beyond that ideal sum:
//
//   - The sky: satellites with a Doppler rate (DopplerRateHzS, the code
//     following the carrier at 1/1540), and a scenario Sky propagated to
//     each capture's offset_s (Propagate); RandomSky draws a realistic sky
//     from a seed.
//   - Emitters keyed on and off several times (On), sweeps far wider than
//     the band whose amplitude follows the recorder's anti-alias response
//     (flat to 0.8·fs/2, a raised cosine to zero at fs/2) so that nothing
//     aliases, pulses hopping over channels (ChannelsHz), any number of
//     emitters of any kind together.
//   - The recorder's front end (FrontEnd, per scenario, overridden part by
//     part per capture): gain, drift and steps; a passband (tilt, ripple,
//     roll-off) as a linear-phase FIR; its own spurs; I/Q imbalance; DC
//     offset; low-bit quantization without AGC; the receiver clock's
//     offset; spectrum inversion; sample drops, zero-filled gaps, dead,
//     stuck and unnormalised captures. See FrontEnd for the order.
//   - Real samples at an IF (RealIF, real formats), as IF-sampling front
//     ends write them, for package ingest to convert.
//
// The truth then also says what the recording holds: apparent offsets,
// Dopplers and J/N (after the clock offset, an inversion, the passband),
// the front end and its derived values, its spurs, the faults with their
// sample spans.
//
// Every capture is deterministic for a seed: each source draws from its
// own random stream. Sources and options added since the front-end model
// draw from streams of their own, and a scenario that uses none of them
// is written byte for byte as before (TestUnchangedWithoutNewOptions).
package synth

import (
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"slices"
	"strings"
	"time"

	"go.yaml.in/yaml/v3"

	"quietband/ingest"
	"quietband/ingest/gpsca"
)

// Scenario is a sequence of captures at one site, written with one format
// and rate.
type Scenario struct {
	Name        string    `yaml:"name" json:"name"`
	Description string    `yaml:"description" json:"description"`
	Site        string    `yaml:"site" json:"site"`
	Format      string    `yaml:"format" json:"format"`           // SigMF datatype; default ci16_le
	SampleRate  float64   `yaml:"sample_rate" json:"sample_rate"` // default 4e6
	CenterHz    float64   `yaml:"center_hz" json:"center_hz"`     // default GPS L1
	NoiseDBFS   float64   `yaml:"noise_dbfs" json:"noise_dbfs"`   // default −30
	Raw         bool      `yaml:"raw" json:"raw"`                 // raw files instead of SigMF
	Start       time.Time `yaml:"start" json:"start"`             // first capture's start
	Seed        uint64    `yaml:"seed" json:"seed"`
	Captures    []Capture `yaml:"captures" json:"captures"`
	// FrontEnd is the recorder's front end (passband, DC offset, I/Q
	// imbalance, quantization, spurs, gain, clock, faults) for every
	// capture; a capture's own front_end overrides it part by part. Nil:
	// an ideal front end, the samples are the sky's sum as they always were.
	FrontEnd *FrontEnd `yaml:"front_end,omitempty" json:"front_end,omitempty"`
	// Sky is the satellites at Start (offset_s 0), for the captures that
	// list none: each such capture gets them propagated to its offset_s
	// (Propagate: Doppler moved by its rate, code phase advanced by the
	// chips sent in between).
	Sky []Satellite `yaml:"sky,omitempty" json:"sky,omitempty"`
	// RandomSky fills Sky with RandomSky(satellites, seed) when Sky is empty.
	RandomSky *RandomSkySpec `yaml:"random_sky,omitempty" json:"random_sky,omitempty"`
	// RealIF writes real samples at an IF (for real formats: ri8, ri16_le,
	// rf32_le, ...; filled with its defaults when a real format has none).
	RealIF *RealIF `yaml:"real_if,omitempty" json:"real_if,omitempty"`
}

// RandomSkySpec asks for a sky drawn by RandomSky.
type RandomSkySpec struct {
	Satellites int    `yaml:"satellites" json:"satellites"`
	Seed       uint64 `yaml:"seed" json:"seed"`
}

// Capture is one recording of a scenario.
type Capture struct {
	Name       string      `yaml:"name" json:"name"`
	OffsetS    float64     `yaml:"offset_s" json:"offset_s"`     // start, seconds after Scenario.Start
	DurationS  float64     `yaml:"duration_s" json:"duration_s"` // default 0.25
	Satellites []Satellite `yaml:"satellites" json:"satellites"`
	// AttenuationDB lowers every satellite (an obstructed or failing antenna).
	AttenuationDB float64   `yaml:"attenuation_db" json:"attenuation_db"`
	Emitters      []Emitter `yaml:"emitters" json:"emitters"`
	// FrontEnd overrides the scenario's front end for this capture: each
	// part given here (passband, quantization, sample_drops, ...) replaces
	// the scenario's, the others are kept.
	FrontEnd *FrontEnd `yaml:"front_end,omitempty" json:"front_end,omitempty"`
	// Spoofers are sources of false GPS signals (counterfeit,
	// matched_power, meaconing; see Spoofer).
	Spoofers []Spoofer `yaml:"spoofers,omitempty" json:"spoofers,omitempty"`
	// Multipath gives every satellite a reflected copy (see Multipath).
	Multipath *Multipath `yaml:"multipath,omitempty" json:"multipath,omitempty"`
}

// Satellite is one GPS L1 C/A signal.
type Satellite struct {
	PRN            int     `yaml:"prn" json:"prn"`
	CN0DBHz        float64 `yaml:"cn0_dbhz" json:"cn0_dbhz"`
	DopplerHz      float64 `yaml:"doppler_hz" json:"doppler_hz"`
	CodePhaseChips float64 `yaml:"code_phase_chips" json:"code_phase_chips"` // at the capture's first sample
	// DopplerRateHzS is the Doppler's rate of change (Hz/s; a static
	// receiver sees at most about ±1 Hz/s, see RandomSky): the carrier
	// phase is quadratic in time and the code follows the carrier at 1/1540.
	DopplerRateHzS float64 `yaml:"doppler_rate_hz_s,omitempty" json:"doppler_rate_hz_s,omitempty"`
}

// Emitter kinds.
const (
	KindCW              = "cw"
	KindSwept           = "swept"
	KindPulsed          = "pulsed"
	KindWidebandNoise   = "wideband_noise"
	KindNarrowbandNoise = "narrowband_noise"
)

// Emitter is one interference source, present from StartS to EndS within
// the capture (EndS 0: to the end).
type Emitter struct {
	Kind   string  `yaml:"kind" json:"kind"`
	Label  string  `yaml:"label,omitempty" json:"label,omitempty"`
	StartS float64 `yaml:"start_s,omitempty" json:"start_s"`
	EndS   float64 `yaml:"end_s,omitempty" json:"end_s"`
	// JNDB is the J/N in dB (for cw: per tone unless Tones is given).
	JNDB     float64 `yaml:"jn_db,omitempty" json:"jn_db"`
	OffsetHz float64 `yaml:"offset_hz,omitempty" json:"offset_hz"`
	// cw
	Tones []Tone `yaml:"tones,omitempty" json:"tones,omitempty"`
	// On keys the emitter on and off abruptly: [[start_s, end_s], ...],
	// increasing and not overlapping. start_s and end_s then become the
	// first start and the last end.
	On [][]float64 `yaml:"on,omitempty" json:"on,omitempty"`
	// swept: a linear chirp between LowHz and HighHz (offsets from centre).
	// The span may reach beyond ±fs/2 (cheap jammers sweep 10–40 MHz): the
	// recorder's anti-alias filter then shapes the chirp (antiAliasGain) so
	// that nothing aliases.
	LowHz   float64 `yaml:"low_hz,omitempty" json:"low_hz,omitempty"`
	HighHz  float64 `yaml:"high_hz,omitempty" json:"high_hz,omitempty"`
	PeriodS float64 `yaml:"period_s,omitempty" json:"period_s,omitempty"`
	Shape   string  `yaml:"shape,omitempty" json:"shape,omitempty"` // up, down, triangle
	// pulsed: Pulse "gaussian_pair" (DME-like, 3.5 µs half-amplitude width)
	// or "rect" (WidthS wide); one pulse (or pair) every PRIS.
	Pulse        string  `yaml:"pulse,omitempty" json:"pulse,omitempty"`
	WidthS       float64 `yaml:"width_s,omitempty" json:"width_s,omitempty"`
	PRIS         float64 `yaml:"pri_s,omitempty" json:"pri_s,omitempty"`
	PairSpacingS float64 `yaml:"pair_spacing_s,omitempty" json:"pair_spacing_s,omitempty"`
	// ChannelsHz makes a pulsed emitter hop: each pulse (or pair) is sent
	// on one of these offsets, chosen pseudo-randomly per pulse from the
	// scenario's seed (as L5-band data links hop over channels 3 MHz
	// apart). offset_hz is then unused and must be 0.
	ChannelsHz []float64 `yaml:"channels_hz,omitempty" json:"channels_hz,omitempty"`
	// wideband_noise: FloorRiseDB over the whole band
	FloorRiseDB float64 `yaml:"floor_rise_db,omitempty" json:"floor_rise_db,omitempty"`
	// narrowband_noise: BandwidthHz around OffsetHz, at JNDB
	BandwidthHz float64 `yaml:"bandwidth_hz,omitempty" json:"bandwidth_hz,omitempty"`
}

// Tone is one CW tone.
type Tone struct {
	OffsetHz float64 `yaml:"offset_hz" json:"offset_hz"`
	JNDB     float64 `yaml:"jn_db" json:"jn_db"`
	// In the truth only: where the tone lies in the recording (after the
	// receiver's clock offset and a spectrum inversion) and its J/N after
	// the passband.
	ApparentOffsetHz *float64 `yaml:"-" json:"apparent_offset_hz,omitempty"`
	ApparentJNDB     *float64 `yaml:"-" json:"apparent_jn_db,omitempty"`
}

// DMEAlpha is the Gaussian pulse constant α of p(t) = exp(−α t²/2) used in
// GNSS/DME compatibility studies (4.5·10¹¹ s⁻², from memory of Bastide et
// al. 2004); it gives a 3.5 µs half-amplitude width.
const DMEAlpha = 4.5e11

// DMEPairSpacing is the X-channel pulse-pair spacing (ICAO Annex 10, 12 µs).
const DMEPairSpacing = 12e-6

// LoadScenario reads a YAML scenario; unknown keys are an error naming the
// key.
func LoadScenario(path string) (*Scenario, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return ParseScenario(f, path)
}

// ParseScenario decodes a YAML scenario from r (name is used in errors).
func ParseScenario(r io.Reader, name string) (*Scenario, error) {
	dec := yaml.NewDecoder(r)
	dec.KnownFields(true)
	var s Scenario
	if err := dec.Decode(&s); err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	if err := s.Normalize(); err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	return &s, nil
}

// Normalize fills defaults and checks every value, so that a scenario that
// passes writes without surprises.
func (s *Scenario) Normalize() error {
	if s.Name == "" {
		s.Name = "scenario"
	}
	if s.Format == "" {
		s.Format = "ci16_le"
	}
	format, err := ingest.ParseFormat(s.Format)
	if err != nil {
		return fmt.Errorf("format: %w", err)
	}
	if s.SampleRate == 0 {
		s.SampleRate = 4e6
	}
	if !(s.SampleRate >= 1e3 && s.SampleRate <= 200e6) {
		return fmt.Errorf("sample_rate %g out of range [1e3, 2e8]", s.SampleRate)
	}
	if s.CenterHz == 0 {
		s.CenterHz = 1575.42e6
	}
	if s.NoiseDBFS == 0 {
		s.NoiseDBFS = -30
	}
	switch {
	case format.IsReal():
		if s.RealIF == nil {
			s.RealIF = &RealIF{}
		}
		if s.RealIF.IFHz == 0 {
			s.RealIF.IFHz = s.SampleRate / 2 // a quarter of the file's rate
		}
		if s.RealIF.LOSide == "" {
			s.RealIF.LOSide = "low"
		}
		if _, err := ingest.ParseLOSide(s.RealIF.LOSide); err != nil {
			return fmt.Errorf("real_if.lo_side: %w", err)
		}
		if err := s.RealIF.conversion().Check(2 * s.SampleRate); err != nil {
			return fmt.Errorf("real_if.if_hz: file rate %g (twice sample_rate): %w", 2*s.SampleRate, err)
		}
	case s.RealIF != nil:
		return fmt.Errorf("real_if needs a real-valued format (ri8, ri16_le, rf32_le, ...), not %s", format)
	}
	if !finite(s.CenterHz) {
		return fmt.Errorf("center_hz %g is not a finite number", s.CenterHz)
	}
	if !(s.NoiseDBFS >= -120 && s.NoiseDBFS <= -3) {
		return fmt.Errorf("noise_dbfs %g out of range [−120, −3]", s.NoiseDBFS)
	}
	if s.Start.IsZero() {
		s.Start = time.Date(2026, 3, 14, 6, 0, 0, 0, time.UTC)
	}
	s.Start = s.Start.UTC()
	if len(s.Captures) == 0 {
		return errors.New("no captures")
	}
	if s.FrontEnd != nil {
		if err := s.FrontEnd.check(s, 0, math.Inf(1)); err != nil {
			return fmt.Errorf("front_end.%w", err)
		}
	}
	if s.RandomSky != nil {
		if len(s.Sky) > 0 {
			return errors.New("give sky or random_sky, not both")
		}
		if s.RandomSky.Satellites < 1 || s.RandomSky.Satellites > 32 {
			return fmt.Errorf("random_sky.satellites %d not in 1..32", s.RandomSky.Satellites)
		}
		s.Sky = RandomSky(s.RandomSky.Satellites, s.RandomSky.Seed)
		s.RandomSky = nil
	}
	for j, sat := range s.Sky {
		if err := sat.check(s, 0, nil); err != nil {
			return fmt.Errorf("sky[%d]: %w", j, err)
		}
	}
	seen := map[string]bool{}
	for i := range s.Captures {
		c := &s.Captures[i]
		if c.Name == "" {
			c.Name = fmt.Sprintf("%s-%03d", s.Name, i+1)
		}
		if strings.ContainsAny(c.Name, "/\\\n") || c.Name == "." || c.Name == ".." {
			return fmt.Errorf("captures[%d]: name %q must be a plain file name", i, c.Name)
		}
		if seen[c.Name] {
			return fmt.Errorf("captures[%d]: name %q used twice", i, c.Name)
		}
		seen[c.Name] = true
		if c.DurationS == 0 {
			c.DurationS = 0.25
		}
		if !(c.DurationS > 0 && c.DurationS <= 3600) {
			return fmt.Errorf("capture %s: duration_s %g out of range", c.Name, c.DurationS)
		}
		if !finite(c.OffsetS, c.AttenuationDB) {
			return fmt.Errorf("capture %s: offset_s %g and attenuation_db %g must be finite numbers", c.Name, c.OffsetS, c.AttenuationDB)
		}
		if c.Satellites == nil && len(s.Sky) > 0 {
			c.Satellites = Propagate(s.Sky, c.OffsetS)
		}
		fe := mergeFrontEnd(s.FrontEnd, c.FrontEnd)
		if fe != nil {
			if err := fe.check(s, i, c.DurationS); err != nil {
				return fmt.Errorf("capture %s: front_end.%w", c.Name, err)
			}
		}
		for j, sat := range c.Satellites {
			if err := sat.check(s, c.DurationS, fe); err != nil {
				return fmt.Errorf("capture %s: satellites[%d]: %w", c.Name, j, err)
			}
		}
		for j := range c.Emitters {
			if err := c.Emitters[j].normalize(s.SampleRate, c.DurationS, fe.clock(s.CenterHz)); err != nil {
				return fmt.Errorf("capture %s: emitters[%d] (%s): %w", c.Name, j, c.Emitters[j].Kind, err)
			}
		}
		for j := range c.Spoofers {
			if err := c.Spoofers[j].normalize(c.DurationS, c.Satellites); err != nil {
				return fmt.Errorf("capture %s: spoofers[%d] (%s): %w", c.Name, j, c.Spoofers[j].Kind, err)
			}
		}
		if c.Multipath != nil {
			if err := c.Multipath.normalize(); err != nil {
				return fmt.Errorf("capture %s: multipath: %w", c.Name, err)
			}
		}
	}
	return nil
}

// check validates one satellite of a capture dur seconds long (0: of the
// scenario's sky) seen through the front end fe (nil: ideal).
func (sat Satellite) check(s *Scenario, dur float64, fe *FrontEnd) error {
	if !finite(sat.CN0DBHz, sat.DopplerHz, sat.CodePhaseChips, sat.DopplerRateHzS) {
		return errors.New("cn0_dbhz, doppler_hz, doppler_rate_hz_s and code_phase_chips must be finite numbers")
	}
	// The carrier must fall inside the capture, or it would alias.
	if f := gpsca.L1 - s.CenterHz + sat.DopplerHz; math.Abs(f) >= s.SampleRate/2 {
		return fmt.Errorf("L1 carrier at %g Hz from center_hz lies outside ±fs/2 = ±%g Hz", f, s.SampleRate/2)
	}
	if sat.PRN < 1 || sat.PRN > 32 {
		return fmt.Errorf("prn %d not in 1..32", sat.PRN)
	}
	if sat.CN0DBHz < 0 || sat.CN0DBHz > 70 {
		return fmt.Errorf("cn0_dbhz %g out of range [0, 70]", sat.CN0DBHz)
	}
	if math.Abs(sat.DopplerRateHzS) > 10 {
		return fmt.Errorf("doppler_rate_hz_s %g out of range [−10, 10] (a static receiver sees at most about ±1 Hz/s)", sat.DopplerRateHzS)
	}
	// Through the receiver's clock and over the whole capture, too.
	ck := fe.clock(s.CenterHz)
	for _, t := range []float64{0, dur} {
		fd := sat.DopplerHz + sat.DopplerRateHzS*t
		if f := ck.carrier(gpsca.L1 + fd); math.Abs(f) >= s.SampleRate/2 {
			return fmt.Errorf("L1 carrier at %g Hz from center_hz %g s into the capture (doppler_hz %g, doppler_rate_hz_s %g, clock_ppm %g) lies outside ±fs/2 = ±%g Hz",
				f, t, sat.DopplerHz, sat.DopplerRateHzS, ck.ppm, s.SampleRate/2)
		}
	}
	return nil
}

// maxSweepHz bounds a sweep's low_hz and high_hz: beyond ±100 MHz from the
// centre no GNSS front end would let anything through.
const maxSweepHz = 100e6

func (e *Emitter) normalize(fs, dur float64, ck clock) error {
	if !finite(e.StartS, e.EndS, e.JNDB, e.OffsetHz, e.LowHz, e.HighHz, e.PeriodS, e.WidthS, e.PRIS,
		e.PairSpacingS, e.FloorRiseDB, e.BandwidthHz) {
		return errors.New("every value must be a finite number")
	}
	if len(e.On) > 0 {
		for k, iv := range e.On {
			if len(iv) != 2 || !finite(iv...) {
				return fmt.Errorf("on[%d] must be [start_s, end_s], two finite numbers", k)
			}
			if iv[0] < 0 || iv[1] > dur+1e-12 || iv[0] >= iv[1] {
				return fmt.Errorf("on[%d] [%g, %g] must satisfy 0 ≤ start < end ≤ %g", k, iv[0], iv[1], dur)
			}
			if k > 0 && iv[0] < e.On[k-1][1] {
				return fmt.Errorf("on[%d] starts at %g s, before on[%d] ends (%g s): intervals must increase and not overlap", k, iv[0], k-1, e.On[k-1][1])
			}
		}
		first, last := e.On[0][0], e.On[len(e.On)-1][1]
		if (e.StartS != 0 && e.StartS != first) || (e.EndS != 0 && e.EndS != last) {
			return fmt.Errorf("start_s %g / end_s %g disagree with the on intervals (%g to %g s): give one or the other", e.StartS, e.EndS, first, last)
		}
		e.StartS, e.EndS = first, last
	}
	if e.EndS == 0 {
		e.EndS = dur
	}
	if e.StartS < 0 || e.EndS > dur+1e-12 || e.StartS >= e.EndS {
		return fmt.Errorf("start_s %g / end_s %g must satisfy 0 ≤ start < end ≤ %g", e.StartS, e.EndS, dur)
	}
	nyq := fs / 2
	inBand := func(name string, f float64) error {
		if math.Abs(f) >= nyq {
			return fmt.Errorf("%s %g Hz outside ±fs/2 = ±%g Hz", name, f, nyq)
		}
		if a := ck.offset(f); math.Abs(a) >= nyq {
			return fmt.Errorf("%s %g Hz lies at %g Hz after the receiver clock offset (clock_ppm %g), outside ±fs/2 = ±%g Hz", name, f, a, ck.ppm, nyq)
		}
		return nil
	}
	if len(e.ChannelsHz) > 0 && e.Kind != KindPulsed {
		return fmt.Errorf("channels_hz is for pulsed emitters, not %s", e.Kind)
	}
	switch e.Kind {
	case KindCW:
		if len(e.Tones) == 0 {
			e.Tones = []Tone{{OffsetHz: e.OffsetHz, JNDB: e.JNDB}}
		}
		for _, t := range e.Tones {
			if !finite(t.OffsetHz) {
				return fmt.Errorf("tone offset_hz %g is not a finite number", t.OffsetHz)
			}
			if err := inBand("tone offset_hz", t.OffsetHz); err != nil {
				return err
			}
			if !(t.JNDB >= -60 && t.JNDB <= 60) {
				return fmt.Errorf("tone at %g Hz: jn_db %g out of range [−60, 60]", t.OffsetHz, t.JNDB)
			}
		}
	case KindSwept:
		if e.Shape == "" {
			e.Shape = "up"
		}
		if e.Shape != "up" && e.Shape != "down" && e.Shape != "triangle" {
			return fmt.Errorf("shape %q is not up, down or triangle", e.Shape)
		}
		if math.Abs(e.LowHz) > maxSweepHz || math.Abs(e.HighHz) > maxSweepHz {
			return fmt.Errorf("low_hz %g / high_hz %g beyond ±%g Hz from the centre", e.LowHz, e.HighHz, maxSweepHz)
		}
		if !(e.HighHz > e.LowHz) {
			return errors.New("high_hz must be above low_hz")
		}
		if !(e.PeriodS >= 10/fs) {
			return fmt.Errorf("period_s %g shorter than 10 samples", e.PeriodS)
		}
		lo, hi := ck.offset(e.LowHz), ck.offset(e.HighHz)
		if hi <= -nyq || lo >= nyq {
			return fmt.Errorf("sweep %g to %g Hz lies entirely outside ±fs/2 = ±%g Hz: the recording would hold nothing of it", lo, hi, nyq)
		}
		// A sweep that leaves the band must still dwell a few samples in
		// it each time it crosses, or it is not a chirp any more.
		dwell := sweepInBandFraction(lo, hi, fs) * e.PeriodS * fs
		if e.Shape == "triangle" {
			dwell /= 2 // it crosses the band twice per period
		}
		if sweepLeavesBand(lo, hi, fs) && dwell < 8 {
			return fmt.Errorf("sweep %g to %g Hz every %g s crosses the ±%g Hz band in %.2g samples per period; it needs at least 8", lo, hi, e.PeriodS, nyq, dwell)
		}
	case KindPulsed:
		if e.Pulse == "" {
			e.Pulse = "gaussian_pair"
		}
		switch e.Pulse {
		case "gaussian_pair":
			if e.PairSpacingS == 0 {
				e.PairSpacingS = DMEPairSpacing
			}
			e.WidthS = dmeHalfAmplitudeWidth()
		case "rect":
			if !(e.WidthS >= 1/fs) {
				return fmt.Errorf("width_s %g shorter than one sample", e.WidthS)
			}
		default:
			return fmt.Errorf("pulse %q is not gaussian_pair or rect", e.Pulse)
		}
		if !(e.PRIS > e.WidthS+e.PairSpacingS) {
			return fmt.Errorf("pri_s %g must exceed the pulse (pair) length", e.PRIS)
		}
		if len(e.ChannelsHz) > 0 {
			if e.OffsetHz != 0 {
				return fmt.Errorf("offset_hz %g and channels_hz both given: a hopping emitter's carrier is on its channels", e.OffsetHz)
			}
			if len(e.ChannelsHz) > 256 {
				return fmt.Errorf("%d channels_hz, at most 256", len(e.ChannelsHz))
			}
			for k, f := range e.ChannelsHz {
				if !finite(f) {
					return fmt.Errorf("channels_hz[%d] %g is not a finite number", k, f)
				}
				if err := inBand(fmt.Sprintf("channels_hz[%d]", k), f); err != nil {
					return err
				}
			}
		} else if err := inBand("offset_hz", e.OffsetHz); err != nil {
			return err
		}
	case KindWidebandNoise:
		if !(e.FloorRiseDB > 0) {
			return errors.New("floor_rise_db must be > 0")
		}
		e.JNDB = 10 * math.Log10(math.Pow(10, e.FloorRiseDB/10)-1)
		e.BandwidthHz = fs
	case KindNarrowbandNoise:
		if !(e.BandwidthHz > 0) || math.Abs(e.OffsetHz)+e.BandwidthHz/2 > nyq {
			return fmt.Errorf("band %g ± %g Hz must lie within ±fs/2", e.OffsetHz, e.BandwidthHz/2)
		}
		if a := ck.offset(e.OffsetHz); math.Abs(a)+e.BandwidthHz/2 > nyq {
			return fmt.Errorf("band %g ± %g Hz lies at %g Hz after the receiver clock offset (clock_ppm %g), beyond ±fs/2", e.OffsetHz, e.BandwidthHz/2, a, ck.ppm)
		}
	default:
		return fmt.Errorf("kind %q is not one of cw, swept, pulsed, wideband_noise, narrowband_noise", e.Kind)
	}
	if e.JNDB > 60 || e.JNDB < -60 {
		return fmt.Errorf("jn_db %g out of range [−60, 60]", e.JNDB)
	}
	return nil
}

// dmeHalfAmplitudeWidth is the width at half amplitude of exp(−α t²/2):
// 2·sqrt(2 ln 2/α) (3.51 µs for α = 4.5e11).
func dmeHalfAmplitudeWidth() float64 { return 2 * math.Sqrt(2*math.Ln2/DMEAlpha) }

// finite reports whether every value is a number other than ±Inf.
func finite(vs ...float64) bool {
	for _, v := range vs {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return false
		}
	}
	return true
}

// ScaleDuration sets every capture's duration to d seconds and scales
// every time within it by the same factor: emitters' start_s, end_s and on
// intervals, and the front end's gain steps, sample drops and gaps (sample
// counts are kept). Timed parts of the scenario's front end are copied
// into each capture's own front end, scaled by its factor. For short test
// runs and `synth --duration`; Normalize then checks that everything
// still fits.
func (s *Scenario) ScaleDuration(d float64) {
	var shared *FrontEnd
	if s.FrontEnd != nil {
		shared = s.FrontEnd
		fe := *s.FrontEnd
		fe.GainSteps, fe.SampleDrops, fe.Gaps = nil, nil, nil
		s.FrontEnd = &fe
	}
	for i := range s.Captures {
		c := &s.Captures[i]
		old := c.DurationS
		if old == 0 {
			old = 0.25
		}
		f := d / old
		c.DurationS = d
		for j := range c.Spoofers {
			c.Spoofers[j].StartS *= f
			c.Spoofers[j].EndS *= f
		}
		for j := range c.Emitters {
			e := &c.Emitters[j]
			e.StartS *= f
			e.EndS *= f
			on := make([][]float64, len(e.On))
			for k, iv := range e.On {
				on[k] = make([]float64, len(iv))
				for m, v := range iv {
					on[k][m] = v * f
				}
			}
			if e.On != nil {
				e.On = on
			}
		}
		own := FrontEnd{}
		if c.FrontEnd != nil {
			own = *c.FrontEnd
		}
		if shared != nil {
			if own.GainSteps == nil {
				own.GainSteps = shared.GainSteps
			}
			if own.SampleDrops == nil {
				own.SampleDrops = shared.SampleDrops
			}
			if own.Gaps == nil {
				own.Gaps = shared.Gaps
			}
		}
		if own.GainSteps == nil && own.SampleDrops == nil && own.Gaps == nil {
			continue
		}
		steps := slices.Clone(own.GainSteps)
		for k := range steps {
			steps[k].AtS *= f
		}
		drops := slices.Clone(own.SampleDrops)
		for k := range drops {
			drops[k].AtS *= f
		}
		gaps := slices.Clone(own.Gaps)
		for k := range gaps {
			gaps[k].AtS *= f
		}
		own.GainSteps, own.SampleDrops, own.Gaps = steps, drops, gaps
		c.FrontEnd = &own
	}
}
