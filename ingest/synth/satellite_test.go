package synth

import (
	"fmt"
	"math"
	"math/cmplx"
	"testing"

	"quietband/ingest/gpsca"
)

// caCorrelations correlates x with the GPS L1 C/A replica of sat over
// windows of one code period, each aligned to a code epoch, and returns
// P_k for every whole window and the window length N in samples.
//
// The replica follows IS-GPS-200: the code (gpsca.Code, Table 3-Ia) at
// the code phase p(n) = chip0 + n·R/fs with R = 1.023 MHz·(1 + f_D/L1),
// i.e. a code Doppler of f_D/1540 chips/s (REFERENCES §4 [C]), chip ⌊p(n)⌋
// mod 1023, and the carrier e^{−j2π(L1 − fc + f_D)n/fs}:
//
//	P_k = Σ_{n=s_k}^{s_k+N−1} x[n]·c(⌊p(n)⌋)·e^{−j2π(L1−fc+f_D)n/fs}.
//
// Epoch k starts at the first sample with p(n) ≥ 1023·k, and N is one less
// than the whole samples of a code period, so every window lies inside one
// epoch. The 50 bit/s navigation data change sign only on 20-epoch
// boundaries (IS-GPS-200 §3.3.3), so no bit flip falls inside a window.
func caCorrelations(t testing.TB, x []complex64, fs, centerHz float64, sat Satellite) (p []complex128, n int) {
	t.Helper()
	code, err := gpsca.Code(sat.PRN)
	if err != nil {
		t.Fatal(err)
	}
	cps := gpsca.CodeRate(sat.DopplerHz) / fs // chips per sample
	chip0 := gpsca.WrapChips(sat.CodePhaseChips)
	n = int(math.Floor(gpsca.CodeLength/cps)) - 1
	fc := gpsca.L1 - centerHz + sat.DopplerHz
	rot := cmplx.Rect(1, -2*math.Pi*fc/fs)
	for k := 1; ; k++ {
		s := int(math.Ceil((float64(k)*gpsca.CodeLength - chip0) / cps))
		if s+n > len(x) {
			break
		}
		_, frac := math.Modf(fc / fs * float64(s))
		ph := cmplx.Rect(1, -2*math.Pi*frac)
		var acc complex128
		for i := s; i < s+n; i++ {
			c := int(chip0+float64(i)*cps) % gpsca.CodeLength
			acc += complex128(x[i]) * complex(float64(code[c]), 0) * ph
			ph *= rot
		}
		p = append(p, acc)
	}
	return p, n
}

// caEstimate estimates the carrier amplitude A² and the noise variance σ²
// of one satellite in x. With N samples per window,
// E|P_k|² = A²N² + N·σ² (the noise in a sum of N samples has variance Nσ²),
// and the data power is P_d = σ² + A² (the satellite is far below the
// noise but is not negligible at the 0.1 dB level: 50 dB-Hz at 4 MS/s is
// A²/σ² = 2.5 %). Solving both,
//
//	A² = (mean|P|² − N·P_d)/(N² − N),  σ̂² = P_d − A²,
//
// and the per-sample form of REFERENCES §3, C/N0 = A²/(σ²·T_s) = A²·fs/σ².
func caEstimate(t testing.TB, x []complex64, fs, centerHz float64, sat Satellite) (a2, sigma2, cn0 float64, windows int, perWindow int) {
	t.Helper()
	p, n := caCorrelations(t, x, fs, centerHz, sat)
	p2 := make([]float64, len(p))
	for k, v := range p {
		p2[k] = real(v)*real(v) + imag(v)*imag(v)
	}
	m, _ := meanStd(p2)
	pd := meanPower(x)
	nf := float64(n)
	a2 = (m - nf*pd) / (nf*nf - nf)
	sigma2 = pd - a2
	return a2, sigma2, db(a2 * fs / sigma2), len(p2), n
}

