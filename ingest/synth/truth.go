package synth

import (
	"fmt"
	"math"

	"quietband/ingest/gpsca"
)

// response is what the passband does to power at offset f (Hz): |H(f)|²,
// and to white noise: Σ|h|² (both 1 without a passband). |H|² is
// tabulated on 4097 points across the band and interpolated linearly
// (the response varies on a scale of taps/16 points at most).
type response struct {
	pb    *passbandFIR
	fs    float64
	table []float64
}

const responsePoints = 4096

func newResponse(pb *passbandFIR, fs float64) response {
	r := response{pb: pb, fs: fs}
	if pb != nil {
		r.table = make([]float64, responsePoints+1)
		for k := range r.table {
			a := pb.amplitude(float64(k)/responsePoints - 0.5)
			r.table[k] = a * a
		}
	}
	return r
}

func (r response) power(f float64) float64 {
	if r.pb == nil {
		return 1
	}
	x := (f/r.fs + 0.5) * responsePoints
	x = max(0, min(responsePoints, x))
	k := min(int(x), responsePoints-1)
	w := x - float64(k)
	return r.table[k]*(1-w) + r.table[k+1]*w
}

func (r response) noise() float64 {
	if r.pb == nil {
		return 1
	}
	return r.pb.powerGain()
}

// weighted is ∫S(f − f0)·|H(f)|² df / ∫S(f − f0) df over the band ±fs/2,
// S a power spectrum shape: the power gain for a signal of that spectrum
// centred at f0 (a midpoint sum on 2048 points).
func (r response) weighted(f0 float64, shape func(f float64) float64) float64 {
	if r.pb == nil {
		return 1
	}
	const k = 2048
	var num, den float64
	for j := 0; j < k; j++ {
		f := (float64(j)+0.5)/k*r.fs - r.fs/2
		w := shape(f - f0)
		num += w * r.power(f)
		den += w
	}
	if den == 0 {
		return r.power(f0)
	}
	return num / den
}

// apparentEmitter fills the apparent_* fields of te: offsets through the
// clock ck and an inversion (inv = −1), J/N through the passband pb (nil:
// none) and, for a sweep that leaves the band, the anti-alias response.
// J/N after the passband is the emitter's power through |H|² over the
// thermal noise's, σ²·Σ|h|² (DESIGN: both in the capture bandwidth).
func apparentEmitter(te *TruthEmitter, fs float64, ck clock, inv float64, pb *passbandFIR) {
	r := newResponse(pb, fs)
	g := r.noise()
	j := math.Pow(10, te.JNDB/10)
	ptr := func(v float64) *float64 { return &v }
	var jn float64
	switch te.Kind {
	case KindCW:
		for k := range te.Tones {
			t := &te.Tones[k]
			off := ck.offset(t.OffsetHz)
			p := math.Pow(10, t.JNDB/10) * r.power(off) / g
			t.ApparentOffsetHz, t.ApparentJNDB = ptr(inv*off), ptr(10*math.Log10(p))
			jn += p
		}
	case KindSwept:
		lo, hi := ck.offset(te.LowHz), ck.offset(te.HighHz)
		// The mean over the sweep's own samples: a
		// sweep that crosses the band in a few samples on a grid that
		// repeats every period is not its integral.
		c := chirp{low: lo, high: hi, period: te.PeriodS, shape: te.Shape}
		shaped := sweepLeavesBand(lo, hi, fs)
		// Whole periods when the period is a whole number of samples
		// (then the pattern repeats exactly), else up to 2¹⁸ samples.
		k := max(1, min(te.EndSample-te.StartSample, 1<<18))
		if p := te.PeriodS * fs; p == math.Trunc(p) && p <= 1<<20 {
			k = int64(p) * max(1, k/int64(p))
		}
		var sum float64
		for i := int64(0); i < k; i++ {
			f := c.freq(float64(i) / fs)
			w := 1.0
			if shaped {
				a := antiAliasGain(f, fs)
				w = a * a
			}
			if w != 0 {
				sum += w * r.power(f)
			}
		}
		jn = j * sum / float64(k) / g
		shape := te.Shape
		if inv < 0 {
			lo, hi = -hi, -lo
			switch shape {
			case "up":
				shape = "down"
			case "down":
				shape = "up"
			}
		}
		te.ApparentLowHz, te.ApparentHighHz, te.ApparentShape = ptr(lo), ptr(hi), shape
		te.InBandLowHz, te.InBandHighHz = ptr(max(lo, -fs/2)), ptr(min(hi, fs/2))
	case KindPulsed:
		// The pulse's power spectrum: exp(−4π²f²/α) for the Gaussian
		// (REFERENCES §6), sinc²(f·w) for a rect of width w.
		shape := func(f float64) float64 { return math.Exp(-4 * math.Pi * math.Pi * f * f / DMEAlpha) }
		if te.Pulse == "rect" {
			shape = func(f float64) float64 {
				x := math.Pi * f * te.WidthS
				if x == 0 {
					return 1
				}
				return math.Pow(math.Sin(x)/x, 2)
			}
		}
		if len(te.ChannelsHz) > 0 {
			for _, f := range te.ChannelsHz {
				off := ck.offset(f)
				te.ApparentChannelsHz = append(te.ApparentChannelsHz, inv*off)
				jn += j * r.weighted(off, shape) / g
			}
			jn /= float64(len(te.ChannelsHz))
		} else {
			off := ck.offset(te.OffsetHz)
			te.ApparentOffsetHz = ptr(inv * off)
			jn = j * r.weighted(off, shape) / g
		}
	case KindWidebandNoise:
		jn = j // white, like the thermal noise: the passband changes both alike
	case KindNarrowbandNoise:
		off := ck.offset(te.OffsetHz)
		te.ApparentOffsetHz = ptr(inv * off)
		bw := te.BandwidthHz
		jn = j * r.weighted(off, func(f float64) float64 {
			if math.Abs(f) < bw/2 {
				return 1
			}
			return 0
		}) / g
	}
	te.ApparentJNDB = ptr(10 * math.Log10(jn))
}

