package synth

import (
	"errors"
	"fmt"
	"math"
	"slices"

	"quietband/ingest"
)

// FrontEnd is the recorder's front end: what happens to the sum of
// everything the antenna delivers (thermal noise, satellites, emitters)
// before it reaches the file. Every part is optional; a nil part is ideal.
// The parts act in the order of a receiver chain (see chain):
//
//	gain (gain_db, drift, steps) → passband → front-end spurs → I/Q imbalance
//	→ DC offset → quantization → spectrum inversion → sample drops → gaps
//	→ dead / stuck / unnormalised.
//
// With real samples at an IF (Scenario.RealIF) the complex stream is
// turned into real samples after the gaps, and the DC offset,
// quantization, stuck value and scale act on those, as on one ADC.
//
// The receiver clock offset (clock_ppm) acts on frequencies where they are
// made (every carrier, code rate and emitter), not on the samples.
//
// Pointers tell "not given" from zero, so that a capture's front_end can
// override the scenario's part by part (mergeFrontEnd).
type FrontEnd struct {
	Passband    *Passband    `yaml:"passband,omitempty" json:"passband,omitempty"`
	DCOffset    *IQValue     `yaml:"dc_offset,omitempty" json:"dc_offset,omitempty"`
	IQImbalance *IQImbalance `yaml:"iq_imbalance,omitempty" json:"iq_imbalance,omitempty"`
	// Quantization replaces the format's own rounding by a low-bit ADC
	// (integer formats only).
	Quantization *Quantization `yaml:"quantization,omitempty" json:"quantization,omitempty"`
	// Spurs are the front end's own tones, in every capture: offset_hz from
	// the centre (moved by the clock offset like any RF frequency) and J/N
	// over the thermal noise after the passband at 0 dB gain.
	Spurs []Tone `yaml:"spurs,omitempty" json:"spurs,omitempty"`
	// GainDB is a fixed gain offset (dB) of every sample, noise included;
	// GainDriftDBPerCapture adds index·drift dB to capture index (0, 1,
	// 2, ...); GainSteps change the gain at given times within a capture.
	// There is no AGC: a quantizer set for 0 dB sees the changed level.
	GainDB                *float64   `yaml:"gain_db,omitempty" json:"gain_db,omitempty"`
	GainDriftDBPerCapture *float64   `yaml:"gain_drift_db_per_capture,omitempty" json:"gain_drift_db_per_capture,omitempty"`
	GainSteps             []GainStep `yaml:"gain_steps,omitempty" json:"gain_steps,omitempty"`
	// ClockPPM is the receiver reference's frequency error in parts per
	// million, positive when it runs fast. The LO and the ADC share it
	// (REFERENCES §12.5), so a signal at RF frequency f appears at
	// f/(1+ε) − fc (ε = ppm·10⁻⁶) on the recording's frequency axis, about
	// −ppm·f: every satellite's Doppler moves by −ppm·L1 (−1575.42 Hz per
	// ppm), an emitter or spur at offset o by −ppm·(fc + o); and the code
	// rate becomes R/(1+ε), so code Doppler stays carrier Doppler/1540.
	// Timing (emitter keying, pulse repetition, sweep period) is left on
	// the nominal clock: a 10⁻⁵ effect at 10 ppm.
	ClockPPM *float64 `yaml:"clock_ppm,omitempty" json:"clock_ppm,omitempty"`
	// SpectrumInverted conjugates the output (Q negated): every offset and
	// Doppler changes sign, code Doppler does not (REFERENCES §12.2).
	SpectrumInverted *bool `yaml:"spectrum_inverted,omitempty" json:"spectrum_inverted,omitempty"`
	// SampleDrops remove samples from the stream, as a recorder losing a
	// USB buffer: the capture keeps its length and holds the sky k samples
	// later from there on, so every satellite's code phase jumps by the
	// same (k mod N_ms) samples (REFERENCES §12.7).
	SampleDrops []SampleDrop `yaml:"sample_drops,omitempty" json:"sample_drops,omitempty"`
	// Gaps replace samples by zeros, as a driver that zero-fills a lost
	// buffer: timing is kept.
	Gaps []Gap `yaml:"gaps,omitempty" json:"gaps,omitempty"`
	// Dead writes all zeros; Stuck writes one constant value (full-scale
	// units) for every sample.
	Dead  *bool    `yaml:"dead,omitempty" json:"dead,omitempty"`
	Stuck *IQValue `yaml:"stuck,omitempty" json:"stuck,omitempty"`
	// UnnormalisedScale multiplies every sample of a float capture (cf32,
	// cf64) by this factor, as a converter that writes raw ADC counts as
	// floats far beyond the ±1 convention.
	UnnormalisedScale *float64 `yaml:"unnormalised_scale,omitempty" json:"unnormalised_scale,omitempty"`
}

