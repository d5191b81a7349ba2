package synth

import (
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"time"

	"quietband/ingest"
	"quietband/ingest/gpsca"
)

// TruthExt is the extension of the truth sidecar written beside a capture.
const TruthExt = ".truth.json"

// Truth is what a synthesized capture contains, exactly.
type Truth struct {
	Scenario    string           `json:"scenario"`
	Site        string           `json:"site"`
	Capture     string           `json:"capture"` // data (raw) or metadata (SigMF) file name
	Format      string           `json:"format"`
	SampleRate  float64          `json:"sample_rate_hz"`
	CenterHz    float64          `json:"center_hz"`
	Start       time.Time        `json:"start"`
	Samples     int64            `json:"samples"`
	NoiseDBFS   float64          `json:"noise_dbfs"` // σ² in dBFS
	N0DBFSPerHz float64          `json:"n0_dbfs_hz"` // N0 = σ²/fs
	Clipped     int64            `json:"clipped"`    // samples saturated when written
	Satellites  []TruthSatellite `json:"satellites"` // C/N0 after attenuation
	Emitters    []TruthEmitter   `json:"emitters"`
	// FrontEnd is the capture's front end (the scenario's, with the
	// capture's overrides) and what follows from it; nil for an ideal one.
	FrontEnd *TruthFrontEnd `json:"front_end,omitempty"`
	// FrontEndSpurs are the front end's own tones: not emitters.
	FrontEndSpurs []Tone `json:"front_end_spurs,omitempty"`
	// Spoofers are the capture's sources of false signals, with every
	// signal they sent; Multipath its satellites' reflected copies.
	Spoofers  []TruthSpoofer `json:"spoofers,omitempty"`
	Multipath []TruthPath    `json:"multipath,omitempty"`
	// Faults are the recorder's faults in this capture, in capture samples.
	Faults []TruthFault `json:"faults,omitempty"`
	// For real samples at an IF (RealIF): the file's rate (twice
	// sample_rate_hz, the complex rate analysed; Samples counts complex
	// samples, the file holds twice as many), the IF and the LO side.
	FileSampleRate float64 `json:"file_sample_rate_hz,omitempty"`
	IFHz           float64 `json:"if_hz,omitempty"`
	LOSide         string  `json:"lo_side,omitempty"`
}

// The apparent_* fields of the truth say what the recording holds, after
// the receiver's clock offset, a spectrum inversion and the passband; they
// are written for every capture that uses a front end, a keyed, wide-swept
// or hopping emitter or a Doppler rate, and are absent otherwise, where
// they equal the configured values.

// TruthSatellite is a satellite as written.
type TruthSatellite struct {
	Satellite
	// ApparentDopplerHz is the Doppler at the first sample on the
	// recording's axis: (L1 + f_D)/(1+ε) − L1, negated when the spectrum
	// is inverted (REFERENCES §12.2, §12.5).
	ApparentDopplerHz *float64 `json:"apparent_doppler_hz,omitempty"`
	// ApparentCarrierHz is where the carrier sits, from the centre.
	ApparentCarrierHz *float64 `json:"apparent_carrier_hz,omitempty"`
	// ApparentCodeDopplerChipsS is the code rate minus 1.023 MHz on the
	// recording's clock: apparent Doppler/1540, never inverted.
	ApparentCodeDopplerChipsS *float64 `json:"apparent_code_doppler_chips_s,omitempty"`
	// ApparentDopplerRateHzS is the Doppler rate on the recording's axis.
	ApparentDopplerRateHzS *float64 `json:"apparent_doppler_rate_hz_s,omitempty"`
}