// describeFrontEnd is the truth of capture i's front end fe: the
// configuration and what follows from it, its spurs and its faults.
func describeFrontEnd(s *Scenario, i int, fe *FrontEnd, ch *chain, n int64) (*TruthFrontEnd, []Tone, []TruthFault) {
	ptr := func(v float64) *float64 { return &v }
	tf := &TruthFrontEnd{FrontEnd: *fe, CaptureGainDB: fe.captureGainDB(i)}
	g := 1.0
	if ch.pb != nil {
		tf.PassbandDesign = ch.pb.describe()
		g = ch.pb.powerGain()
	}
	tf.NoisePowerGainDB = 10 * math.Log10(g)
	ck := fe.clock(s.CenterHz)
	if ck.eps != 0 {
		tf.ClockShiftL1Hz = ptr(gpsca.L1/(1+ck.eps) - gpsca.L1)
	}
	noise := s.NoiseDBFS + tf.CaptureGainDB + tf.NoisePowerGainDB
	if m := fe.IQImbalance; m != nil {
		gq := 1 + m.GainError
		noise += 10 * math.Log10((1+gq*gq)/2)
		phi := m.PhaseDeg * math.Pi / 180
		tf.ImageRejectionDB = ptr(10 * math.Log10((1+2*gq*math.Cos(phi)+gq*gq)/(1-2*gq*math.Cos(phi)+gq*gq)))
	}
	if q := ch.quant; q != nil {
		tq := &TruthQuantizer{Bits: q.bits, Mode: "mid_tread", Levels: q.levels(), SigmaFS: q.sigma,
			StepFS: q.step, ThresholdSigma: q.threshold, SigmaLSB: 1 / q.threshold}
		if q.midRise {
			tq.Mode = "mid_rise"
		}
		if q.bits == 2 {
			tq.MagnitudeOccupancy = ptr(math.Erfc(q.threshold / (ch.gain * math.Sqrt2)))
		}
		tf.Quantizer = tq
	} else {
		tf.NoiseDBFS = ptr(noise)
	}
	inv := 1.0
	if fe.inverted() {
		inv = -1
	}
	var spurs []Tone
	for _, sp := range fe.Spurs {
		t := sp
		t.ApparentOffsetHz, t.ApparentJNDB = ptr(inv*ck.offset(sp.OffsetHz)), ptr(sp.JNDB)
		spurs = append(spurs, t)
	}
	var faults []TruthFault
	nms := s.SampleRate / 1000
	for _, d := range ch.drops {
		detail := fmt.Sprintf("%d samples lost: every satellite's code phase jumps by %d chips' worth", d.k, d.k)
		if nms == math.Trunc(nms) {
			detail = fmt.Sprintf("%d samples lost: every satellite's code phase jumps by %d mod %d = %d samples (REFERENCES §12.7)",
				d.k, d.k, int64(nms), d.k%int64(nms))
		}
		faults = append(faults, TruthFault{Kind: FaultSampleDrop, StartSample: d.m, Samples: d.k, Detail: detail})
	}
	for _, gp := range ch.gaps {
		faults = append(faults, TruthFault{Kind: FaultGap, StartSample: gp.lo, Samples: gp.hi - gp.lo,
			Detail: fmt.Sprintf("%d samples replaced by zeros, timing kept", gp.hi-gp.lo)})
	}
	switch {
	case ch.dead:
		faults = append(faults, TruthFault{Kind: FaultDead, Samples: n, Detail: "every sample is zero"})
	case ch.stuck != nil:
		faults = append(faults, TruthFault{Kind: FaultStuck, Samples: n,
			Detail: fmt.Sprintf("every sample is (%g, %g)", real(*ch.stuck), imag(*ch.stuck))})
	}
	if ch.scale != 1 {
		faults = append(faults, TruthFault{Kind: FaultUnnormalised, Samples: n,
			Detail: fmt.Sprintf("floats written %g times full scale", ch.scale)})
	}
	return tf, spurs, faults
}