// Passband is the front end's magnitude response across the capture band,
// applied as a linear-phase FIR (see designPassband). With u = f/fs in
// [−½, ½], in dB:
//
//	G(u) = tilt_db·u + ripple_db·sin(2π·ripple_cycles·(u + ½) + ripple_phase)
//	       + 20·log10 R(u) − G(0)
//
// R is 1 for |u| ≤ (1 − r)/2 and falls as a raised cosine to
// 10^(−rolloff_db/20) at |u| = ½, r = rolloff_fraction (the part of each
// half band, counted from its edge, that rolls off). Subtracting G(0)
// makes the gain at 0 Hz offset 0 dB.
type Passband struct {
	TiltDB          float64 `yaml:"tilt_db,omitempty" json:"tilt_db,omitempty"`
	RippleDB        float64 `yaml:"ripple_db,omitempty" json:"ripple_db,omitempty"`
	RippleCycles    float64 `yaml:"ripple_cycles,omitempty" json:"ripple_cycles,omitempty"`
	RipplePhaseDeg  float64 `yaml:"ripple_phase_deg,omitempty" json:"ripple_phase_deg,omitempty"`
	RolloffDB       float64 `yaml:"rolloff_db,omitempty" json:"rolloff_db,omitempty"`
	RolloffFraction float64 `yaml:"rolloff_fraction,omitempty" json:"rolloff_fraction,omitempty"`
	// Taps is the FIR length, odd; default 255.
	Taps int `yaml:"taps,omitempty" json:"taps,omitempty"`
}

// IQValue is a complex value given by its components.
type IQValue struct {
	I float64 `yaml:"i" json:"i"`
	Q float64 `yaml:"q" json:"q"`
}

// IQImbalance is a quadrature mixer's error: the Q arm has gain 1 + ε
// (GainError = ε) and a phase error φ (PhaseDeg) against the I arm,
//
//	I' = I,  Q' = (1+ε)·(Q·cos φ − I·sin φ),
//
// so a tone at +f leaves an image at −f whose power is 1/IRR of the
// tone's, IRR = (1 + 2g·cos φ + g²)/(1 − 2g·cos φ + g²), g = 1 + ε
// (REFERENCES §12.4).
type IQImbalance struct {
	GainError float64 `yaml:"gain_error" json:"gain_error"`
	PhaseDeg  float64 `yaml:"phase_deg" json:"phase_deg"`
}

// Quantization is a low-bit ADC with a fixed gain (no AGC), set so that
// the thermal noise after the passband at 0 dB gain, σ per component (I or
// Q), sits at a stated place on the quantizer. Step Δ is the spacing of the
// decision thresholds; ThresholdSigma = Δ/σ, SigmaLSB = σ/Δ (give one).
//
//   - Bits 1–4, and any width in an offset-binary format (cu8, cu16):
//     mid-rise, levels ±1, ±3, … ±(2^bits − 1) (the "sign and magnitude"
//     levels of MAX2769-style front ends, REFERENCES §12.3), thresholds at
//     0, ±Δ, ±2Δ, …; written as the odd codes ±1, ±3, … of a signed
//     format, or the codes next to mid-scale of an offset-binary one.
//     2 bits with ThresholdSigma 1 (the default) puts a fraction
//     erfc(1/√2) = 31.73 % of the samples on the magnitude bit.
//   - Bits 5 and up in a signed format: mid-tread, code = round(x/Δ),
//     clipped to [−2^(bits−1), 2^(bits−1) − 1]; SigmaLSB must be given
//     (e.g. 12 for an 8-bit front end with the noise at 12 LSB).
//
// Defaults of ThresholdSigma for 2, 3, 4 bits are the optimum steps of
// REFERENCES §12.3 [C]: 1.0 (the MAX2769 figure), 0.586, 0.335.
type Quantization struct {
	Bits           int     `yaml:"bits" json:"bits"`
	ThresholdSigma float64 `yaml:"threshold_sigma,omitempty" json:"threshold_sigma,omitempty"`
	SigmaLSB       float64 `yaml:"sigma_lsb,omitempty" json:"sigma_lsb,omitempty"`
}