// cn0StdDB is the standard deviation, in dB, of the C/N0 estimate of
// caEstimate. Normalised, |P_k|²/(Nσ²) = |√λ·e^{jθ} + w|² with
// w ~ CN(0, 1) and λ = C/N0·T (T = N/fs, the coherent SNR of REFERENCES
// §4), so it has mean λ + 1 and variance 2λ + 1 (non-central χ², 2 degrees
// of freedom). The mean over K windows estimates λ with relative standard
// deviation √((2λ+1)/K)/λ; that is 10/ln 10 ≈ 4.34 times as many dB. The
// noise-power estimate from ~10⁶ samples adds a negligible 1/√M.
func cn0StdDB(cn0DBHz, fs float64, n, k int) float64 {
	lambda := undb(cn0DBHz) * float64(n) / fs
	return 10 / math.Ln10 * math.Sqrt((2*lambda+1)/float64(k)) / lambda
}

// TestSatelliteCN0 is the product requirement: a synthesized satellite
// reads back, through the file, at the C/N0 its truth states.
//
// Error budget (cn0StdDB): at 4 MS/s, 1 s gives K ≈ 999 one-millisecond
// windows. At 50 dB-Hz λ = 100 (20 dB), so σ ≈ 4.34·√(201/999)/100 =
// 0.019 dB and the 0.1 dB bound is over 5σ; at 45 dB-Hz λ = 31.6, σ ≈
// 0.035 dB against 0.2 dB (5.7σ). (With 0.25 s the same bounds would be
// only 2.6σ and 2.9σ, which is why the captures are 1 s long.) The
// estimator is unbiased to O(1/N): the replica is sampled exactly as the
// code is, so the correlation keeps all of A·N, and ci16 quantisation
// (2·(2⁻¹⁵)²/12 per sample against σ² = 10⁻³) is 10⁻⁷ of the noise.
func TestSatelliteCN0(t *testing.T) {
	t.Parallel()
	// PRN 7 at +1320 Hz Doppler and 100.25 chips code phase.
	sat := Satellite{PRN: 7, DopplerHz: 1320, CodePhaseChips: 100.25}
	cases := []struct {
		format string
		cn0    float64
		tolDB  float64
	}{
		{"ci16_le", 50, 0.1},
		{"cf32_le", 50, 0.1},
		{"ci16_le", 45, 0.2},
		{"cf32_le", 45, 0.2},
	}
	for i, tc := range cases {
		t.Run(fmt.Sprintf("%s/%gdBHz", tc.format, tc.cn0), func(t *testing.T) {
			t.Parallel()
			s := sat
			s.CN0DBHz = tc.cn0
			sc := oneCapture(tc.format, 4e6, -30, 1, uint64(100+i), Capture{Satellites: []Satellite{s}})
			tr, x := writeAndRead(t, sc)
			if tr.Clipped != 0 {
				t.Fatalf("%d samples clipped", tr.Clipped)
			}
			if len(tr.Satellites) != 1 || tr.Satellites[0].CN0DBHz != tc.cn0 {
				t.Fatalf("truth satellites %+v, want one at %g dB-Hz", tr.Satellites, tc.cn0)
			}
			a2, sigma2, cn0, k, n := caEstimate(t, x, tr.SampleRate, tr.CenterHz, tr.Satellites[0].Satellite)
			sd := cn0StdDB(tc.cn0, tr.SampleRate, n, k)
			t.Logf("C/N0 %.3f dB-Hz (truth %g, σ of the estimate %.3f dB); A² = %.4g, σ̂² = %.5g, %d windows of %d samples",
				cn0, tc.cn0, sd, a2, sigma2, k, n)
			if d := cn0 - tc.cn0; math.Abs(d) > tc.tolDB {
				t.Errorf("measured C/N0 %.3f dB-Hz, truth %g: off by %.3f dB > %.2f dB", cn0, tc.cn0, d, tc.tolDB)
			}
			// Carrier coherence across the whole second: squaring P_k
			// removes the ±1 data bits (BPSK), leaving A²N²·e^{2jθ} with
			// one θ for every window if the carrier frequency is exactly
			// L1 − fc + f_D. R = |Σ P_k²|/Σ|P_k|² ≈ λ/(λ+1) (0.97 at
			// 45 dB-Hz); a carrier 1.3 Hz off turns 2θ through 2.6 cycles
			// and R falls to ~0.1.
			p, _ := caCorrelations(t, x, tr.SampleRate, tr.CenterHz, tr.Satellites[0].Satellite)
			var num complex128
			var den float64
			for _, v := range p {
				num += v * v
				den += real(v)*real(v) + imag(v)*imag(v)
			}
			if r := cmplx.Abs(num) / den; r < 0.9 {
				t.Errorf("carrier coherence over %d ms %.3f, want ≥ 0.9 (a carrier off frequency, or data not ±1)", len(p), r)
			}
			// σ² = 10^(NoiseDBFS/10): the package's level definition.
			if want := undb(tr.NoiseDBFS); math.Abs(sigma2/want-1) > 0.01 {
				t.Errorf("noise σ̂² = %.5g, want %.5g within 1 %%", sigma2, want)
			}
		})
	}
}

