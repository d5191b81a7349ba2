package synth

import (
	"fmt"
	"math"
	"math/cmplx"
	"reflect"
	"strings"
	"testing"

	"go.yaml.in/yaml/v3"
	"gonum.org/v1/gonum/dsp/fourier"

	"quietband/ingest/gpsca"
)

// withFrontEnd is oneCapture with a scenario front end.
func withFrontEnd(format string, fs, noiseDBFS, dur float64, seed uint64, fe *FrontEnd, c Capture) Scenario {
	s := oneCapture(format, fs, noiseDBFS, dur, seed, c)
	s.FrontEnd = fe
	return s
}

// TestPassbandDesign: the window-method FIR follows its design target.
// Computed check: the realised zero-phase response A(u) (the DFT of the
// taps) against Passband.Desired on 4001 frequencies.
//
//   - Linear phase: h[D+m] = conj(h[D−m]) to rounding, and A(0) = 1.
//   - Where the target is smooth on the scale of the Kaiser window's main
//     lobe (flat part, tilt, ripple of ≤ taps/16 cycles): within 0.05 dB
//     (255 taps give 0.016 dB).
//   - Roll-off: within 0.5 dB up to 0.49·fs (255 taps: 0.2 dB for 20 dB
//     over 15 %, 0.49 dB for 40 dB over 20 %, where the response is near
//     −38 dB; 127 taps: 0.41 dB); the last 1 % of the band is left free: a tilted
//     target is discontinuous across ±fs/2, which the periodic FIR
//     response averages.
func TestPassbandDesign(t *testing.T) {
	t.Parallel()
	cases := []Passband{
		{TiltDB: 3, RippleDB: 0.5, RippleCycles: 3, RolloffDB: 20, RolloffFraction: 0.15},
		{TiltDB: -4, RippleDB: 1, RippleCycles: 5, RipplePhaseDeg: 40},
		{RolloffDB: 40, RolloffFraction: 0.2},
		{TiltDB: 6, RolloffDB: 10, RolloffFraction: 0.3, Taps: 127},
		{RippleDB: 0.3, RippleCycles: 15, Taps: 511},
	}
	for _, p := range cases {
		t.Run(fmt.Sprintf("%+v", p), func(t *testing.T) {
			if p.Taps == 0 {
				p.Taps = defaultTaps
			}
			f := designPassband(&p)
			if len(f.taps) != p.Taps || f.delay != (p.Taps-1)/2 {
				t.Fatalf("%d taps, delay %d", len(f.taps), f.delay)
			}
			for m := 0; m <= f.delay; m++ {
				if d := cmplx.Abs(f.taps[f.delay+m] - cmplx.Conj(f.taps[f.delay-m])); d > 1e-14 {
					t.Fatalf("taps not conjugate-symmetric about the centre at ±%d: %g", m, d)
				}
			}
			if a := f.amplitude(0); math.Abs(a-1) > 1e-12 {
				t.Errorf("A(0) = %.15f, want 1 (0 dB at 0 Hz)", a)
			}
			flatEdge := min(0.45, (1-p.RolloffFraction)/2)
			var worstFlat, worstRoll float64
			for k := -2000; k <= 2000; k++ {
				u := float64(k) / 4000
				e := math.Abs(20*math.Log10(math.Abs(f.amplitude(u))) - 20*math.Log10(p.Desired(u, 1)))
				switch {
				case math.Abs(u) <= flatEdge:
					worstFlat = max(worstFlat, e)
				case math.Abs(u) <= 0.49:
					worstRoll = max(worstRoll, e)
				}
			}
			t.Logf("worst error %.4f dB within ±%.3g·fs, %.3f dB in the roll-off to ±0.49·fs", worstFlat, flatEdge, worstRoll)
			if worstFlat > 0.05 {
				t.Errorf("realised response %.4f dB from the design within ±%.3g·fs, want ≤ 0.05 dB", worstFlat, flatEdge)
			}
			if worstRoll > 0.5 {
				t.Errorf("realised response %.3f dB from the design in the roll-off, want ≤ 0.5 dB", worstRoll)
			}
		})
	}
}

// expectedWelch is the expected value of welch(·, n, fs) for white noise of
// variance sigma2 through the FIR h [C: exact]. With y = h∗x, a segment's
// windowed DFT is Y_k = Σ_j x[j]·G_j(k), G_j(k) = Σ_m w[m]·h[m − j]·e^{−j2πkm/n},
// so E|Y_k|² = σ²·Σ_j |G_j(k)|² over the n + L − 1 inputs that reach the
// segment; scaled as welch scales.
func expectedWelch(h []complex128, n int, fs, sigma2 float64) []float64 {
	plan := fourier.NewCmplxFFT(n)
	var w2 float64
	win := make([]float64, n)
	for i := range win {
		win[i] = 0.5 - 0.5*math.Cos(2*math.Pi*float64(i)/float64(n))
		w2 += win[i] * win[i]
	}
	out := make([]float64, n)
	seq := make([]complex128, n)
	coef := make([]complex128, n)
	for j := -(len(h) - 1); j < n; j++ {
		for m := range seq {
			seq[m] = 0
			if k := m - j; k >= 0 && k < len(h) {
				seq[m] = complex(win[m], 0) * h[k]
			}
		}
		plan.Coefficients(coef, seq)
		for k, c := range coef {
			out[k] += real(c)*real(c) + imag(c)*imag(c)
		}
	}
	for k := range out {
		out[k] *= sigma2 / (w2 * fs)
	}
	return out
}