// GainStep changes the gain by DB from AtS seconds into the capture on
// (steps add up). The time is the analog stream's: a sample drop earlier
// in the capture moves the step AtS·fs − dropped samples into the file.
type GainStep struct {
	AtS float64 `yaml:"at_s" json:"at_s"`
	DB  float64 `yaml:"db" json:"db"`
}

// SampleDrop removes Samples samples from the stream at AtS seconds into
// the capture.
type SampleDrop struct {
	AtS     float64 `yaml:"at_s" json:"at_s"`
	Samples int64   `yaml:"samples" json:"samples"`
}

// Gap writes Samples zeros from AtS seconds into the capture on.
type Gap struct {
	AtS     float64 `yaml:"at_s" json:"at_s"`
	Samples int64   `yaml:"samples" json:"samples"`
}

// defaultTaps is the passband FIR length when Passband.Taps is 0.
const defaultTaps = 255

// mergeFrontEnd returns base with every part that over gives replaced by
// over's (nil when both are nil). The result shares no slices with
// either.
func mergeFrontEnd(base, over *FrontEnd) *FrontEnd {
	if base == nil && over == nil {
		return nil
	}
	var m FrontEnd
	if base != nil {
		m = *base
	}
	if o := over; o != nil {
		pick := func(dst **float64, src *float64) {
			if src != nil {
				*dst = src
			}
		}
		if o.Passband != nil {
			m.Passband = o.Passband
		}
		if o.DCOffset != nil {
			m.DCOffset = o.DCOffset
		}
		if o.IQImbalance != nil {
			m.IQImbalance = o.IQImbalance
		}
		if o.Quantization != nil {
			m.Quantization = o.Quantization
		}
		if o.Spurs != nil {
			m.Spurs = o.Spurs
		}
		pick(&m.GainDB, o.GainDB)
		pick(&m.GainDriftDBPerCapture, o.GainDriftDBPerCapture)
		if o.GainSteps != nil {
			m.GainSteps = o.GainSteps
		}
		pick(&m.ClockPPM, o.ClockPPM)
		if o.SpectrumInverted != nil {
			m.SpectrumInverted = o.SpectrumInverted
		}
		if o.SampleDrops != nil {
			m.SampleDrops = o.SampleDrops
		}
		if o.Gaps != nil {
			m.Gaps = o.Gaps
		}
		if o.Dead != nil {
			m.Dead = o.Dead
		}
		if o.Stuck != nil {
			m.Stuck = o.Stuck
		}
		pick(&m.UnnormalisedScale, o.UnnormalisedScale)
	}
	m.Spurs = slices.Clone(m.Spurs)
	m.GainSteps = slices.Clone(m.GainSteps)
	m.SampleDrops = slices.Clone(m.SampleDrops)
	m.Gaps = slices.Clone(m.Gaps)
	return &m
}

