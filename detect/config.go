package detect

import (
	"fmt"
	"math"
)

// Config holds every detection setting; the zero value of a field means
// its default (see Defaults).
type Config struct {
	// FFTSize is the frame length N (a power of two); 0 chooses one for
	// the sample rate so that a frame lasts about 200 µs.
	FFTSize int `yaml:"fft_size" json:"fft_size"`
	// Frames is M, the number of non-overlapping frames per block; SK
	// is accumulated over one block. Default 64.
	Frames int `yaml:"frames" json:"frames"`
	// SKPfa is the false-alarm probability per bin and side of the SK
	// thresholds. Default 1e-3.
	SKPfa float64 `yaml:"sk_pfa" json:"sk_pfa"`
	// BinPfa is the false-alarm probability per bin and block of the
	// excess-power test against the noise floor. Default 1e-9.
	BinPfa float64 `yaml:"bin_pfa" json:"bin_pfa"`
	// WidebandRiseDB is the smallest floor rise over the baseline reported
	// as wideband noise. Default 0.5 dB.
	WidebandRiseDB float64 `yaml:"wideband_rise_db" json:"wideband_rise_db"`
	// PulsePfa is the false-alarm probability per sample of the pulse
	// envelope threshold. Default 1e-9.
	PulsePfa float64 `yaml:"pulse_pfa" json:"pulse_pfa"`
	// MinPulses is how many pulses a block needs before a pulse train is
	// reported. Default 2 (a 5 ms PRI leaves two or three pulses per block;
	// the event gathers them across blocks).
	MinPulses int `yaml:"min_pulses" json:"min_pulses"`
	// HoldBlocks is the hysteresis: an event stays open through this many
	// blocks without a finding before it closes. Default 2.
	HoldBlocks int `yaml:"hold_blocks" json:"hold_blocks"`
	// DCExcludeHz is the width around 0 Hz offset ignored by the detectors
	// (LO leakage of direct-conversion front ends). Default 2 bins.
	DCExcludeHz float64 `yaml:"dc_exclude_hz" json:"dc_exclude_hz"`
	// ReceiverBandwidthHz is the two-sided front-end bandwidth of the
	// nominal GPS L1 C/A receiver used for impact predictions. Default
	// 2.046 MHz.
	ReceiverBandwidthHz float64 `yaml:"receiver_bandwidth_hz" json:"receiver_bandwidth_hz"`
	// Masks are frequency ranges to ignore altogether (nothing in them is
	// reported), as offsets from the capture centre or absolute RF when
	// Absolute is set.
	Masks []Mask `yaml:"masks" json:"masks,omitempty"`
	// KnownEmitters are emitters the site accepts: their events are
	// reported and logged with known: true and raise no alert (see
	// KnownEmitter).
	KnownEmitters []KnownEmitter `yaml:"known_emitters" json:"known_emitters,omitempty"`
	// BaselineWeight is the weight of a new clean capture in the baseline
	// average once the baseline holds BaselineWarmup captures. Default 0.1.
	BaselineWeight float64 `yaml:"baseline_weight" json:"baseline_weight"`
	// CN0DropDB is the fall of the mean C/N0 of the site's satellites
	// below their baseline that raises a cn0_drop event. Default 3 dB.
	CN0DropDB float64 `yaml:"cn0_drop_db" json:"cn0_drop_db"`
	// BaselineWarmup is how many clean captures are averaged equally
	// before the baseline becomes an exponential average. Default 4.
	BaselineWarmup int `yaml:"baseline_warmup" json:"baseline_warmup"`
	// ImageRejectionDB is the image rejection the front end's I/Q paths
	// reach at least: a finding at −f this far or more below an emitter
	// at +f is taken for its image. Default 20 dB (REFERENCES §12.4).
	ImageRejectionDB float64 `yaml:"image_rejection_db" json:"image_rejection_db"`
	// ClockRangeHz is the one-sided receiver clock offset the satellite
	// search covers on top of the ±5 kHz geometric Doppler while a site's
	// clock offset is unknown. 0: 10 kHz (gnss.DefaultClockMaxHz, about
	// 6 ppm at L1; a 2 ppm TCXO gives 3.2 kHz, a recorder without one
	// more, REFERENCES §12.5); at most 45 kHz. Left out of the
	// fingerprint's JSON when 0, so records made with the default keep
	// their ids.
	ClockRangeHz float64 `yaml:"clock_range_hz" json:"clock_range_hz,omitempty"`
}