// TestPassbandPSD: white noise through the passband, read back from the
// file, has the PSD the design states.
//
// 4·10⁶ samples in 256-point Hann segments with 50 % overlap: 31 249
// segments, relative σ of a bin ≈ √(1.06/K) = 0.58 % = 0.025 dB (Welch
// 1967; the 1.06 is the 50 % Hann overlap correlation). Checks:
//   - against the exact expected Welch PSD of the realised taps
//     (expectedWelch): every bin within 0.13 dB (5σ): the streaming
//     overlap-save, its carried state and the delay compensation;
//   - against the designed response |Desired(f)|²·σ²/fs: within 0.15 dB for
//     |f| ≤ 0.42·fs (5σ plus the ≤ 0.02 dB design error of
//     TestPassbandDesign), and within 0.6 dB in the roll-off up to
//     0.48·fs, where the Hann window's ±1.5-bin main lobe smooths a
//     slope of up to 1.2 dB per bin;
//   - the mean power is the truth's noise_after_front_end_dbfs,
//     σ²·Σ|h|², within 0.02 dB (1/√M = 0.002 dB).
func TestPassbandPSD(t *testing.T) {
	t.Parallel()
	const fs = 2e6
	pb := Passband{TiltDB: 3, RippleDB: 0.5, RippleCycles: 3, RipplePhaseDeg: 30, RolloffDB: 20, RolloffFraction: 0.15}
	tr, x := writeAndRead(t, withFrontEnd("cf32_le", fs, -30, 2, 61, &FrontEnd{Passband: &pb}, Capture{}))
	if tr.FrontEnd == nil || tr.FrontEnd.Passband == nil || tr.FrontEnd.Passband.Taps != defaultTaps || !strings.Contains(tr.FrontEnd.PassbandDesign, "Kaiser") {
		t.Fatalf("truth front end %+v", tr.FrontEnd)
	}
	sigma2 := undb(tr.NoiseDBFS)
	const n = 256
	got := welch(x, n, fs)
	fir := designPassband(tr.FrontEnd.Passband)
	want := expectedWelch(fir.taps, n, fs, sigma2)
	var worstImpl, worstFlat, worstRoll float64
	for k := range got {
		f := fftFreq(k, n, fs)
		worstImpl = max(worstImpl, math.Abs(db(got[k]/want[k])))
		d := math.Abs(db(got[k] / (sigma2 / fs * math.Pow(pb.Desired(f, fs), 2))))
		switch {
		case math.Abs(f) <= 0.42*fs:
			worstFlat = max(worstFlat, d)
		case math.Abs(f) <= 0.48*fs:
			worstRoll = max(worstRoll, d)
		}
	}
	t.Logf("measured PSD vs expected Welch of the taps: worst %.3f dB; vs design: %.3f dB (|f| ≤ 0.42 fs), %.3f dB (roll-off)", worstImpl, worstFlat, worstRoll)
	if worstImpl > 0.13 {
		t.Errorf("measured PSD %.3f dB from the taps' expected PSD, want ≤ 0.13 dB", worstImpl)
	}
	if worstFlat > 0.15 {
		t.Errorf("measured PSD %.3f dB from the designed response within ±0.42·fs, want ≤ 0.15 dB", worstFlat)
	}
	if worstRoll > 0.6 {
		t.Errorf("measured PSD %.3f dB from the designed response in the roll-off, want ≤ 0.6 dB", worstRoll)
	}
	if tr.FrontEnd.NoiseDBFS == nil {
		t.Fatal("truth lacks noise_after_front_end_dbfs")
	}
	if d := db(meanPower(x)) - *tr.FrontEnd.NoiseDBFS; math.Abs(d) > 0.02 {
		t.Errorf("mean power %.3f dB from the truth's noise after the front end", d)
	}
	if d := *tr.FrontEnd.NoiseDBFS - tr.NoiseDBFS - db(fir.powerGain()); math.Abs(d) > 1e-9 {
		t.Errorf("noise after the front end is not noise_dbfs + 10·log10 Σ|h|²: %g dB apart", d)
	}
}

// TestPassbandApparentJN: apparent_jn_db is what the recording holds. A
// tone at the passband's tilted edge and one at the centre, band noise
// where the ripple peaks, and a white noise jammer: J/N measured after
// the front end (tone by correlation, noise bands by power) against the
// truth's apparent_jn_db. Tones within 0.1 dB (TestCW's budget); the noise
// band (B·T = 4·10⁴) within 0.1 dB; the white jammer's apparent J/N is
// its configured one (computed: the passband shapes it and the thermal
// noise alike).
func TestPassbandApparentJN(t *testing.T) {
	t.Parallel()
	const fs = 4e6
	pb := &Passband{TiltDB: 4, RippleDB: 0.8, RippleCycles: 2, RolloffDB: 12, RolloffFraction: 0.2}
	tr, x := writeAndRead(t, withFrontEnd("cf32_le", fs, -40, 0.2, 62, &FrontEnd{Passband: pb}, Capture{Emitters: []Emitter{
		{Kind: KindCW, Tones: []Tone{{OffsetHz: 1.7e6, JNDB: 10}, {OffsetHz: 50e3, JNDB: 10}}},
	}}))
	for _, tone := range tr.Emitters[0].Tones {
		if tone.ApparentJNDB == nil || tone.ApparentOffsetHz == nil {
			t.Fatalf("tone %+v lacks apparent values", tone)
		}
		c := toneCorrelation(x, 0, len(x), *tone.ApparentOffsetHz, fs)
		noise := undb(*tr.FrontEnd.NoiseDBFS)
		jn := db((real(c)*real(c) + imag(c)*imag(c)) / noise)
		want := tone.JNDB + db(math.Pow(pb.Desired(tone.OffsetHz, fs), 2)/undb(tr.FrontEnd.NoisePowerGainDB))
		t.Logf("tone %g Hz: measured J/N %.3f dB, apparent %.3f, design %.3f, configured %g", tone.OffsetHz, jn, *tone.ApparentJNDB, want, tone.JNDB)
		if math.Abs(jn-*tone.ApparentJNDB) > 0.1 {
			t.Errorf("tone %g Hz: measured J/N %.3f dB, truth apparent_jn_db %.3f", tone.OffsetHz, jn, *tone.ApparentJNDB)
		}
		if math.Abs(want-*tone.ApparentJNDB) > 0.05 {
			t.Errorf("tone %g Hz: apparent_jn_db %.3f, design response gives %.3f", tone.OffsetHz, *tone.ApparentJNDB, want)
		}
	}
	// Band noise and a white jammer, each alone with the thermal noise.
	for _, e := range []Emitter{
		{Kind: KindNarrowbandNoise, JNDB: 6, OffsetHz: -1e6, BandwidthHz: 400e3},
		{Kind: KindWidebandNoise, FloorRiseDB: 3},
	} {
		tr, x := writeAndRead(t, withFrontEnd("cf32_le", fs, -40, 0.2, 63, &FrontEnd{Passband: pb}, Capture{Emitters: []Emitter{e}}))
		te := tr.Emitters[0]
		jn := db(meanPower(x)/undb(*tr.FrontEnd.NoiseDBFS) - 1)
		t.Logf("%s: measured J/N %.3f dB, apparent %.3f, configured %.3f", e.Kind, jn, *te.ApparentJNDB, te.JNDB)
		if math.Abs(jn-*te.ApparentJNDB) > 0.1 {
			t.Errorf("%s: measured J/N %.3f dB, truth apparent_jn_db %.3f", e.Kind, jn, *te.ApparentJNDB)
		}
		if e.Kind == KindWidebandNoise && math.Abs(*te.ApparentJNDB-te.JNDB) > 1e-9 {
			t.Errorf("white jammer: apparent_jn_db %.4f differs from jn_db %.4f", *te.ApparentJNDB, te.JNDB)
		}
	}
}