// check validates fe for capture index i of s, dur seconds long (+Inf for
// the scenario's own front end, whose times are checked per capture).
// Errors start with the offending key, to follow "front_end.".
func (fe *FrontEnd) check(s *Scenario, i int, dur float64) error {
	fs := s.SampleRate
	format, _ := ingest.ParseFormat(s.Format)
	if p := fe.Passband; p != nil {
		if p.Taps == 0 {
			p.Taps = defaultTaps
		}
		switch {
		case !finite(p.TiltDB, p.RippleDB, p.RippleCycles, p.RipplePhaseDeg, p.RolloffDB, p.RolloffFraction):
			return errors.New("passband: every value must be a finite number")
		case p.Taps < 15 || p.Taps > 4095 || p.Taps%2 == 0:
			return fmt.Errorf("passband.taps %d must be odd, 15 to 4095", p.Taps)
		case math.Abs(p.TiltDB) > 30:
			return fmt.Errorf("passband.tilt_db %g out of range [−30, 30]", p.TiltDB)
		case p.RippleDB < 0 || p.RippleDB > 10:
			return fmt.Errorf("passband.ripple_db %g out of range [0, 10]", p.RippleDB)
		case p.RippleCycles < 0 || p.RippleCycles > float64(p.Taps)/16:
			// The FIR resolves features about 16/taps of the band wide.
			return fmt.Errorf("passband.ripple_cycles %g out of range [0, taps/16 = %g]: a %d-tap filter cannot follow faster ripple", p.RippleCycles, float64(p.Taps)/16, p.Taps)
		case p.RolloffDB < 0 || p.RolloffDB > 80:
			return fmt.Errorf("passband.rolloff_db %g out of range [0, 80]", p.RolloffDB)
		case p.RolloffFraction < 0 || p.RolloffFraction > 0.5:
			return fmt.Errorf("passband.rolloff_fraction %g out of range [0, 0.5]", p.RolloffFraction)
		case p.RolloffDB > 0 && p.RolloffFraction == 0:
			return fmt.Errorf("passband.rolloff_db %g needs a rolloff_fraction > 0", p.RolloffDB)
		}
	}
	if v := fe.DCOffset; v != nil && !(finite(v.I, v.Q) && math.Abs(v.I) < 1 && math.Abs(v.Q) < 1) {
		return fmt.Errorf("dc_offset (%g, %g) must be finite and within ±1 full scale", v.I, v.Q)
	}
	if m := fe.IQImbalance; m != nil {
		if !finite(m.GainError, m.PhaseDeg) || math.Abs(m.GainError) >= 0.5 || math.Abs(m.PhaseDeg) >= 45 {
			return fmt.Errorf("iq_imbalance: gain_error %g must lie in (−0.5, 0.5) and phase_deg %g in (−45, 45)", m.GainError, m.PhaseDeg)
		}
	}
	if q := fe.Quantization; q != nil {
		if _, err := newQuantizer(q, format, 1); err != nil {
			return fmt.Errorf("quantization.%w", err)
		}
	}
	for k, sp := range fe.Spurs {
		if !finite(sp.OffsetHz, sp.JNDB) {
			return fmt.Errorf("spurs[%d]: offset_hz and jn_db must be finite numbers", k)
		}
		if a := fe.clock(s.CenterHz).offset(sp.OffsetHz); math.Abs(sp.OffsetHz) >= fs/2 || math.Abs(a) >= fs/2 {
			return fmt.Errorf("spurs[%d]: offset_hz %g (%g after the clock offset) outside ±fs/2 = ±%g Hz", k, sp.OffsetHz, a, fs/2)
		}
		if sp.JNDB < -60 || sp.JNDB > 60 {
			return fmt.Errorf("spurs[%d]: jn_db %g out of range [−60, 60]", k, sp.JNDB)
		}
	}
	if g := fe.GainDB; g != nil && !(finite(*g) && math.Abs(*g) <= 40) {
		return fmt.Errorf("gain_db %g out of range [−40, 40]", *g)
	}
	if g := fe.GainDriftDBPerCapture; g != nil && !(finite(*g) && math.Abs(*g) <= 10) {
		return fmt.Errorf("gain_drift_db_per_capture %g out of range [−10, 10]", *g)
	}
	if g := fe.captureGainDB(i); math.Abs(g) > 40 {
		return fmt.Errorf("gain_db and gain_drift_db_per_capture give %g dB for capture index %d, beyond ±40 dB", g, i)
	}
	inCapture := func(at float64) bool { return at >= 0 && (math.IsInf(dur, 1) || at < dur) }
	for k, st := range fe.GainSteps {
		if !finite(st.AtS, st.DB) || !inCapture(st.AtS) || math.Abs(st.DB) > 40 {
			return fmt.Errorf("gain_steps[%d]: at_s %g must lie in [0, %g) and db %g in [−40, 40]", k, st.AtS, dur, st.DB)
		}
	}
	if c := fe.ClockPPM; c != nil && !(finite(*c) && math.Abs(*c) <= 200) {
		return fmt.Errorf("clock_ppm %g out of range [−200, 200]", *c)
	}
	for k, d := range fe.SampleDrops {
		if !finite(d.AtS) || !(d.AtS > 0) || !inCapture(d.AtS) || d.Samples < 1 || float64(d.Samples) > 10*fs {
			return fmt.Errorf("sample_drops[%d]: at_s %g must lie in (0, %g) and samples %d in [1, 10·fs]", k, d.AtS, dur, d.Samples)
		}
		if k > 0 && d.AtS <= fe.SampleDrops[k-1].AtS {
			return fmt.Errorf("sample_drops[%d]: at_s %g not after sample_drops[%d] (%g s)", k, d.AtS, k-1, fe.SampleDrops[k-1].AtS)
		}
	}
	n := int64(math.Round(dur * fs))
	for k, g := range fe.Gaps {
		if !finite(g.AtS) || !inCapture(g.AtS) || g.Samples < 1 {
			return fmt.Errorf("gaps[%d]: at_s %g must lie in [0, %g) and samples %d be ≥ 1", k, g.AtS, dur, g.Samples)
		}
		if !math.IsInf(dur, 1) && int64(math.Round(g.AtS*fs))+g.Samples > n {
			return fmt.Errorf("gaps[%d]: %d samples from %g s run past the capture's end (%d samples)", k, g.Samples, g.AtS, n)
		}
	}
	if format.IsReal() {
		// One ADC on a real IF: no quadrature arms, one value per sample.
		if fe.IQImbalance != nil {
			return fmt.Errorf("iq_imbalance: %s is real-valued (one ADC at an IF, no quadrature mixer): there is no I/Q imbalance", format)
		}
		if v := fe.DCOffset; v != nil && v.Q != 0 {
			return fmt.Errorf("dc_offset.q %g: %s is real-valued; its ADC offset is dc_offset.i alone", v.Q, format)
		}
		if v := fe.Stuck; v != nil && v.Q != 0 {
			return fmt.Errorf("stuck.q %g: %s is real-valued; a stuck ADC holds stuck.i alone", v.Q, format)
		}
	}
	if fe.Dead != nil && *fe.Dead && fe.Stuck != nil {
		return errors.New("dead and stuck both given: a capture is one or the other")
	}
	if v := fe.Stuck; v != nil && !(finite(v.I, v.Q) && math.Abs(v.I) <= 1 && math.Abs(v.Q) <= 1) {
		return fmt.Errorf("stuck (%g, %g) must be finite and within ±1 full scale", v.I, v.Q)
	}
	if u := fe.UnnormalisedScale; u != nil {
		if !(finite(*u) && *u > 1 && *u <= 1e9) {
			return fmt.Errorf("unnormalised_scale %g must lie in (1, 1e9]", *u)
		}
		if !isFloat(format) {
			return fmt.Errorf("unnormalised_scale needs a float format (cf32_le, cf64_le, rf32_le, ...), not %s", format)
		}
		if fe.Quantization != nil {
			return errors.New("unnormalised_scale and quantization both given: quantization needs an integer format, unnormalised floats a float one")
		}
	}
	return nil
}