// TestSatelliteWrongReplica makes sure the correlator above can fail: the
// right capture correlated with the wrong PRN, the wrong sign of Doppler,
// or without code Doppler loses far more than the tolerance.
func TestSatelliteWrongReplica(t *testing.T) {
	t.Parallel()
	sat := Satellite{PRN: 7, CN0DBHz: 50, DopplerHz: 1320, CodePhaseChips: 100.25}
	sc := oneCapture("ci16_le", 4e6, -30, 0.5, 3, Capture{Satellites: []Satellite{sat}})
	tr, x := writeAndRead(t, sc)
	cases := []struct {
		name string
		rep  Satellite
	}{
		{"PRN 8", Satellite{PRN: 8, DopplerHz: 1320, CodePhaseChips: 100.25}},
		{"Doppler −1320 Hz", Satellite{PRN: 7, DopplerHz: -1320, CodePhaseChips: 100.25}},
		{"code half a chip late", Satellite{PRN: 7, DopplerHz: 1320, CodePhaseChips: 100.75}},
	}
	for _, tc := range cases {
		_, _, cn0, _, _ := caEstimate(t, x, tr.SampleRate, tr.CenterHz, tc.rep)
		// Half a chip costs 6.02 dB (ideal triangle, REFERENCES §4); the
		// others leave no correlation peak at all.
		if cn0 > 50-5 {
			t.Errorf("%s: replica still measures %.2f dB-Hz (truth 50)", tc.name, cn0)
		}
	}
}

// TestAttenuation: attenuation_db lowers the truth C/N0 and the measured
// correlation power A² of every satellite by that many dB. The three
// captures share seed and stream numbers, so noise and data bits repeat and
// the differences are better than the single-capture budget (about
// 0.05 dB σ at 42 dB-Hz over 1 s, cn0StdDB).
func TestAttenuation(t *testing.T) {
	t.Parallel()
	sat := Satellite{PRN: 7, CN0DBHz: 50, DopplerHz: 1320, CodePhaseChips: 100.25}
	atts := []float64{0, 3, 8}
	s := Scenario{Name: "att", Format: "ci16_le", SampleRate: 4e6, NoiseDBFS: -30, Start: testStart, Seed: 5}
	for i, a := range atts {
		s.Captures = append(s.Captures, Capture{Name: fmt.Sprintf("att-%d", i), OffsetS: float64(i),
			DurationS: 1, AttenuationDB: a, Satellites: []Satellite{sat}})
	}
	dir, truths := writeScenario(t, s)
	var ref float64
	for i, a := range atts {
		tr := truths[i]
		if got, want := tr.Satellites[0].CN0DBHz, sat.CN0DBHz-a; got != want {
			t.Errorf("attenuation %g dB: truth C/N0 %g, want %g", a, got, want)
		}
		x := readCapture(t, dir, tr)
		a2, _, cn0, k, n := caEstimate(t, x, tr.SampleRate, tr.CenterHz, tr.Satellites[0].Satellite)
		sd := cn0StdDB(sat.CN0DBHz-a, tr.SampleRate, n, k)
		t.Logf("attenuation %g dB: C/N0 %.3f dB-Hz (truth %g, σ %.3f dB)", a, cn0, sat.CN0DBHz-a, sd)
		if math.Abs(cn0-(sat.CN0DBHz-a)) > 0.25 {
			t.Errorf("attenuation %g dB: measured %.3f dB-Hz, truth %g", a, cn0, sat.CN0DBHz-a)
		}
		if i == 0 {
			ref = a2
			continue
		}
		if d := db(a2 / ref); math.Abs(d+a) > 0.25 {
			t.Errorf("attenuation %g dB: correlation power changed by %.3f dB", a, d)
		}
	}
}