// TestIQImbalanceIRR: a tone at +f through the I/Q imbalance leaves an
// image at −f whose power ratio is the image rejection ratio of
// REFERENCES §12.4 [C: table], measured by correlation within 0.1 dB.
// Tone at −20 dBFS over noise at −60 dBFS, 2·10⁵ samples: the noise in
// the image's correlation is σ²/M = 5·10⁻¹², against an image of at least
// 2.5·10⁻⁷ (46 dB below): a cross-term σ of 0.03 dB. 2f·M/fs is whole,
// so the tone leaks nothing into the image's correlation.
func TestIQImbalanceIRR(t *testing.T) {
	t.Parallel()
	cases := []struct{ eps, phiDeg, irrDB float64 }{
		{0.01, 0, 46.06}, {0, 1, 41.18}, {0.01, 1, 39.96}, {0.005, 0.5, 45.98}, {0.02, 2, 33.95},
		{0.05, 5, 26.02}, {0.10, 0, 26.44}, {0, 5, 27.20}, {0.10, 10, 20.03},
	}
	const fs, f = 2e6, 250e3
	for i, tc := range cases {
		t.Run(fmt.Sprintf("eps%g_phi%g", tc.eps, tc.phiDeg), func(t *testing.T) {
			t.Parallel()
			fe := &FrontEnd{IQImbalance: &IQImbalance{GainError: tc.eps, PhaseDeg: tc.phiDeg}}
			tr, x := writeAndRead(t, withFrontEnd("cf32_le", fs, -60, 0.1, uint64(70+i), fe,
				Capture{Emitters: []Emitter{{Kind: KindCW, OffsetHz: f, JNDB: 40}}}))
			sigma2 := undb(*tr.FrontEnd.NoiseDBFS)
			m := float64(len(x))
			cp, cm := toneCorrelation(x, 0, len(x), f, fs), toneCorrelation(x, 0, len(x), -f, fs)
			pp := real(cp)*real(cp) + imag(cp)*imag(cp) - sigma2/m
			pm := real(cm)*real(cm) + imag(cm)*imag(cm) - sigma2/m
			irr := db(pp / pm)
			t.Logf("IRR measured %.3f dB, truth %.3f, REFERENCES %.2f", irr, *tr.FrontEnd.ImageRejectionDB, tc.irrDB)
			if math.Abs(irr-tc.irrDB) > 0.1 {
				t.Errorf("measured IRR %.3f dB, REFERENCES §12.4 gives %.2f", irr, tc.irrDB)
			}
			if math.Abs(*tr.FrontEnd.ImageRejectionDB-tc.irrDB) > 0.01 {
				t.Errorf("truth image_rejection_db %.3f, REFERENCES §12.4 gives %.2f", *tr.FrontEnd.ImageRejectionDB, tc.irrDB)
			}
		})
	}
}

// TestDCOffset: the DC offset is the mean of the samples (within 5σ of
// the mean of 2·10⁵ noise samples, σ_mean = √(σ²/2/M) per component) and
// a line at 0 Hz; without it the mean is 0 to the same bound (common
// practice: LO leakage is a line at DC, REFERENCES §12.4).
func TestDCOffset(t *testing.T) {
	t.Parallel()
	for _, dc := range []IQValue{{I: 0.01, Q: -0.005}, {}} {
		tr, x := writeAndRead(t, withFrontEnd("ci16_le", 2e6, -40, 0.1, 80, &FrontEnd{DCOffset: &dc}, Capture{}))
		var mean complex128
		for _, v := range x {
			mean += complex128(v)
		}
		mean /= complex(float64(len(x)), 0)
		bound := 5 * math.Sqrt(undb(tr.NoiseDBFS)/2/float64(len(x)))
		if math.Abs(real(mean)-dc.I) > bound || math.Abs(imag(mean)-dc.Q) > bound {
			t.Errorf("dc_offset %+v: sample mean %.5g, bound %.2g", dc, mean, bound)
		}
	}
}

// quantCodes returns the codes of a ci8 capture's components (value·128).
func quantCodes(x []complex64) []float64 {
	out := make([]float64, 0, 2*len(x))
	for _, v := range x {
		out = append(out, float64(real(v))*128, float64(imag(v))*128)
	}
	return out
}

// TestQuantization2Bit: a 2-bit front end (levels ±1/±3, threshold T = σ,
// AGC-free) writes only the codes ±1, ±3, and a gain offset of ΔP dB moves
// the magnitude-bit occupancy p = P(|x| > T) = erfc(T/(σ√2)) as the table
// of REFERENCES §12.3 [C] says: ΔP = 0 → 0.317, +3.42 → 0.50, +24.05 →
// 0.95, ... Each capture overrides the scenario's gain_db (a per-capture
// front end). 10⁶ components give a binomial σ ≤ 5·10⁻⁴; the table's
// 0.01 dB rounding moves p by ≤ 10⁻³: bound 0.003. The truth's
// magnitude_occupancy is erfc(T/(σ·g·√2)) and must match the table to
// 0.002.
func TestQuantization2Bit(t *testing.T) {
	t.Parallel()
	table := []struct{ p, dP float64 }{
		{0.20, -2.15}, {0.25, -1.22}, {0.317, 0}, {0.40, 1.50}, {0.50, 3.42},
		{0.60, 5.61}, {0.70, 8.28}, {0.80, 11.93}, {0.90, 18.02}, {0.95, 24.05},
	}
	s := Scenario{Name: "two-bit", Format: "ci8", SampleRate: 2e6, NoiseDBFS: -30, Start: testStart, Seed: 90,
		FrontEnd: &FrontEnd{Quantization: &Quantization{Bits: 2, ThresholdSigma: 1}}}
	for i, row := range table {
		s.Captures = append(s.Captures, Capture{Name: fmt.Sprintf("g%d", i), OffsetS: float64(i), DurationS: 0.25,
			FrontEnd: &FrontEnd{GainDB: ref(row.dP)}})
	}
	dir, truths := writeScenario(t, s)
	for i, row := range table {
		tr := truths[i]
		q := tr.FrontEnd.Quantizer
		if q == nil || q.Bits != 2 || q.Mode != "mid_rise" || fmt.Sprint(q.Levels) != "[-3 -1 1 3]" || q.ThresholdSigma != 1 {
			t.Fatalf("truth quantizer %+v", q)
		}
		var mag, n float64
		for _, c := range quantCodes(readCapture(t, dir, tr)) {
			switch c {
			case 3, -3:
				mag++
			case 1, -1:
			default:
				t.Fatalf("gain %g dB: code %g written; a 2-bit front end writes ±1 and ±3 only", row.dP, c)
			}
			n++
		}
		p := mag / n
		t.Logf("ΔP %+.2f dB: magnitude occupancy %.4f (REFERENCES %.3f, truth %.4f)", row.dP, p, row.p, *q.MagnitudeOccupancy)
		if math.Abs(p-row.p) > 0.003 {
			t.Errorf("ΔP %+.2f dB: occupancy %.4f, REFERENCES §12.3 gives %.3f", row.dP, p, row.p)
		}
		if math.Abs(*q.MagnitudeOccupancy-row.p) > 0.002 {
			t.Errorf("ΔP %+.2f dB: truth magnitude_occupancy %.4f, REFERENCES §12.3 gives %.3f", row.dP, *q.MagnitudeOccupancy, row.p)
		}
		if tr.Clipped != 0 {
			t.Errorf("%d samples counted clipped in a 2-bit capture written as ci8", tr.Clipped)
		}
	}
}