// Mask is a frequency range the detectors ignore.
type Mask struct {
	LowHz    float64 `yaml:"low_hz" json:"low_hz"`
	HighHz   float64 `yaml:"high_hz" json:"high_hz"`
	Absolute bool    `yaml:"absolute" json:"absolute"`
	Label    string  `yaml:"label" json:"label"`
}

// Defaults returns c with every zero field set to its default, for a
// capture at sample rate fs.
func (c Config) Defaults(fs float64) Config {
	if c.FFTSize == 0 {
		c.FFTSize = DefaultFFTSize(fs)
	}
	if c.Frames == 0 {
		c.Frames = 64
	}
	if c.SKPfa == 0 {
		c.SKPfa = 1e-3
	}
	if c.BinPfa == 0 {
		c.BinPfa = 1e-9
	}
	if c.WidebandRiseDB == 0 {
		c.WidebandRiseDB = 0.5
	}
	if c.PulsePfa == 0 {
		c.PulsePfa = 1e-9
	}
	if c.MinPulses == 0 {
		c.MinPulses = 2
	}
	if c.HoldBlocks == 0 {
		c.HoldBlocks = 2
	}
	if c.DCExcludeHz == 0 {
		c.DCExcludeHz = 2 * fs / float64(c.FFTSize)
	}
	if c.ReceiverBandwidthHz == 0 {
		c.ReceiverBandwidthHz = 2.046e6
	}
	if c.BaselineWeight == 0 {
		c.BaselineWeight = 0.1
	}
	if c.CN0DropDB == 0 {
		c.CN0DropDB = 3
	}
	if c.BaselineWarmup == 0 {
		c.BaselineWarmup = 4
	}
	if c.ImageRejectionDB == 0 {
		c.ImageRejectionDB = defaultImageRejectionDB
	}
	return c
}

// Validate reports the first setting out of range.
func (c Config) Validate() error {
	switch {
	case c.FFTSize < 64 || c.FFTSize > 65536 || c.FFTSize&(c.FFTSize-1) != 0:
		return fmt.Errorf("fft_size %d must be a power of two from 64 to 65536", c.FFTSize)
	case c.Frames < 16 || c.Frames > 4096:
		return fmt.Errorf("frames %d must be from 16 to 4096", c.Frames)
	case !(c.SKPfa > 0 && c.SKPfa < 0.1):
		return fmt.Errorf("sk_pfa %g must be in (0, 0.1)", c.SKPfa)
	case !(c.BinPfa > 0 && c.BinPfa < 0.1):
		return fmt.Errorf("bin_pfa %g must be in (0, 0.1)", c.BinPfa)
	case !(c.PulsePfa > 0 && c.PulsePfa < 0.1):
		return fmt.Errorf("pulse_pfa %g must be in (0, 0.1)", c.PulsePfa)
	case !(c.WidebandRiseDB > 0):
		return fmt.Errorf("wideband_rise_db %g must be > 0", c.WidebandRiseDB)
	case !(c.BaselineWeight > 0 && c.BaselineWeight <= 1):
		return fmt.Errorf("baseline_weight %g must be in (0, 1]", c.BaselineWeight)
	case !(c.ImageRejectionDB >= 6 && c.ImageRejectionDB <= 80):
		return fmt.Errorf("image_rejection_db %g must be from 6 to 80", c.ImageRejectionDB)
	case c.HoldBlocks < 0 || c.MinPulses < 2:
		return fmt.Errorf("hold_blocks must be ≥ 0 and min_pulses ≥ 2")
	case !(c.ClockRangeHz >= 0 && c.ClockRangeHz <= MaxClockRangeHz):
		return fmt.Errorf("clock_range_hz %g must be from 0 (the default, 10 kHz) to %g", c.ClockRangeHz, float64(MaxClockRangeHz))
	}
	for i, m := range c.Masks {
		if !(m.HighHz > m.LowHz) {
			return fmt.Errorf("masks[%d]: high_hz must be above low_hz", i)
		}
	}
	for i, k := range c.KnownEmitters {
		if err := k.validate(); err != nil {
			return fmt.Errorf("known_emitters[%d]: %w", i, err)
		}
	}
	return nil
}

// MaxClockRangeHz is the largest Config.ClockRangeHz: with the 5 kHz
// geometric range it keeps the search within the acquisition's ±50 kHz
// (gnss.AcqConfig).
const MaxClockRangeHz = 45000

// DefaultFFTSize is the power of two nearest to a 200 µs frame at fs,
// within 64..65536: 1024 at 4 MS/s, 2048 at 10 MS/s, 4096 at 20 MS/s.
func DefaultFFTSize(fs float64) int {
	n := int(math.Exp2(math.Round(math.Log2(fs * 200e-6))))
	return min(max(n, 64), 65536)
}
