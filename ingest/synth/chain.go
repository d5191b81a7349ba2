package synth

import (
	"math"
	"slices"

	"quietband/ingest"
)

// chain is a FrontEnd at work on one capture. It pulls the sources' sum
// block by block on the analog stream's clock, and hands the writer the
// capture's samples; its memory is a few blocks and the filter's history,
// whatever the capture's length.
//
// Indices: stream index t counts samples of the analog stream from the
// capture's first sample (t = 0); the sources are run from t = −pre to
// streamLen + pre, so that the passband filter, centred, sees real input
// on both sides of every output. Capture index m counts the samples
// written; they differ after a sample drop.
type chain struct {
	fs             float64
	n              int64 // capture samples
	pre, streamLen int64 // filter half-length; stream samples the capture covers (n + dropped)

	gain  float64 // amplitude factor before the steps
	steps []gainAt
	fir   *firFilter
	pb    *passbandFIR // nil: no passband
	spurs []source

	iq               bool
	iqG, iqCos, iqSn float64
	dc               complex128
	quant            *quantizer
	inverted         bool

	drops []dropAt // capture index, samples
	gaps  []span   // capture indices
	dead  bool
	stuck *complex64
	scale float32

	isReal bool          // real samples at an IF
	real   *realIFWriter // made by run when isReal
}

type gainAt struct {
	t int64   // stream index
	g float64 // amplitude factor from t on (cumulative)
}

type dropAt struct{ m, k int64 }

// newChain prepares fe for capture i of s (n samples). sigma2 is the
// thermal noise power σ² (full-scale units).
func newChain(s *Scenario, i int, fe *FrontEnd, n int64, format ingest.Format, sigma2 float64) (*chain, error) {
	fs := s.SampleRate
	c := &chain{fs: fs, n: n, streamLen: n, gain: math.Pow(10, fe.captureGainDB(i)/20), inverted: fe.inverted(), scale: 1}
	steps := slices.Clone(fe.GainSteps)
	slices.SortStableFunc(steps, func(a, b GainStep) int {
		switch {
		case a.AtS < b.AtS:
			return -1
		case a.AtS > b.AtS:
			return 1
		}
		return 0
	})
	g := c.gain
	for _, st := range steps {
		g *= math.Pow(10, st.DB/20)
		c.steps = append(c.steps, gainAt{t: int64(math.Round(st.AtS * fs)), g: g})
	}
	noiseGain := 1.0
	if fe.Passband != nil {
		c.pb = designPassband(fe.Passband)
		c.fir = newFIRFilter(c.pb.taps)
		c.pre = int64(c.pb.delay)
		noiseGain = c.pb.powerGain()
	}
	for _, d := range fe.SampleDrops {
		c.drops = append(c.drops, dropAt{m: int64(math.Round(d.AtS * fs)), k: d.Samples})
		c.streamLen += d.Samples
	}
	for _, gp := range fe.Gaps {
		lo := int64(math.Round(gp.AtS * fs))
		c.gaps = append(c.gaps, span{lo, min(n, lo+gp.Samples)})
	}
	if m := fe.IQImbalance; m != nil {
		phi := m.PhaseDeg * math.Pi / 180
		c.iq, c.iqG, c.iqCos, c.iqSn = true, 1+m.GainError, math.Cos(phi), math.Sin(phi)
	}
	if v := fe.DCOffset; v != nil {
		c.dc = complex(v.I, v.Q)
	}
	if q := fe.Quantization; q != nil {
		// σ per component of the thermal noise after the passband at 0 dB;
		// on a real IF, σ of the real samples.
		sigma := math.Sqrt(sigma2 * noiseGain / 2)
		if format.IsReal() {
			var taps []complex128
			if c.pb != nil {
				taps = c.pb.taps
			}
			sigma = realIFNoiseSigma(sigma2, taps)
		}
		qz, err := newQuantizer(q, format, sigma)
		if err != nil {
			return nil, err
		}
		c.quant = qz
	}
	ck := fe.clock(s.CenterHz)
	for _, sp := range fe.Spurs {
		c.spurs = append(c.spurs, &tone{amp: math.Sqrt(math.Pow(10, sp.JNDB/10) * sigma2 * noiseGain),
			cyclesPerSample: ck.offset(sp.OffsetHz) / fs, on: span{0, c.streamLen}})
	}
	c.dead = fe.Dead != nil && *fe.Dead
	if v := fe.Stuck; v != nil {
		st := complex(float32(v.I), float32(v.Q))
		c.stuck = &st
	}
	if u := fe.UnnormalisedScale; u != nil {
		c.scale = float32(*u)
	}
	// A real format: one ADC on the real IF, where the offset,
	// quantization, stuck value and scale act (realIFWriter, made in run).
	c.isReal = format.IsReal()
	return c, nil
}