// TestQuantizationLevels: every bit width writes the levels its mode
// allows, in signed and offset-binary formats; the 8-bit front end set
// for σ = 12 LSB has a measured σ of √(12² + 1/12) = 12.0035 LSB (Widrow:
// rounding adds Δ²/12) within 0.5 % (the estimate's σ is √(1/(2M)) =
// 0.07 % for 10⁶ components).
func TestQuantizationLevels(t *testing.T) {
	t.Parallel()
	cases := []struct {
		format string
		q      Quantization
		scale  float64 // code = value·scale (+ mid-scale for offset binary)
		mid    float64
		levels []float64 // codes allowed (nil: integers in range)
		lo, hi float64   // code range
		sigma  float64   // expected σ in codes per component (0: not checked)
	}{
		{"ci8", Quantization{Bits: 1}, 128, 0, []float64{-1, 1}, -1, 1, 0},
		{"ci8", Quantization{Bits: 3}, 128, 0, []float64{-7, -5, -3, -1, 1, 3, 5, 7}, -7, 7, 0},
		{"ci16_le", Quantization{Bits: 4}, 32768, 0, []float64{-15, -13, -11, -9, -7, -5, -3, -1, 1, 3, 5, 7, 9, 11, 13, 15}, -15, 15, 0},
		{"cu8", Quantization{Bits: 2}, 127.5, 127.5, []float64{126, 127, 128, 129}, 126, 129, 0},
		{"ci8", Quantization{Bits: 8, SigmaLSB: 12}, 128, 0, nil, -128, 127, math.Sqrt(144 + 1.0/12)},
		{"ci16_le", Quantization{Bits: 8, SigmaLSB: 12}, 32768, 0, nil, -128, 127, math.Sqrt(144 + 1.0/12)},
		{"ci16_le", Quantization{Bits: 16, SigmaLSB: 300}, 32768, 0, nil, -32768, 32767, math.Sqrt(300*300 + 1.0/12)},
	}
	for i, tc := range cases {
		t.Run(fmt.Sprintf("%s/%d", tc.format, tc.q.Bits), func(t *testing.T) {
			t.Parallel()
			q := tc.q
			tr, x := writeAndRead(t, withFrontEnd(tc.format, 2e6, -30, 0.25, uint64(100+i), &FrontEnd{Quantization: &q}, Capture{}))
			allowed := map[float64]bool{}
			for _, l := range tc.levels {
				allowed[l] = true
			}
			seen := map[float64]bool{}
			var s2 float64
			for _, v := range x {
				for _, c := range []float64{float64(real(v))*tc.scale + tc.mid, float64(imag(v))*tc.scale + tc.mid} {
					c = math.Round(c*2) / 2 // offset binary decodes to half-LSB steps; the codes are whole
					if c != math.Trunc(c) || c < tc.lo || c > tc.hi || (tc.levels != nil && !allowed[c]) {
						t.Fatalf("code %g written, outside the %d-bit quantizer's levels", c, tc.q.Bits)
					}
					seen[c] = true
					s2 += (c - tc.mid) * (c - tc.mid)
				}
			}
			if tc.levels != nil && len(seen) != len(tc.levels) {
				t.Errorf("codes seen %v, want every one of %v", seen, tc.levels)
			}
			if tc.sigma != 0 {
				sd := math.Sqrt(s2 / float64(2*len(x)))
				t.Logf("σ = %.4f LSB (truth sigma_lsb %g, expected %.4f)", sd, tr.FrontEnd.Quantizer.SigmaLSB, tc.sigma)
				if math.Abs(sd/tc.sigma-1) > 0.005 {
					t.Errorf("measured σ %.4f LSB, want %.4f", sd, tc.sigma)
				}
			}
		})
	}
}

// TestClockOffset: a receiver reference X ppm fast moves every satellite's
// Doppler by −X·1575.42 Hz (REFERENCES §12.5 [C]: 0.5 ppm → 788 Hz, 1 →
// 1575, 2 → 3151, 10 → 15.75 kHz, 20 → 31.5 kHz, 40.5 → 63.8 kHz, 100 →
// 157.5 kHz; the table's rounding is the tolerance), and the truth says
// so. Then, on a 1 s recording at 10 ppm: the satellite is found at the
// truth's apparent carrier with the code rate following it at 1/1540 (the
// C/N0 read back within 0.25 dB, TestSatelliteCN0's budget), while the
// replica without the clock offset finds nothing; and a CW's apparent
// offset, −ppm·(fc + offset), is where its correlation carries its full
// J/N (0.1 dB), its phase steady to 0.05 Hz between the two halves.
func TestClockOffset(t *testing.T) {
	t.Parallel()
	table := []struct{ ppm, shiftHz, tolHz float64 }{
		{0.5, 788, 0.5}, {1, 1575, 0.5}, {2, 3151, 0.5}, {10, 15750, 5}, {20, 31500, 50}, {40.5, 63800, 50}, {100, 157500, 50},
	}
	sat := Satellite{PRN: 11, CN0DBHz: 50, DopplerHz: 1000, CodePhaseChips: 300.5}
	for _, row := range table {
		s := withFrontEnd("ci16_le", 4e6, -30, 0.001, 1, &FrontEnd{ClockPPM: ref(row.ppm)}, Capture{Satellites: []Satellite{sat}})
		if err := s.Normalize(); err != nil {
			t.Fatal(err)
		}
		tr, err := WriteCapture(&s, 0, t.TempDir())
		if err != nil {
			t.Fatal(err)
		}
		got := sat.DopplerHz - *tr.Satellites[0].ApparentDopplerHz
		if math.Abs(got-row.shiftHz) > row.tolHz || math.Abs(-*tr.FrontEnd.ClockShiftL1Hz-row.shiftHz) > row.tolHz {
			t.Errorf("%g ppm: Doppler moved by −%.1f Hz (L1 by %.1f), REFERENCES §12.5 gives −%g", row.ppm, got, *tr.FrontEnd.ClockShiftL1Hz, row.shiftHz)
		}
	}

	const fs, ppm = 4e6, 10.0
	tone := Emitter{Kind: KindCW, OffsetHz: 300e3, JNDB: 0}
	s := withFrontEnd("ci16_le", fs, -30, 1, 110, &FrontEnd{ClockPPM: ref(ppm)}, Capture{Name: "sat", Satellites: []Satellite{sat}})
	s.Captures = append(s.Captures, Capture{Name: "tone", OffsetS: 1, DurationS: 1, Emitters: []Emitter{tone}})
	dir, truths := writeScenario(t, s)
	tr, x := truths[0], readCapture(t, dir, truths[0])
	ts := tr.Satellites[0]
	if d := *ts.ApparentCodeDopplerChipsS - *ts.ApparentDopplerHz/gpsca.CarrierToCodeRatio; math.Abs(d) > 1e-6 {
		t.Errorf("apparent code Doppler %.6f chips/s is not apparent Doppler/1540 (%.6f)", *ts.ApparentCodeDopplerChipsS, *ts.ApparentDopplerHz/1540)
	}
	right := replicaFor(sat.PRN, sat.CodePhaseChips, *ts.ApparentCarrierHz, 0, gpsca.ChipRate+*ts.ApparentCodeDopplerChipsS, fs)
	nominal := replicaFor(sat.PRN, sat.CodePhaseChips, sat.DopplerHz, 0, gpsca.CodeRate(sat.DopplerHz), fs)
	cr, cn := right.cn0(t, x, fs), nominal.cn0(t, x, fs)
	t.Logf("C/N0 with the apparent replica %.2f dB-Hz, with the nominal one %.2f (truth %g)", cr, cn, ts.CN0DBHz)
	if math.Abs(cr-ts.CN0DBHz) > 0.25 {
		t.Errorf("replica at the truth's apparent Doppler finds %.2f dB-Hz, truth %g", cr, ts.CN0DBHz)
	}
	if cn > ts.CN0DBHz-10 {
		t.Errorf("replica without the clock offset still finds %.2f dB-Hz", cn)
	}
	tr, x = truths[1], readCapture(t, dir, truths[1])
	app := *tr.Emitters[0].Tones[0].ApparentOffsetHz
	want := (1575.42e6+300e3)/(1+ppm*1e-6) - 1575.42e6
	if math.Abs(app-want) > 1e-3 || math.Abs(app-(300e3-ppm*1e-6*(1575.42e6+300e3))) > 1 {
		t.Errorf("tone's apparent offset %.3f Hz, want %.3f ≈ 300 kHz − ppm·(fc + 300 kHz)", app, want)
	}
	h := len(x) / 2
	c1, c2 := toneCorrelation(x, 0, h, app, fs), toneCorrelation(x, h, len(x), app, fs)
	jn := db(cmplx.Abs(c1+c2) * cmplx.Abs(c1+c2) / 4 / undb(tr.NoiseDBFS))
	df := cmplx.Phase(c2/c1) / (2 * math.Pi * float64(h) / fs)
	t.Logf("tone at the apparent offset: J/N %.3f dB, residual %.4f Hz", jn, df)
	if math.Abs(jn-tone.JNDB) > 0.1 || math.Abs(df) > 0.05 {
		t.Errorf("tone at its apparent offset: J/N %.3f dB (want %g), residual frequency %.4f Hz", jn, tone.JNDB, df)
	}
}