// TruthEmitter is an emitter with its sample span resolved.
type TruthEmitter struct {
	Emitter
	StartSample int64 `json:"start_sample"`
	EndSample   int64 `json:"end_sample"` // exclusive
	// Intervals are the on intervals of a keyed emitter, in capture samples.
	Intervals []Interval `json:"intervals,omitempty"`
	// ApparentJNDB is the interference power over the noise power, both
	// after the passband (and, for a sweep leaving the band, the
	// anti-alias response), in the capture bandwidth, while on; for
	// pulses the in-pulse peak, for hopping pulses the mean over channels.
	ApparentJNDB *float64 `json:"apparent_jn_db,omitempty"`
	// ApparentOffsetHz is the centre offset (pulsed, noise bands) on the
	// recording's axis.
	ApparentOffsetHz *float64 `json:"apparent_offset_hz,omitempty"`
	// ApparentLowHz, ApparentHighHz and ApparentShape are a sweep's span
	// and shape on the recording's axis (an inversion turns up into down);
	// InBandLowHz and InBandHighHz the part of that span inside ±fs/2.
	ApparentLowHz  *float64 `json:"apparent_low_hz,omitempty"`
	ApparentHighHz *float64 `json:"apparent_high_hz,omitempty"`
	ApparentShape  string   `json:"apparent_shape,omitempty"`
	InBandLowHz    *float64 `json:"in_band_low_hz,omitempty"`
	InBandHighHz   *float64 `json:"in_band_high_hz,omitempty"`
	// ApparentChannelsHz are a hopping emitter's channels on the
	// recording's axis.
	ApparentChannelsHz []float64 `json:"apparent_channels_hz,omitempty"`
}

// Interval is one on interval of a keyed emitter.
type Interval struct {
	StartS      float64 `json:"start_s"`
	EndS        float64 `json:"end_s"`
	StartSample int64   `json:"start_sample"`
	EndSample   int64   `json:"end_sample"` // exclusive
}

// TruthFrontEnd is the front end of one capture, as configured, and what
// follows from it.
type TruthFrontEnd struct {
	FrontEnd
	// CaptureGainDB is gain_db + index·gain_drift_db_per_capture.
	CaptureGainDB float64 `json:"capture_gain_db"`
	// PassbandDesign says how the passband FIR was made.
	PassbandDesign string `json:"passband_design,omitempty"`
	// NoisePowerGainDB is the passband's gain for white noise, 10·log10 Σ|h|².
	NoisePowerGainDB float64 `json:"noise_power_gain_db"`
	// NoiseDBFS is the thermal noise power written, without quantization:
	// noise_dbfs + capture gain + noise power gain, plus
	// 10·log10((1 + (1+ε)²)/2) for an I/Q gain error ε; absent with
	// quantization (see Quantizer).
	NoiseDBFS *float64 `json:"noise_after_front_end_dbfs,omitempty"`
	// ClockShiftL1Hz is where the clock offset moves L1: L1/(1+ε) − L1.
	ClockShiftL1Hz *float64 `json:"clock_shift_l1_hz,omitempty"`
	// ImageRejectionDB is the I/Q imbalance's IRR (REFERENCES §12.4).
	ImageRejectionDB *float64        `json:"image_rejection_db,omitempty"`
	Quantizer        *TruthQuantizer `json:"quantizer,omitempty"`
}

// TruthQuantizer is the quantizer as set for this capture.
type TruthQuantizer struct {
	Bits int `json:"bits"`
	// Mode is "mid_rise" (odd levels ±1, ±3, …) or "mid_tread".
	Mode string `json:"mode"`
	// Levels are the codes written (mid-rise, up to 4 bits), as signed
	// levels; an offset-binary format writes mid-scale + level/2.
	Levels []int `json:"levels,omitempty"`
	// SigmaFS is the noise σ per component the step was set for (full
	// scale, before the gain), StepFS the step Δ, ThresholdSigma = Δ/σ,
	// SigmaLSB = σ/Δ.
	SigmaFS        float64 `json:"sigma_fs"`
	StepFS         float64 `json:"step_fs"`
	ThresholdSigma float64 `json:"threshold_sigma"`
	SigmaLSB       float64 `json:"sigma_lsb"`
	// MagnitudeOccupancy is, for 2 bits, the expected fraction of
	// components on the magnitude bit (|level| = 3) for the thermal noise
	// alone at this capture's gain: erfc(Δ/(σ·g·√2)) (REFERENCES §12.3).
	MagnitudeOccupancy *float64 `json:"magnitude_occupancy,omitempty"`
}

// Fault kinds of TruthFault.
const (
	FaultSampleDrop   = "sample_drop"
	FaultGap          = "gap"
	FaultDead         = "dead"
	FaultStuck        = "stuck"
	FaultUnnormalised = "unnormalised"
)

