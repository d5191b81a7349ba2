package detect

import "math"

// The footprint of a front end driven into its nonlinear range. A
// quantizer of one to three bits (the sign and magnitude bits of a GNSS
// front end, REFERENCES §12.3) or an ADC that clips turns a strong
// emitter into its harmonics and intermodulation products: I and Q are
// quantized apart, so a tone e^{jωt} comes out with conjugate odd
// harmonics at −3ω, +5ω, −7ω … (the odd harmonics of cos and sin, the
// amplitude of the k-th of a hard-limited carrier about 1/k of the
// fundamental's: −9.5 dB for the third, common practice), and two tones
// ω₁, ω₂ with products at m·ω₁ + n·ω₂ for odd m + n; all of them aliased
// into ±fs/2. Sweeps and pulses spread their products over the band.
//
// When a block is compressed (low-bit samples, or clipped ones), a finding
// weaker than a strong emitter (J/N at least compressedMinJN) is that
// emitter's product when it sits on one of the predicted product
// frequencies of the emitter's tones (orders up to 9), or, for a sweep,
// pulse train or noise band (and for the clipping bursts of a tone, which
// lift the floor and look like weak pulses), when it stands at least
// compressedSpreadDB below it (compressedBurstDB for a tone's bursts).

// compressedClip is the share of clipped samples from which a block is
// taken as compressed.
const compressedClip = 1e-3

// compressedMinJN is the J/N (linear) from which an emitter drives a
// compressed front end: it stands above the noise the quantizer's
// thresholds were set for.
const compressedMinJN = 1

// compressedSpreadDB is how far below a strong non-tone emitter a finding
// of a compressed block must stand to be taken for its spread products.
const compressedSpreadDB = 10.0

// compressedBurstDB is how far below a clipping tone its clipping bursts
// stand when they look like pulses (they hold the noise's peaks beyond
// full scale, a small part of the tone's power).
const compressedBurstDB = 15.0

// maxProductOrder is the highest order of product predicted.
const maxProductOrder = 9

// compressedFootprint reports whether, in a compressed block, strong
// emitter c accounts for finding x as one of its nonlinear products.
func compressedFootprint(c, x *Finding, g *grid) bool {
	if !g.compressed || c.JN < compressedMinJN || x.JN >= c.JN {
		return false
	}
	spread := x.JN <= c.JN*math.Pow(10, -compressedSpreadDB/10)
	if c.Class != ClassCW || len(c.Tones) == 0 {
		return spread
	}
	switch x.Class {
	case ClassWidebandNoise:
		// A tone at full scale clips on its noise's peaks: bursts over
		// the whole band, which lift the floor …
		return spread
	case ClassPulsed:
		// … and look like weak pulses: far weaker than the tone (a
		// pulse train the tone does not account for stands closer).
		return x.JN <= c.JN*math.Pow(10, -compressedBurstDB/10)
	case ClassSwept:
		// A tone's products are steady tones.
		return false
	}
	tol := 2 * g.bin
	for _, t := range c.Tones {
		// Harmonics k·f of each tone, k odd, with alternating sign
		// (−3, +5, −7, +9): where I and Q are quantized apart.
		for k := 3; k <= maxProductOrder; k += 2 {
			sign := 1.0
			if (k/2)%2 == 1 {
				sign = -1
			}
			if onAlias(sign*float64(k)*t.OffsetHz, x.LowHz-tol, x.HighHz+tol, g.fs) {
				return true
			}
		}
		// Two-tone products m·f₁ + n·f₂, m + n odd, |m| + |n| ≤ 5.
		for _, u := range c.Tones {
			if u.OffsetHz == t.OffsetHz {
				continue
			}
			for m := -4; m <= 4; m++ {
				for n := -4; n <= 4; n++ {
					o := abs(m) + abs(n)
					if o < 3 || o > 5 || (m+n)%2 == 0 {
						continue
					}
					if onAlias(float64(m)*t.OffsetHz+float64(n)*u.OffsetHz, x.LowHz-tol, x.HighHz+tol, g.fs) {
						return true
					}
				}
			}
		}
	}
	return false
}

// onAlias reports whether frequency f, folded into [−fs/2, fs/2), lies in
// lo..hi.
func onAlias(f, lo, hi, fs float64) bool {
	f = math.Mod(f+fs/2, fs)
	if f < 0 {
		f += fs
	}
	f -= fs / 2
	return f >= lo && f <= hi
}

func abs(v int) int {
	if v < 0 {
		return -v
	}
	return v
}

// limiterToneDB is the J/N from which a tone is taken to drive a
// compressed front end in limiterProduct: 10 dB, a tone whose peaks stand
// above the noise's (a weaker one is itself a product).
const limiterToneDB = 10

// limiterProduct reports whether, in a compressed block, pulsed finding x
// is what pulse train c makes of the block's steady tones: its pulses
// arrive with c's (samePulses, either way: the gap may hold noise peaks
// of its own besides c's pulses) and its carrier lies on a tone (a limiter
// or clipping ADC gives the stronger signal the output: while c's pulses
// are on, the tone's level drops, and the gap pulses at the tone's
// frequency with c's timing; Jones 1963, from memory) or on one of their
// intermodulation products m·f_tone + n·f_c (|m| + |n| odd, up to 5). The
// gap may stand above c itself, c's own level being compressed too, so
// no J/N order is asked of the gap; a product is weaker than c. c must
// not itself lie on a tone (a gap explains nothing).
func limiterProduct(c, x *Finding, g *grid) bool {
	if !g.compressed || c.Class != ClassPulsed || x.Class != ClassPulsed || c.Pulse == nil || x.Pulse == nil ||
		len(c.Pulse.Channels) > 0 || !samePulses(c.Pulse, x.Pulse, g.fs) && !samePulses(x.Pulse, c.Pulse, g.fs) {
		return false
	}
	tol := math.Max((x.HighHz-x.LowHz)/4, 2*g.bin)
	// c must be a train of its own, not a gap at a tone.
	ctol := math.Max((c.HighHz-c.LowHz)/4, 2*g.bin)
	for _, t := range g.tones {
		if math.Abs(c.OffsetHz-t.OffsetHz) <= ctol {
			return false
		}
	}
	for _, t := range g.tones {
		for m := -4; m <= 5; m++ {
			for n := -4; n <= 4; n++ {
				o := abs(m) + abs(n)
				if o == 0 || o > 5 || o%2 == 0 || (n == 0 && m != 1) {
					continue
				}
				f := float64(m)*t.OffsetHz + float64(n)*c.OffsetHz
				// A product (n ≠ 0) is weaker than the train.
				if onAlias(f, x.OffsetHz-tol, x.OffsetHz+tol, g.fs) && (n == 0 || x.JN < c.JN) {
					return true
				}
			}
		}
	}
	return false
}