// TestSpectrumInversion: a conjugated output puts a tone at +f at −f and
// a satellite's carrier Doppler at −f_D, while its code Doppler keeps its
// sign (REFERENCES §12.2). The truth says so; the satellite is found with
// the carrier at −f_D and code rate R(+f_D), not with the naive replica
// tying the code to the inverted carrier (2·f_D/1540 = 2.6 chips/s apart,
// lost within the second).
func TestSpectrumInversion(t *testing.T) {
	t.Parallel()
	const fs = 4e6
	sat := Satellite{PRN: 20, CN0DBHz: 50, DopplerHz: 2000, CodePhaseChips: 77.25}
	s := withFrontEnd("ci16_le", fs, -30, 1, 120, &FrontEnd{SpectrumInverted: ref(true)}, Capture{Name: "sat", Satellites: []Satellite{sat}})
	s.Captures = append(s.Captures, Capture{Name: "tone", OffsetS: 1, DurationS: 0.1, Emitters: []Emitter{{Kind: KindCW, OffsetHz: 300e3, JNDB: 3}}})
	dir, truths := writeScenario(t, s)
	tr, x := truths[0], readCapture(t, dir, truths[0])
	ts := tr.Satellites[0]
	if *ts.ApparentDopplerHz != -2000 || *ts.ApparentCarrierHz != -2000 || math.Abs(*ts.ApparentCodeDopplerChipsS-2000/1540.0) > 1e-9 {
		t.Errorf("truth: apparent Doppler %g, carrier %g, code Doppler %g; want −2000, −2000, +%g",
			*ts.ApparentDopplerHz, *ts.ApparentCarrierHz, *ts.ApparentCodeDopplerChipsS, 2000/1540.0)
	}
	tr, xt := truths[1], readCapture(t, dir, truths[1])
	if off := *tr.Emitters[0].Tones[0].ApparentOffsetHz; off != -300e3 {
		t.Errorf("tone's apparent offset %g, want −300 kHz", off)
	}
	right := replicaFor(sat.PRN, sat.CodePhaseChips, -2000, 0, gpsca.CodeRate(2000), fs)
	naive := replicaFor(sat.PRN, sat.CodePhaseChips, -2000, 0, gpsca.CodeRate(-2000), fs)
	cr, cn := right.cn0(t, x, fs), naive.cn0(t, x, fs)
	t.Logf("C/N0: carrier −f_D with code Doppler +f_D/1540 %.2f dB-Hz, code tied to the inverted carrier %.2f", cr, cn)
	if math.Abs(cr-sat.CN0DBHz) > 0.25 {
		t.Errorf("inverted satellite measures %.2f dB-Hz, truth %g", cr, sat.CN0DBHz)
	}
	if cn > sat.CN0DBHz-3 {
		t.Errorf("replica with the code Doppler inverted too still measures %.2f dB-Hz", cn)
	}
	up, down := toneCorrelation(xt, 0, len(xt), 300e3, fs), toneCorrelation(xt, 0, len(xt), -300e3, fs)
	if pu, pd := db(cmplx.Abs(up)*cmplx.Abs(up)/undb(tr.NoiseDBFS)), db(cmplx.Abs(down)*cmplx.Abs(down)/undb(tr.NoiseDBFS)); math.Abs(pd-3) > 0.1 || pu > -30 {
		t.Errorf("tone: J/N %.2f dB at −300 kHz (want 3), %.2f dB at +300 kHz (want nothing)", pd, pu)
	}
}

// codePhaseSamples is the code phase, in samples, of prn at the start of
// `windows` consecutive windows of n samples from w, found by circular
// correlation (FFT) with the code sampled at n/1023 samples per chip, the
// carrier at carrierHz wiped off, the windows summed non-coherently (a
// data bit flip spoils at most one of them).
func codePhaseSamples(t *testing.T, x []complex64, w, n, windows, prn int, carrierHz, fs float64) int {
	t.Helper()
	code, err := gpsca.Code(prn)
	if err != nil {
		t.Fatal(err)
	}
	plan := fourier.NewCmplxFFT(n)
	rep := make([]complex128, n)
	for i := range rep {
		rep[i] = complex(float64(code[i*gpsca.CodeLength/n]), 0)
	}
	rf := plan.Coefficients(nil, rep)
	seg := make([]complex128, n)
	acc := make([]float64, n)
	for k := 0; k < windows; k++ {
		s := w + k*n
		for i := range seg {
			_, frac := math.Modf(carrierHz / fs * float64(s+i))
			seg[i] = complex128(x[s+i]) * cmplx.Rect(1, -2*math.Pi*frac)
		}
		xf := plan.Coefficients(nil, seg)
		// corr[s'] = Σ_i x[i]·r[i + s'] = IDFT(conj(X)·R) conjugated.
		for i := range xf {
			xf[i] = cmplx.Conj(xf[i]) * rf[i]
		}
		c := plan.Sequence(nil, xf)
		for i, v := range c {
			acc[i] += real(v)*real(v) + imag(v)*imag(v)
		}
	}
	best := 0
	for i, v := range acc {
		if v > acc[best] {
			best = i
		}
	}
	return best
}