// captureIndex maps stream index t to the capture index where it is
// written, or, for a dropped sample, where the drop is.
func (c *chain) captureIndex(t int64) int64 {
	var dropped int64
	for _, d := range c.drops {
		at := d.m + dropped // stream index of the drop's first lost sample
		if t < at {
			break
		}
		if t < at+d.k {
			return d.m
		}
		dropped += d.k
	}
	return min(t-dropped, c.n)
}

// run streams the sources through the chain into w.
func (c *chain) run(srcs []source, w *ingest.Writer, s *Scenario) error {
	write := w.Write
	if c.isReal {
		rw := newRealIFWriter(w, s.RealIF.conversion(), 2*s.SampleRate)
		rw.dc, rw.quant, rw.scale, rw.dead = real(c.dc), c.quant, c.scale, c.dead
		if c.stuck != nil {
			v := real(*c.stuck)
			rw.stuck = &v
		}
		c.real = rw
		write = rw.write
	}
	in := make([]complex64, blockSamples)
	out := make([]complex64, 0, blockSamples)
	var m int64                // capture samples emitted
	t := int64(0)              // stream index of the next filtered sample
	skip := 2 * c.pre          // filter outputs before stream index 0
	gen := -c.pre              // stream index of the next source sample
	end := c.streamLen + c.pre // generate up to here
	step, g := 0, c.gain       // next gain step, amplitude factor now
	drop, inDrop := 0, int64(0)
	flush := func() error {
		c.finish(out, m-int64(len(out)))
		err := write(out)
		out = out[:0]
		return err
	}
	for gen < end {
		blk := in[:min(int64(len(in)), end-gen)]
		clear(blk)
		for _, s := range srcs {
			s.add(blk, gen)
		}
		// Gain, on the stream's clock.
		if c.gain != 1 || len(c.steps) > 0 {
			for j := range blk {
				for step < len(c.steps) && c.steps[step].t <= gen+int64(j) {
					g, step = c.steps[step].g, step+1
				}
				blk[j] *= complex(float32(g), 0)
			}
		}
		gen += int64(len(blk))
		if c.fir != nil {
			c.fir.filter(blk, blk)
		}
		o := blk
		if skip > 0 {
			d := min(skip, int64(len(o)))
			o, skip = o[d:], skip-d
		}
		for _, s := range c.spurs {
			s.add(o, t)
		}
		c.sample(o)
		for len(o) > 0 {
			if inDrop > 0 {
				d := min(inDrop, int64(len(o)))
				o, inDrop, t = o[d:], inDrop-d, t+d
				continue
			}
			if drop < len(c.drops) && c.drops[drop].m == m {
				inDrop = c.drops[drop].k
				drop++
				continue
			}
			lim := min(int64(len(o)), c.n-m, int64(cap(out)-len(out)))
			if drop < len(c.drops) {
				lim = min(lim, c.drops[drop].m-m)
			}
			if lim == 0 { // the capture is complete: the rest is the filter's tail
				break
			}
			out = append(out, o[:lim]...)
			o, m, t = o[lim:], m+lim, t+lim
			if len(out) == cap(out) {
				if err := flush(); err != nil {
					return err
				}
			}
		}
	}
	if len(out) > 0 {
		if err := flush(); err != nil {
			return err
		}
	}
	if c.real != nil {
		if err := c.real.close(); err != nil {
			return err
		}
		return c.real.flush()
	}
	return nil
}

// sample applies the per-sample stages in place: I/Q imbalance, DC
// offset, quantization, spectrum inversion.
func (c *chain) sample(x []complex64) {
	dc, quant := c.dc, c.quant
	if c.isReal {
		dc, quant = 0, nil // on the real samples
	}
	if !c.iq && dc == 0 && quant == nil && !c.inverted {
		return
	}
	for j, v := range x {
		re, im := float64(real(v)), float64(imag(v))
		if c.iq {
			im = c.iqG * (im*c.iqCos - re*c.iqSn)
		}
		re, im = re+real(dc), im+imag(dc)
		var r, q float32
		if quant != nil {
			r, q = quant.value(quant.level(re)), quant.value(quant.level(im))
		} else {
			r, q = float32(re), float32(im)
		}
		if c.inverted {
			q = -q
		}
		x[j] = complex(r, q)
	}
}

// finish applies the capture-index stages to out, whose first sample is
// capture sample m0: gaps, dead, stuck, unnormalised scale.
func (c *chain) finish(out []complex64, m0 int64) {
	for _, g := range c.gaps {
		d, _ := g.clip(out, m0)
		clear(d)
	}
	switch {
	case c.dead:
		clear(out)
	case c.isReal: // stuck and scale act on the real samples
		return
	case c.stuck != nil:
		for j := range out {
			out[j] = *c.stuck
		}
	}
	if c.scale != 1 {
		for j := range out {
			out[j] *= complex(c.scale, 0)
		}
	}
}