// captureGainDB is the gain of capture index i before any step: gain_db +
// i·gain_drift_db_per_capture.
func (fe *FrontEnd) captureGainDB(i int) float64 {
	var g float64
	if fe.GainDB != nil {
		g += *fe.GainDB
	}
	if fe.GainDriftDBPerCapture != nil {
		g += float64(i) * *fe.GainDriftDBPerCapture
	}
	return g
}

func (fe *FrontEnd) inverted() bool {
	return fe != nil && fe.SpectrumInverted != nil && *fe.SpectrumInverted
}

func isFloat(f ingest.Format) bool {
	_, _, _, ok := intContainer(f)
	return !ok
}

// intContainer gives an integer format's component width in bits, its
// full-scale divisor and whether it is offset binary (real formats as
// their complex twins); ok is false for float formats.
func intContainer(f ingest.Format) (width int, scale float64, offset, ok bool) {
	name := f.String()
	if f.IsReal() {
		twin, err := ingest.ParseFormat("c" + name[1:])
		if err != nil {
			return 0, 0, false, false
		}
		f = twin
	}
	switch f {
	case ingest.CI8:
		return 8, 128, false, true
	case ingest.CU8:
		return 8, 127.5, true, true
	case ingest.CI16LE, ingest.CI16BE:
		return 16, 32768, false, true
	case ingest.CU16LE, ingest.CU16BE:
		return 16, 32767.5, true, true
	case ingest.CI32LE, ingest.CI32BE:
		return 32, 2147483648, false, true
	case ingest.CU32LE, ingest.CU32BE:
		return 32, 2147483647.5, true, true
	}
	return 0, 0, false, false
}