// TestSampleDrop: losing k samples makes every satellite's code phase jump
// by the same (k mod N_ms) samples (REFERENCES §12.7 [C], at 4.092 MS/s
// with N_ms = 4092: k = 1 → 0.25 chip, 100 → 25 chips, a 16 384-sample
// buffer → 16 samples = 4 chips, 65 536 → 64 samples = 16 chips). Two
// PRNs (0 and +2500 Hz Doppler; the latter drifts 0.0065 samples per ms),
// code phase measured over 10 ms before and 10 ms after the drop; the
// jump in whole samples must be exact. The capture keeps its length and
// the truth lists the drop.
func TestSampleDrop(t *testing.T) {
	t.Parallel()
	const fs, nms = 4.092e6, 4092
	sats := []Satellite{{PRN: 5, CN0DBHz: 50, DopplerHz: 0, CodePhaseChips: 200}, {PRN: 9, CN0DBHz: 50, DopplerHz: 2500, CodePhaseChips: 611.5}}
	table := []struct {
		k     int64
		chips float64
	}{{1, 0.25}, {100, 25}, {16384, 4}, {65536, 16}}
	s := Scenario{Name: "drops", Format: "cf32_le", SampleRate: fs, NoiseDBFS: -30, Start: testStart, Seed: 130}
	for i, row := range table {
		s.Captures = append(s.Captures, Capture{Name: fmt.Sprintf("drop-%d", row.k), OffsetS: float64(i), DurationS: 0.04,
			Satellites: sats, FrontEnd: &FrontEnd{SampleDrops: []SampleDrop{{AtS: 0.015, Samples: row.k}}}})
	}
	dir, truths := writeScenario(t, s)
	for i, row := range table {
		tr := truths[i]
		if tr.Samples != int64(math.Round(0.04*fs)) || len(tr.Faults) != 1 || tr.Faults[0].Kind != FaultSampleDrop ||
			tr.Faults[0].StartSample != int64(math.Round(0.015*fs)) || tr.Faults[0].Samples != row.k {
			t.Fatalf("k = %d: truth samples %d, faults %+v", row.k, tr.Samples, tr.Faults)
		}
		x := readCapture(t, dir, tr)
		m := int(tr.Faults[0].StartSample)
		before, after := m-10*nms, m
		for _, sat := range sats {
			p1 := codePhaseSamples(t, x, before, nms, 10, sat.PRN, sat.DopplerHz, fs)
			p2 := codePhaseSamples(t, x, after, nms, 10, sat.PRN, sat.DopplerHz, fs)
			jump := ((p2-p1-(after-before))%nms + 2*nms) % nms
			chips := float64(jump) * gpsca.ChipRate / fs
			t.Logf("k = %d, PRN %d: code phase %d → %d samples, jump %d samples = %.2f chips", row.k, sat.PRN, p1, p2, jump, chips)
			if int64(jump) != row.k%nms || math.Abs(chips-row.chips) > 1e-9 {
				t.Errorf("k = %d, PRN %d: code phase jumped %d samples (%.3f chips), want k mod %d = %d (%g chips)",
					row.k, sat.PRN, jump, chips, nms, row.k%nms, row.chips)
			}
		}
	}
}

// TestRecorderFaults: gaps are zeros where the truth says and timing is
// kept (a tone's phase runs on across the gap); a dead capture is all
// zeros; a stuck one one value; unnormalised floats are the capture times
// the scale (power up by 20·log10(scale) dB); each is in the truth's
// faults.
func TestRecorderFaults(t *testing.T) {
	t.Parallel()
	const fs = 2e6
	tone := func() []Emitter { return []Emitter{{Kind: KindCW, OffsetHz: 100e3, JNDB: 20}} } // Normalize fills in end_s
	s := Scenario{Name: "faults", Format: "cf32_le", SampleRate: fs, NoiseDBFS: -40, Start: testStart, Seed: 140,
		Captures: []Capture{
			{Name: "gap", DurationS: 0.05, Emitters: tone(), FrontEnd: &FrontEnd{Gaps: []Gap{{AtS: 0.01, Samples: 5000}, {AtS: 0.03, Samples: 1}}}},
			{Name: "dead", OffsetS: 1, DurationS: 0.01, Emitters: tone(), FrontEnd: &FrontEnd{Dead: ref(true)}},
			{Name: "stuck", OffsetS: 2, DurationS: 0.01, FrontEnd: &FrontEnd{Stuck: &IQValue{I: 0.25, Q: -0.5}}},
			{Name: "float", OffsetS: 3, DurationS: 0.05, Emitters: tone(), FrontEnd: &FrontEnd{UnnormalisedScale: ref(32768.0)}},
			{Name: "plain", OffsetS: 4, DurationS: 0.05, Emitters: tone(), FrontEnd: &FrontEnd{}},
		}}
	dir, truths := writeScenario(t, s)
	x := readCapture(t, dir, truths[0])
	if f := truths[0].Faults; len(f) != 2 || f[0].Kind != FaultGap || f[0].StartSample != 20000 || f[0].Samples != 5000 || f[1].StartSample != 60000 || f[1].Samples != 1 {
		t.Fatalf("gap faults %+v", f)
	}
	for i, v := range x {
		zero := v == 0
		if in := (i >= 20000 && i < 25000) || i == 60000; in != zero {
			t.Fatalf("sample %d is %v: gaps are [20000, 25000) and 60000", i, v)
		}
	}
	// Timing kept: the tone's phase on both sides of the gap agrees.
	c1, c2 := toneCorrelation(x, 0, 20000, 100e3, fs), toneCorrelation(x, 25000, 45000, 100e3, fs)
	if d := math.Abs(cmplx.Phase(c2 / c1)); d > 0.05 {
		t.Errorf("tone phase moved %.3f rad across the gap: timing not kept", d)
	}
	for _, v := range readCapture(t, dir, truths[1]) {
		if v != 0 {
			t.Fatalf("dead capture holds %v", v)
		}
	}
	if f := truths[1].Faults; len(f) != 1 || f[0].Kind != FaultDead || f[0].Samples != truths[1].Samples {
		t.Errorf("dead faults %+v", f)
	}
	for _, v := range readCapture(t, dir, truths[2]) {
		if v != complex(0.25, -0.5) {
			t.Fatalf("stuck capture holds %v, want (0.25−0.5i)", v)
		}
	}
	if f := truths[2].Faults; len(f) != 1 || f[0].Kind != FaultStuck {
		t.Errorf("stuck faults %+v", f)
	}
	pf, pp := meanPower(readCapture(t, dir, truths[3])), meanPower(readCapture(t, dir, truths[4]))
	if d := db(pf/pp) - 20*math.Log10(32768); math.Abs(d) > 0.05 {
		t.Errorf("unnormalised capture %.2f dB above the plain one, want 20·log10(32768) = 90.31 dB", db(pf/pp))
	}
	if f := truths[3].Faults; len(f) != 1 || f[0].Kind != FaultUnnormalised {
		t.Errorf("unnormalised faults %+v", f)
	}
	if len(truths[4].Faults) != 0 || truths[4].FrontEnd == nil {
		t.Errorf("plain capture: faults %+v, front end %+v", truths[4].Faults, truths[4].FrontEnd)
	}
}