// TruthFault is one recorder fault: Samples samples from capture sample
// StartSample (a sample drop: Samples lost before StartSample; a gap:
// Samples zeros; dead, stuck, unnormalised: the whole capture).
type TruthFault struct {
	Kind        string `json:"kind"`
	StartSample int64  `json:"start_sample"`
	Samples     int64  `json:"samples"`
	Detail      string `json:"detail"`
}

// blockSamples is how many samples are generated and written at a time:
// memory stays at a few blocks whatever the capture length.
const blockSamples = 1 << 16

// Write synthesizes every capture of s into dir and returns their truths.
// SigMF captures are written data first and metadata last.
func Write(s *Scenario, dir string) ([]Truth, error) {
	if err := s.Normalize(); err != nil {
		return nil, err
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, err
	}
	var out []Truth
	for i := range s.Captures {
		t, err := WriteCapture(s, i, dir)
		if err != nil {
			return out, err
		}
		out = append(out, t)
	}
	return out, nil
}

// rawExt is the file extension for raw captures of format f.
func rawExt(f ingest.Format) string {
	switch f {
	case ingest.CI16LE:
		return ".ci16"
	case ingest.CF32LE:
		return ".cf32"
	}
	return "." + f.String()
}

// WriteCapture synthesizes capture i of s (already normalized) into dir.
func WriteCapture(s *Scenario, i int, dir string) (Truth, error) {
	c := s.Captures[i]
	format, _ := ingest.ParseFormat(s.Format)
	fs := s.SampleRate
	n := int64(math.Round(c.DurationS * fs))
	start := s.Start.Add(time.Duration(c.OffsetS * float64(time.Second)))
	truth := Truth{Scenario: s.Name, Site: s.Site, Format: format.String(), SampleRate: fs,
		CenterHz: s.CenterHz, Start: start, Samples: n, NoiseDBFS: s.NoiseDBFS,
		N0DBFSPerHz: s.NoiseDBFS - 10*math.Log10(fs)}

	fe := mergeFrontEnd(s.FrontEnd, c.FrontEnd)
	if s.RealIF != nil && fe == nil {
		fe = &FrontEnd{} // real samples are made by the chain
	}
	var ch *chain
	if fe != nil {
		var err error
		if ch, err = newChain(s, i, fe, n, format, math.Pow(10, s.NoiseDBFS/10)); err != nil {
			return truth, fmt.Errorf("capture %s: front_end.quantization.%w", c.Name, err)
		}
	}
	sources, err := buildSources(s, i, n, ch, fe, &truth)
	if err != nil {
		return truth, fmt.Errorf("capture %s: %w", c.Name, err)
	}

	var w *ingest.Writer
	base := filepath.Join(dir, c.Name)
	if s.Raw {
		truth.Capture = c.Name + rawExt(format)
		w, err = ingest.CreateRaw(base+rawExt(format), format)
	} else {
		truth.Capture = c.Name + ingest.MetaExt
		h := ingest.SigMFHeader{Format: format, SampleRate: fs,
			CenterHz: s.CenterHz, HasCenter: true, Start: start,
			Description: fmt.Sprintf("synthesized: scenario %s, site %s (quietband synth)", s.Name, s.Site)}
		if s.RealIF != nil {
			h.SampleRate, h.IF = 2*fs, s.RealIF.conversion()
		}
		w, err = ingest.CreateSigMF(base, h)
	}
	if err != nil {
		return truth, err
	}
	if s.RealIF != nil {
		truth.FileSampleRate, truth.IFHz, truth.LOSide = 2*fs, s.RealIF.IFHz, s.RealIF.LOSide
	}
	if ch != nil {
		err = ch.run(sources, w, s)
	} else {
		buf := make([]complex64, blockSamples)
		for n0 := int64(0); n0 < n && err == nil; n0 += blockSamples {
			blk := buf[:min(int64(blockSamples), n-n0)]
			clear(blk)
			for _, src := range sources {
				src.add(blk, n0)
			}
			err = w.Write(blk)
		}
	}
	if err != nil {
		w.Close()
		return truth, err
	}
	truth.Clipped = w.Clipped()
	// The truth goes down before the metadata that makes the capture
	// visible to a watcher.
	tb, _ := json.MarshalIndent(truth, "", "  ")
	if err := ingest.WriteFileAtomic(base+TruthExt, append(tb, '\n')); err != nil {
		w.Close()
		return truth, err
	}
	if err := w.Close(); err != nil {
		return truth, err
	}
	if s.Raw {
		// Give raw files a modification time matching their end, so that
		// the reader's default start time (mtime − duration) is the truth.
		end := start.Add(time.Duration(float64(n) / fs * float64(time.Second)))
		os.Chtimes(base+rawExt(format), end, end)
	}
	return truth, nil
}

