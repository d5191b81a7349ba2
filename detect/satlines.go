package detect

import (
	"math"
	"sync"

	"gonum.org/v1/gonum/dsp/fourier"

	"quietband/ingest/gpsca"
)

// The satellites' own footprint. A GPS L1 C/A signal is a 1023-chip code
// repeated every millisecond, so its spectrum is a comb of lines 1 kHz
// apart (times 1 + f_D/L1 for Doppler f_D), line k carrying the fraction
//
//	a_k = |C_{k mod 1023}|²/1023² · sinc²(πk/1023)
//
// of the signal's power, C_m = Σ_n c[n]·e^{−j2πmn/1023} the code's DFT and
// the sinc² the rectangular chip (Kaplan & Hegarty 2006 §9 for the line
// spectrum; the strongest lines stand about 21–24 dB below the signal,
// from memory; Σ_k a_k = 1 by Parseval). The 50 bit/s data spreads each
// line by ±50 Hz, inside one FFT bin. Under a strong sky (satellites up to
// 50–53 dB-Hz) a few lines near the band centre reach a narrow-band
// detector's threshold, and Doppler moves them from capture to capture,
// so no baseline can absorb them. The satellites the meter measured
// predict them: a tone is theirs when its power is at most 4× (the scatter
// of one block's estimate and of the C/N0) what their lines put within
// the ±maxToneHalfWidth bins the CW detector sums.

var (
	lineOnce  [gpsca.MaxPRN + 1]sync.Once
	lineShare [gpsca.MaxPRN + 1][]float64
)

// caLineShare returns |C_m|²/1023² for m = 0…1022 for prn (nil for a PRN
// without a C/A code).
func caLineShare(prn int) []float64 {
	if prn < 1 || prn > gpsca.MaxPRN {
		return nil
	}
	lineOnce[prn].Do(func() {
		code, err := gpsca.Code(prn)
		if err != nil {
			return
		}
		n := gpsca.CodeLength
		x := make([]complex128, n)
		for i, c := range code {
			x[i] = complex(float64(c), 0)
		}
		spec := fourier.NewCmplxFFT(n).Coefficients(nil, x)
		a := make([]float64, n)
		for m, v := range spec {
			a[m] = (real(v)*real(v) + imag(v)*imag(v)) / float64(n*n)
		}
		lineShare[prn] = a
	})
	return lineShare[prn]
}

// satLineJN is the J/N (over the noise power in the capture bandwidth,
// fs·N0) that the measured satellites' code lines put in lo..hi (offsets
// from the capture centre, Hz). l1 is L1's offset from the centre;
// inverted says the capture's spectrum is mirrored.
func satLineJN(sats []Satellite, l1, fs, lo, hi float64, inverted bool) float64 {
	if inverted {
		lo, hi = -hi, -lo
	}
	const lineHz = 1e3 // code epochs per second
	var sum float64
	for _, s := range sats {
		a := caLineShare(s.PRN)
		if a == nil {
			continue
		}
		f0 := l1 + s.DopplerHz
		step := lineHz * (1 + s.DopplerHz/gpsca.L1)
		cn0 := math.Pow(10, s.CN0DBHz/10)
		k0, k1 := int(math.Ceil((lo-f0)/step)), int(math.Floor((hi-f0)/step))
		for k := k0; k <= k1; k++ {
			m := ((k % gpsca.CodeLength) + gpsca.CodeLength) % gpsca.CodeLength
			x := math.Pi * float64(k) / gpsca.CodeLength
			sinc := 1.0
			if x != 0 {
				sinc = math.Sin(x) / x
			}
			sum += cn0 / fs * a[m] * sinc * sinc
		}
	}
	return sum
}

// explainSatelliteLines drops from the capture's CW events the tones that
// the measured satellites' code lines account for (see above), and the
// events left without tones.
func (t *tracker) explainSatelliteLines(sats []Satellite, l1 float64, inverted bool) {
	if len(sats) == 0 {
		return
	}
	bin := t.fs / float64(t.cfg.FFTSize)
	w := float64(maxToneHalfWidth) * bin
	kept := t.events[:0]
	for _, e := range t.events {
		if e.class != ClassCW {
			kept = append(kept, e)
			continue
		}
		tones := e.tones[:0]
		for _, tn := range e.tones {
			if math.Pow(10, tn.JNDB/10) <= 4*satLineJN(sats, l1, t.fs, tn.OffsetHz-w, tn.OffsetHz+w, inverted) {
				continue
			}
			tones = append(tones, tn)
		}
		if len(tones) > 0 {
			e.retone(tones, bin)
			kept = append(kept, e)
		}
	}
	t.events = kept
}