// TestGain: gain_db, gain_drift_db_per_capture and gain_steps change the
// power of everything by that many dB (computed: power of noise alone,
// 10⁵ samples or more per segment give a 0.014 dB σ, REFERENCES §9;
// bound 0.08 dB).
func TestGain(t *testing.T) {
	t.Parallel()
	const fs = 2e6
	s := Scenario{Name: "gain", Format: "cf32_le", SampleRate: fs, NoiseDBFS: -40, Start: testStart, Seed: 150,
		FrontEnd: &FrontEnd{GainDB: ref(2.0), GainDriftDBPerCapture: ref(-1.5)}}
	for i := 0; i < 3; i++ {
		s.Captures = append(s.Captures, Capture{Name: fmt.Sprintf("c%d", i), OffsetS: float64(i), DurationS: 0.2})
	}
	s.Captures[2].FrontEnd = &FrontEnd{GainSteps: []GainStep{{AtS: 0.08, DB: 6}, {AtS: 0.14, DB: -10}}}
	dir, truths := writeScenario(t, s)
	for i, want := range []float64{2, 0.5, -1} {
		tr := truths[i]
		if tr.FrontEnd.CaptureGainDB != want {
			t.Errorf("capture %d: capture_gain_db %g, want %g", i, tr.FrontEnd.CaptureGainDB, want)
		}
		x := readCapture(t, dir, tr)
		if got := db(meanPower(x[:160000])) - tr.NoiseDBFS; math.Abs(got-want) > 0.08 {
			t.Errorf("capture %d: power %.3f dB above noise_dbfs, want %g", i, got, want)
		}
		if i == 2 {
			for _, seg := range []struct {
				lo, hi int
				db     float64
			}{{165000, 275000, want + 6}, {285000, 400000, want - 4}} {
				if got := db(meanPower(x[seg.lo:seg.hi])) - tr.NoiseDBFS; math.Abs(got-seg.db) > 0.08 {
					t.Errorf("after a gain step: power %.3f dB above noise_dbfs, want %g", got, seg.db)
				}
			}
		}
	}
}

// TestFrontEndSpurs: a front end's spurs are in every capture, at J/N over
// the noise after the passband as configured and at their apparent offset
// after the clock offset, listed as front-end spurs, not emitters (tone
// J/N by correlation within 0.1 dB, TestCW's budget).
func TestFrontEndSpurs(t *testing.T) {
	t.Parallel()
	const fs = 4e6
	s := Scenario{Name: "spurs", Format: "ci16_le", SampleRate: fs, NoiseDBFS: -30, Start: testStart, Seed: 160,
		FrontEnd: &FrontEnd{ClockPPM: ref(2.0), Passband: &Passband{TiltDB: 2},
			Spurs: []Tone{{OffsetHz: 437.5e3, JNDB: 6}, {OffsetHz: -1.25e6, JNDB: -3}}},
		Captures: []Capture{{Name: "a", DurationS: 0.1}, {Name: "b", OffsetS: 60, DurationS: 0.1}}}
	dir, truths := writeScenario(t, s)
	for _, tr := range truths {
		if len(tr.Emitters) != 0 || len(tr.FrontEndSpurs) != 2 {
			t.Fatalf("%s: %d emitters, %d front-end spurs", tr.Capture, len(tr.Emitters), len(tr.FrontEndSpurs))
		}
		x := readCapture(t, dir, tr)
		noise := undb(*tr.FrontEnd.NoiseDBFS)
		for _, sp := range tr.FrontEndSpurs {
			want := (1575.42e6+sp.OffsetHz)/(1+2e-6) - 1575.42e6
			if math.Abs(*sp.ApparentOffsetHz-want) > 1e-3 {
				t.Errorf("spur %g Hz: apparent offset %.3f, want %.3f", sp.OffsetHz, *sp.ApparentOffsetHz, want)
			}
			c := toneCorrelation(x, 0, len(x), *sp.ApparentOffsetHz, fs)
			jn := db((real(c)*real(c)+imag(c)*imag(c))/noise - 1/float64(len(x)))
			if math.Abs(jn-sp.JNDB) > 0.1 {
				t.Errorf("%s: spur %g Hz at J/N %.3f dB, configured %g", tr.Capture, sp.OffsetHz, jn, sp.JNDB)
			}
		}
	}
}

const yamlFrontEnd = `
name: fe-test
site: test-bench
format: ci8
sample_rate: 2.0e6
noise_dbfs: -30
seed: 3
front_end:
  passband: {tilt_db: 2, ripple_db: 0.3, ripple_cycles: 2, rolloff_db: 15, rolloff_fraction: 0.1}
  dc_offset: {i: 0.002, q: -0.001}
  iq_imbalance: {gain_error: 0.01, phase_deg: 1}
  quantization: {bits: 2, threshold_sigma: 1.0}
  spurs: [{offset_hz: 250000, jn_db: 3}]
  gain_drift_db_per_capture: 0.5
  clock_ppm: 1.5
captures:
  - name: first
    duration_s: 0.01
    satellites: [{prn: 3, cn0_dbhz: 45, doppler_hz: 1200, code_phase_chips: 10, doppler_rate_hz_s: -0.6}]
  - name: second
    offset_s: 60
    duration_s: 0.01
    front_end:
      quantization: {bits: 8, sigma_lsb: 12}
      gain_db: -1
      spectrum_inverted: true
      sample_drops: [{at_s: 0.004, samples: 100}]
      gaps: [{at_s: 0.006, samples: 50}]
`