// usesNewOptions reports whether capture c needs the apparent_* truth: a
// keyed, wide-swept or hopping emitter or a Doppler rate (a front end is
// checked apart).
func usesNewOptions(c Capture, fs float64) bool {
	for _, sat := range c.Satellites {
		if sat.DopplerRateHzS != 0 {
			return true
		}
	}
	for _, e := range c.Emitters {
		if len(e.On) > 0 || len(e.ChannelsHz) > 0 || (e.Kind == KindSwept && sweepLeavesBand(e.LowHz, e.HighHz, fs)) {
			return true
		}
	}
	return len(c.Spoofers) > 0 || c.Multipath != nil
}

// buildSources makes the sources of capture i, each with its own seeded
// random stream so that captures are deterministic for a seed. With a
// front end (ch non-nil) they run on the chain's stream indices, from
// −ch.pre; without one, from 0 as they always did. Sources that did not
// exist before the front-end model draw from streams of their own
// (newRNG), so the old ones keep their numbers.
func buildSources(s *Scenario, i int, n int64, ch *chain, fe *FrontEnd, truth *Truth) ([]source, error) {
	c := s.Captures[i]
	fs := s.SampleRate
	sigma2 := math.Pow(10, s.NoiseDBFS/10)
	stream := uint64(0)
	rng := func() *rand.Rand {
		stream++
		return rand.New(rand.NewPCG(s.Seed^0x9e3779b97f4a7c15, uint64(i)<<20|stream))
	}
	newRNG := func(j int) *rand.Rand {
		return rand.New(rand.NewPCG(s.Seed^0x6a09e667f3bcc909, uint64(i)<<20|uint64(j)))
	}
	rich := fe != nil || usesNewOptions(c, fs)
	ck := fe.clock(s.CenterHz)
	inv := 1.0
	if fe.inverted() {
		inv = -1
	}
	streamLen, pre := n, int64(0)
	if ch != nil {
		streamLen, pre = ch.streamLen, ch.pre
	}
	capIdx := func(t int64) int64 { return t }
	if ch != nil {
		capIdx = ch.captureIndex
	}
	all := span{0, n}
	if ch != nil {
		all = span{-pre, streamLen + pre}
	}
	srcs := []source{newGaussian(rng(), sigma2, all)}
	var auth []authentic // for the copies of spoofers and multipath
	for _, sat := range c.Satellites {
		code, err := gpsca.Code(sat.PRN)
		if err != nil {
			return nil, err
		}
		cn0 := sat.CN0DBHz - c.AttenuationDB
		r := rng()
		amp := math.Sqrt(math.Pow(10, cn0/10) * sigma2 / fs)
		ts := TruthSatellite{Satellite: sat}
		ts.CN0DBHz = cn0
		if !rich {
			bits := make([]int8, int(c.DurationS*50)+2)
			for k := range bits {
				bits[k] = int8(1 - 2*r.IntN(2))
			}
			srcs = append(srcs, &satellite{
				amp:             amp,
				code:            code,
				bits:            bits,
				chip0:           gpsca.WrapChips(sat.CodePhaseChips),
				chipsPerSample:  gpsca.CodeRate(sat.DopplerHz) / fs,
				cyclesPerSample: (gpsca.L1 - s.CenterHz + sat.DopplerHz) / fs,
				phase0:          2 * math.Pi * r.Float64(),
			})
		} else {
			// Bits for the whole stream, the filter's lead-in included.
			bits := make([]int8, int(float64(streamLen+2*pre)/fs*50)+3)
			for k := range bits {
				bits[k] = int8(1 - 2*r.IntN(2))
			}
			srcs = append(srcs, newMovingSatellite(amp, code, bits, sat, fs, ck, 2*math.Pi*r.Float64()))
			auth = append(auth, authentic{sat: sat, bits: bits, cn0: cn0})
			sc := 1 + ck.eps
			dop := inv * (ck.carrier(gpsca.L1+sat.DopplerHz) + s.CenterHz - gpsca.L1)
			if ck.eps == 0 {
				dop = inv * sat.DopplerHz
			}
			car := inv * ck.carrier(gpsca.L1+sat.DopplerHz)
			code := ck.rate(gpsca.CodeRate(sat.DopplerHz)) - gpsca.ChipRate
			rate := inv * sat.DopplerRateHzS / (sc * sc)
			ts.ApparentDopplerHz, ts.ApparentCarrierHz, ts.ApparentCodeDopplerChipsS, ts.ApparentDopplerRateHzS = &dop, &car, &code, &rate
		}
		truth.Satellites = append(truth.Satellites, ts)
	}
	var pb *passbandFIR
	if ch != nil {
		pb = ch.pb
	}
	for j, e := range c.Emitters {
		hi := min(n, int64(math.Round(e.EndS*fs)))
		if streamLen != n && e.EndS >= c.DurationS {
			hi = streamLen // to the end of the capture, beyond the dropped samples
		}
		on := span{int64(math.Round(e.StartS * fs)), hi}
		te := TruthEmitter{Emitter: e, StartSample: capIdx(on.lo), EndSample: capIdx(on.hi)}
		te.Tones = slices.Clone(e.Tones)
		var keys []span
		for _, iv := range e.On {
			k := span{int64(math.Round(iv[0] * fs)), min(streamLen, int64(math.Round(iv[1]*fs)))}
			if iv[1] >= c.DurationS {
				k.hi = streamLen
			}
			keys = append(keys, k)
			te.Intervals = append(te.Intervals, Interval{StartS: iv[0], EndS: iv[1], StartSample: capIdx(k.lo), EndSample: capIdx(k.hi)})
		}
		r := rng()
		jn := math.Pow(10, e.JNDB/10) * sigma2
		var src []source
		switch e.Kind {
		case KindCW:
			for _, t := range e.Tones {
				src = append(src, &tone{amp: math.Sqrt(math.Pow(10, t.JNDB/10) * sigma2),
					cyclesPerSample: ck.offset(t.OffsetHz) / fs, phase0: 2 * math.Pi * r.Float64(), on: on})
			}
		case KindSwept:
			lo, hi := ck.offset(e.LowHz), ck.offset(e.HighHz)
			src = append(src, &chirp{amp: math.Sqrt(jn), low: lo, high: hi, period: e.PeriodS,
				fs: fs, shape: e.Shape, cycles: r.Float64(), on: on, shaped: sweepLeavesBand(lo, hi, fs)})
		case KindPulsed:
			p := &pulses{amp: math.Sqrt(jn), cyclesPerSample: ck.offset(e.OffsetHz) / fs, fs: fs,
				gaussian: e.Pulse == "gaussian_pair", width: e.WidthS, pri: e.PRIS, pair: e.PairSpacingS,
				first: e.PRIS * (0.25 + 0.5*r.Float64()), on: on}
			if len(e.ChannelsHz) > 0 {
				p.hopKey = newRNG(j).Uint64()
				for _, f := range e.ChannelsHz {
					p.channels = append(p.channels, ck.offset(f)/fs)
				}
			}
			src = append(src, p)
		case KindWidebandNoise:
			src = append(src, newGaussian(r, jn, on))
		case KindNarrowbandNoise:
			src = append(src, newBandNoise(r, fs, ck.offset(e.OffsetHz), e.BandwidthHz, jn, on))
		}
		for _, x := range src {
			if len(keys) > 0 {
				x = &keyed{src: x, on: keys}
			}
			srcs = append(srcs, x)
		}
		if rich {
			apparentEmitter(&te, fs, ck, inv, pb)
		}
		truth.Emitters = append(truth.Emitters, te)
	}
	if len(c.Spoofers) > 0 || c.Multipath != nil {
		srcs = append(srcs, spoofSources(c, auth, fs, sigma2, ck, newRNG, all, streamLen, n, capIdx, truth)...)
	}
	if fe != nil {
		truth.FrontEnd, truth.FrontEndSpurs, truth.Faults = describeFrontEnd(s, i, fe, ch, n)
	}
	return srcs, nil
}