// replica is a C/A replica with its own carrier and code rates, so that
// tests can correlate with what the truth says the recording holds (a
// clock offset, an inversion, a Doppler rate) or with something else on
// purpose. At sample n: code phase chip0 + c1·n + c2·n² chips, carrier
// f1·n + f2·n² cycles.
type replica struct {
	prn           int
	chip0, c1, c2 float64
	f1, f2        float64
}

// replicaFor is the replica of an apparent carrier offset (Hz), Doppler
// rate (Hz/s) and code rate (chips/s) at rate fs.
func replicaFor(prn int, chip0, carrierHz, rateHzS, chipRate, fs float64) replica {
	return replica{prn: prn, chip0: gpsca.WrapChips(chip0), c1: chipRate / fs,
		c2: rateHzS / gpsca.CarrierToCodeRatio / (2 * fs * fs), f1: carrierHz / fs, f2: rateHzS / (2 * fs * fs)}
}

// chipAt is the replica's code phase at sample n.
func (r replica) chipAt(n float64) float64 { return r.chip0 + r.c1*n + r.c2*n*n }

// correlations is caCorrelations for a replica: P_k over windows of one
// code period starting at each code epoch, N samples long (one less than
// a period's whole samples, so no data bit flips inside).
func (r replica) correlations(t testing.TB, x []complex64) (p []complex128, n int) {
	t.Helper()
	code, err := gpsca.Code(r.prn)
	if err != nil {
		t.Fatal(err)
	}
	n = int(math.Floor(gpsca.CodeLength/r.c1)) - 2
	for k := 1; ; k++ {
		target := float64(k) * gpsca.CodeLength
		s := int(math.Ceil((target - r.chip0) / r.c1))
		for s > 0 && r.chipAt(float64(s-1)) >= target {
			s--
		}
		for r.chipAt(float64(s)) < target {
			s++
		}
		if s+n > len(x) {
			break
		}
		var acc complex128
		for i := s; i < s+n; i++ {
			fi := float64(i)
			c := int64(math.Floor(r.chipAt(fi))) % gpsca.CodeLength
			_, frac := math.Modf(r.f1*fi + r.f2*fi*fi)
			acc += complex128(x[i]) * complex(float64(code[c]), 0) * cmplx.Rect(1, -2*math.Pi*frac)
		}
		p = append(p, acc)
	}
	return p, n
}

// cn0 estimates the C/N0 the replica finds in x, as caEstimate does.
func (r replica) cn0(t testing.TB, x []complex64, fs float64) float64 {
	t.Helper()
	p, n := r.correlations(t, x)
	p2 := make([]float64, len(p))
	for k, v := range p {
		p2[k] = real(v)*real(v) + imag(v)*imag(v)
	}
	m, _ := meanStd(p2)
	pd := meanPower(x)
	nf := float64(n)
	a2 := (m - nf*pd) / (nf*nf - nf)
	return db(max(a2, 1e-30) * fs / (pd - a2))
}