// TestFrontEndYAML: a front end from YAML, overridden part by part in a
// capture: the second capture keeps the scenario's passband, I/Q, DC,
// spurs, drift and clock and replaces quantization and gain; the truths
// say so, and the scenario survives a YAML round trip.
func TestFrontEndYAML(t *testing.T) {
	t.Parallel()
	s, err := ParseScenario(strings.NewReader(yamlFrontEnd), "fe.yaml")
	if err != nil {
		t.Fatal(err)
	}
	truths, err := Write(s, t.TempDir())
	if err != nil {
		t.Fatal(err)
	}
	a, b := truths[0].FrontEnd, truths[1].FrontEnd
	if a.Quantizer.Bits != 2 || b.Quantizer.Bits != 8 || b.Quantizer.SigmaLSB != 12 {
		t.Errorf("quantizers %+v / %+v", a.Quantizer, b.Quantizer)
	}
	if a.Passband == nil || b.Passband == nil || *b.ClockPPM != 1.5 || b.Spurs == nil || b.DCOffset == nil || b.IQImbalance == nil {
		t.Errorf("second capture lost the scenario's parts: %+v", b.FrontEnd)
	}
	if a.CaptureGainDB != 0 || b.CaptureGainDB != -0.5 {
		t.Errorf("capture gains %g and %g, want 0 and −1 + 1·0.5", a.CaptureGainDB, b.CaptureGainDB)
	}
	if a.SpectrumInverted != nil || !*b.SpectrumInverted || len(truths[1].Faults) != 2 {
		t.Errorf("second capture: inverted %v, faults %+v", b.SpectrumInverted, truths[1].Faults)
	}
	if s.FrontEnd.Quantization.Bits != 2 {
		t.Errorf("the override changed the scenario's own front end")
	}
	if r := *truths[0].Satellites[0].ApparentDopplerRateHzS; math.Abs(r+0.6) > 1e-5 {
		t.Errorf("apparent Doppler rate %g, want −0.6", r)
	}
	// Round trip: marshal, parse, same scenario.
	out, err := yaml.Marshal(s)
	if err != nil {
		t.Fatal(err)
	}
	s2, err := ParseScenario(strings.NewReader(string(out)), "round-trip.yaml")
	if err != nil {
		t.Fatalf("%v\n%s", err, out)
	}
	out2, err := yaml.Marshal(s2)
	if err != nil {
		t.Fatal(err)
	}
	if string(out2) != string(out) || !reflect.DeepEqual(s2.FrontEnd, s.FrontEnd) || !reflect.DeepEqual(s2.Captures[1].FrontEnd, s.Captures[1].FrontEnd) {
		t.Errorf("round trip changed the scenario:\n%s\nthen\n%s", out, out2)
	}
}

// TestFrontEndErrors: bad front-end values are refused, naming the file,
// the capture where it applies, the key and the problem.
func TestFrontEndErrors(t *testing.T) {
	t.Parallel()
	const head = "sample_rate: 4.0e6\ncaptures:\n  - name: c1\n    duration_s: 0.1\n"
	cases := []struct {
		name, yaml string
		want       []string
	}{
		{"unknown front-end key", "front_end: {passbnd: {tilt_db: 1}}\n" + head, []string{"bad.yaml", "passbnd"}},
		{"even taps", "front_end: {passband: {taps: 100}}\n" + head, []string{"front_end.passband.taps 100", "odd"}},
		{"ripple too fast", "front_end: {passband: {ripple_db: 1, ripple_cycles: 40, taps: 255}}\n" + head, []string{"front_end.passband.ripple_cycles 40", "taps/16"}},
		{"rolloff without fraction", "front_end: {passband: {rolloff_db: 20}}\n" + head, []string{"rolloff_db 20", "rolloff_fraction"}},
		{"quantization of floats", "format: cf32_le\nfront_end: {quantization: {bits: 2}}\n" + head, []string{"front_end.quantization.bits", "integer format", "cf32_le"}},
		{"9 bits in ci8", "format: ci8\nfront_end: {quantization: {bits: 9, sigma_lsb: 12}}\n" + head, []string{"quantization.bits 9", "1..8"}},
		{"8 bits without level", "format: ci8\nfront_end: {quantization: {bits: 8}}\n" + head, []string{"quantization.sigma_lsb", "noise level"}},
		{"both threshold and sigma", "format: ci8\nfront_end: {quantization: {bits: 2, threshold_sigma: 1, sigma_lsb: 1}}\n" + head, []string{"threshold_sigma and sigma_lsb both"}},
		{"IQ phase 60°", "front_end: {iq_imbalance: {gain_error: 0, phase_deg: 60}}\n" + head, []string{"front_end.iq_imbalance", "phase_deg 60"}},
		{"DC beyond full scale", "front_end: {dc_offset: {i: 1.5, q: 0}}\n" + head, []string{"front_end.dc_offset", "1.5"}},
		{"spur outside the band", "front_end: {spurs: [{offset_hz: 3.0e6, jn_db: 0}]}\n" + head, []string{"front_end.spurs[0]", "outside ±fs/2"}},
		{"clock 500 ppm", "front_end: {clock_ppm: 500}\n" + head, []string{"front_end.clock_ppm 500"}},
		{"clock pushes a satellite out", "front_end: {clock_ppm: 200}\nsample_rate: 4.0e5\ncaptures: [{name: c1, duration_s: 0.1, satellites: [{prn: 3, cn0_dbhz: 40}]}]\n",
			[]string{"c1", "satellites[0]", "clock_ppm 200", "outside ±fs/2"}},
		{"clock pushes a tone out", "front_end: {clock_ppm: 100}\n" + head + "    emitters: [{kind: cw, offset_hz: -1.9e6, jn_db: 0}]\n",
			[]string{"c1", "emitters[0]", "after the receiver clock offset", "clock_ppm 100"}},
		{"drop after the end", head + "    front_end: {sample_drops: [{at_s: 0.2, samples: 10}]}\n", []string{"capture c1: front_end.sample_drops[0]", "at_s 0.2"}},
		{"drops out of order", head + "    front_end: {sample_drops: [{at_s: 0.05, samples: 10}, {at_s: 0.02, samples: 10}]}\n", []string{"sample_drops[1]", "not after"}},
		{"gap past the end", head + "    front_end: {gaps: [{at_s: 0.09, samples: 100000}]}\n", []string{"front_end.gaps[0]", "past the capture's end"}},
		{"dead and stuck", head + "    front_end: {dead: true, stuck: {i: 0.1, q: 0}}\n", []string{"dead and stuck"}},
		{"unnormalised integers", head + "    front_end: {unnormalised_scale: 1000}\n", []string{"front_end.unnormalised_scale", "float format", "ci16_le"}},
		{"gain step after the end", head + "    front_end: {gain_steps: [{at_s: 0.5, db: 3}]}\n", []string{"front_end.gain_steps[0]", "at_s 0.5"}},
		{"drift too far", "front_end: {gain_drift_db_per_capture: 9}\nsample_rate: 4.0e6\ncaptures: [{name: a}, {name: b}, {name: c}, {name: d}, {name: e}, {name: f}]\n",
			[]string{"capture f", "gain_drift_db_per_capture give 45 dB"}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			_, err := ParseScenario(strings.NewReader(tc.yaml), "bad.yaml")
			if err == nil {
				t.Fatalf("accepted:\n%s", tc.yaml)
			}
			t.Log(err)
			for _, w := range tc.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q does not mention %q", err, w)
				}
			}
		})
	}
}