// clock maps RF frequencies to where a receiver whose reference is ppm
// parts per million fast puts them: f_RF/(1+ε) − fc on the recording's
// axis (the LO runs at fc·(1+ε), the ADC at fs·(1+ε) but the samples are
// read at fs). See FrontEnd.ClockPPM.
type clock struct {
	ppm, eps, fc float64
}

func (fe *FrontEnd) clock(fc float64) clock {
	if fe == nil || fe.ClockPPM == nil || *fe.ClockPPM == 0 {
		return clock{fc: fc}
	}
	return clock{ppm: *fe.ClockPPM, eps: *fe.ClockPPM * 1e-6, fc: fc}
}

// offset is where an emitter at offset f from the centre appears; f
// itself without a clock error.
func (c clock) offset(f float64) float64 {
	if c.eps == 0 {
		return f
	}
	return (c.fc+f)/(1+c.eps) - c.fc
}

// carrier is where an RF frequency rf appears, as an offset from the
// centre.
func (c clock) carrier(rf float64) float64 {
	return rf/(1+c.eps) - c.fc
}

// rate scales a rate per second (chips/s, Hz) to one per nominal second:
// 1/(1+ε).
func (c clock) rate(r float64) float64 { return r / (1 + c.eps) }

// quantizer maps analog samples (full-scale units) to the codes of a
// low-bit ADC and back to the full-scale values that the format's encoder
// turns into exactly those codes.
type quantizer struct {
	bits        int
	midRise     bool
	step        float64 // Δ, full-scale units of the analog signal
	inv         float64 // 1/Δ
	maxLevel    float64 // mid-rise: 2^bits − 1; mid-tread: 2^(bits−1)
	codeToValue float64 // full-scale value of one code (1/scale)
	offsetCode  bool    // offset binary: value = (L/2)·codeToValue
	threshold   float64 // Δ/σ
	sigma       float64 // σ per component the step was set for
}

// defaultThreshold is Δ/σ for 2, 3 and 4 bits when none is given
// (REFERENCES §12.3 [C]: the MAX2769 figure T = σ for 2 bits, the
// optimum uniform steps 0.586σ and 0.335σ for 3 and 4).
var defaultThreshold = map[int]float64{2: 1.0, 3: 0.586, 4: 0.335}

// newQuantizer checks q against format and sets it for noise of σ per
// component. Errors name the key (after "quantization.").
func newQuantizer(q *Quantization, format ingest.Format, sigma float64) (*quantizer, error) {
	width, scale, offset, ok := intContainer(format)
	if !ok {
		return nil, fmt.Errorf("bits: quantization needs an integer format (ci8, cu8, ci16_le, ri8, ...); %s holds floats", format)
	}
	if q.Bits < 1 || q.Bits > width {
		return nil, fmt.Errorf("bits %d not in 1..%d (the width of %s)", q.Bits, width, format)
	}
	if !finite(q.ThresholdSigma, q.SigmaLSB) || q.ThresholdSigma < 0 || q.SigmaLSB < 0 {
		return nil, fmt.Errorf("threshold_sigma %g / sigma_lsb %g must be finite and ≥ 0", q.ThresholdSigma, q.SigmaLSB)
	}
	if q.ThresholdSigma != 0 && q.SigmaLSB != 0 {
		return nil, errors.New("threshold_sigma and sigma_lsb both given: they say the same (threshold_sigma = 1/sigma_lsb), give one")
	}
	if q.Bits > 24 {
		return nil, fmt.Errorf("bits %d: at most 24 (float64 steps)", q.Bits)
	}
	qz := &quantizer{bits: q.Bits, midRise: q.Bits <= 4 || offset, offsetCode: offset, codeToValue: 1 / scale, sigma: sigma}
	switch {
	case q.Bits == 1:
		if q.ThresholdSigma != 0 || q.SigmaLSB != 0 {
			return nil, errors.New("threshold_sigma: a 1-bit quantizer has only the threshold at 0; give neither threshold_sigma nor sigma_lsb")
		}
		qz.threshold = 1 // any step: only the sign matters
	case q.ThresholdSigma != 0:
		qz.threshold = q.ThresholdSigma
	case q.SigmaLSB != 0:
		qz.threshold = 1 / q.SigmaLSB
	case defaultThreshold[q.Bits] != 0:
		qz.threshold = defaultThreshold[q.Bits]
	default:
		return nil, fmt.Errorf("sigma_lsb: a %d-bit quantizer needs the noise level, e.g. sigma_lsb: 12", q.Bits)
	}
	if qz.threshold < 1e-6 || qz.threshold > 100 {
		return nil, fmt.Errorf("threshold_sigma %g (= 1/sigma_lsb) out of range [1e-6, 100]", qz.threshold)
	}
	qz.step = qz.threshold * sigma
	qz.inv = 1 / qz.step
	if qz.midRise {
		qz.maxLevel = math.Exp2(float64(q.Bits)) - 1
	} else {
		qz.maxLevel = math.Exp2(float64(q.Bits - 1))
	}
	return qz, nil
}

