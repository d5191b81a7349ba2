package detect

import "math"

// L1 is the GPS L1 carrier frequency (154 · 10.23 MHz, IS-GPS-200).
const L1 = 1575.42e6

// caChipPeriod is the C/A code chip period Tc = 1/1.023 MHz.
const caChipPeriod = 1 / 1.023e6

// caPSD is the C/A code's normalized power spectral density, the BPSK(1)
// spectrum G_s(f) = Tc·sinc²(π f Tc) (unit power over infinite bandwidth).
func caPSD(f float64) float64 {
	x := math.Pi * f * caChipPeriod
	if x == 0 {
		return caChipPeriod
	}
	s := math.Sin(x) / x
	return caChipPeriod * s * s
}

// caInBand is η = ∫ G_s(f) df over ±βr/2, the C/A power fraction a front
// end of two-sided bandwidth βr keeps (0.903 for 2.046 MHz; REFERENCES §7),
// by Simpson's rule.
func caInBand(beta float64) float64 {
	const n = 4000
	h := beta / n
	s := caPSD(-beta/2) + caPSD(beta/2)
	for i := 1; i < n; i++ {
		w := 2.0
		if i%2 == 1 {
			w = 4
		}
		s += w * caPSD(-beta/2+float64(i)*h)
	}
	return s * h / 3
}

// CN0Degradation predicts the C/N0 loss of a GPS L1 C/A receiver from an
// interference of power j whose spectrum is given per bin (excess powers,
// any scale; bin i at RF offset rfOffset[i] from L1), against thermal
// noise of density n0, for a front end of two-sided bandwidth beta:
//
//	κ = ∫_{−βr/2}^{βr/2} G_l(f) G_s(f) df   (spectral separation coefficient,
//	                                         Betz 2001)
//	(C/N0)_eff = C·η / (N0·η + J·κ)  →  loss = 10·log10(1 + J·κ/(N0·η)),
//
// with G_l the interference spectrum normalized to unit power and
// η = ∫ G_s over the band. For white noise across the band this gives
// exactly the floor rise; for a CW at f0, κ = G_s(f0). The smooth sinc²
// model ignores the C/A code's line spectrum, on which an unlucky CW can
// do up to ~9 dB more harm (REFERENCES §1.3).
func CN0Degradation(excess []float64, rfOffset func(i int) float64, j, n0, beta float64) float64 {
	var tot, kappa float64
	for i, e := range excess {
		if e <= 0 {
			continue
		}
		tot += e
		if f := rfOffset(i); math.Abs(f) <= beta/2 {
			kappa += e * caPSD(f)
		}
	}
	if tot == 0 || n0 <= 0 {
		return 0
	}
	kappa /= tot
	return 10 * math.Log10(1+j*kappa/(n0*caInBand(beta)))
}