// level is the ADC output for the analog component x: an odd level
// 2·⌊x/Δ⌋ + 1 within ±(2^bits − 1) (mid-rise), or round(x/Δ) within
// [−2^(bits−1), 2^(bits−1) − 1] (mid-tread).
func (q *quantizer) level(x float64) float64 {
	if q.midRise {
		l := 2*math.Floor(x*q.inv) + 1
		return max(-q.maxLevel, min(q.maxLevel, l))
	}
	return max(-q.maxLevel, min(q.maxLevel-1, math.Round(x*q.inv)))
}

// value is the full-scale value the format encodes as level l's code:
// l itself as a signed code, or mid-scale + l/2 in offset binary.
func (q *quantizer) value(l float64) float32 {
	if q.offsetCode {
		return float32(l / 2 * q.codeToValue)
	}
	return float32(l * q.codeToValue)
}

// levels lists the output levels of a mid-rise quantizer of up to 4 bits
// (nil otherwise).
func (q *quantizer) levels() []int {
	if !q.midRise || q.bits > 4 {
		return nil
	}
	var out []int
	for l := -int(q.maxLevel); l <= int(q.maxLevel); l += 2 {
		out = append(out, l)
	}
	return out
}

// RealIF makes the recorder write real samples at an intermediate
// frequency, as an IF-sampling front end does (REFERENCES §12.1), in a
// real format (ri8, ri16_le, rf32_le, ...): the file's rate is twice the
// scenario's sample_rate (the complex rate the detectors analyse) and the
// band's centre lies at IFHz in the real signal, upright with a low-side
// LO (RF = LO + IF), inverted with a high-side one (RF = LO − IF,
// REFERENCES §12.2). The SigMF metadata states both (quietband:if_hz,
// quietband:lo_side), as package ingest reads them.
//
// The complex stream (with every front-end stage that acts on it) is
// interpolated to the file's rate by the half-band filter that package
// ingest decimates with (ingest.HalfBandTaps: zero insertion, gain 2,
// zero phase, so that complex sample n lands on file sample 2n) and
// mixed up: x[m] = Re{y[m]·e^{j2π·IF·m/fs_file}} (y conjugated for a
// high-side LO). A DC offset (dc_offset.i), the quantization, a stuck
// value and an unnormalised scale then act on the real samples, as on one
// ADC. Defaults: IFHz = fs_file/4 (the conversion without multiplications),
// LOSide "low". The truth's apparent values are those of the complex
// stream; ingest's conversion back to it rolls off the outer fifth of each
// side of the band (its half-band's transition), as with any such
// receiver.
type RealIF struct {
	IFHz   float64 `yaml:"if_hz,omitempty" json:"if_hz"`
	LOSide string  `yaml:"lo_side,omitempty" json:"lo_side"`
}

// conversion is r as package ingest describes it.
func (r *RealIF) conversion() ingest.IFConversion {
	side, _ := ingest.ParseLOSide(r.LOSide)
	return ingest.IFConversion{IFHz: r.IFHz, Side: side}
}

// ref returns a pointer to a copy of v, for the optional FrontEnd fields:
// FrontEnd{ClockPPM: ref(0.8)}.
func ref[T any](v T) *T { return &v }
