package synth

import (
	"math"
	"math/cmplx"
	"strings"
	"testing"

	"quietband/ingest/gpsca"
)

// corrAt returns the mean of |P_k|² over whole code-period windows of x
// for a C/A replica of prn at code phase chip0 (chips at sample 0),
// carrier Doppler fd and code Doppler fd + codeOff (Hz of carrier: the
// code runs at 1.023 MHz·(1 + (fd + codeOff)/L1), REFERENCES §11.4), and
// the window length N: the correlator of caCorrelations with the code
// rate set apart from the carrier.
func corrAt(x []complex64, fs float64, prn int, chip0, fd, codeOff float64) ([]complex128, int) {
	code, _ := gpsca.Code(prn)
	cps := gpsca.CodeRate(fd+codeOff) / fs
	chip0 = gpsca.WrapChips(chip0)
	n := int(math.Floor(gpsca.CodeLength/cps)) - 1
	rot := cmplx.Rect(1, -2*math.Pi*fd/fs)
	var p []complex128
	for k := 1; ; k++ {
		s := int(math.Ceil((float64(k)*gpsca.CodeLength - chip0) / cps))
		if s+n > len(x) {
			break
		}
		_, frac := math.Modf(fd / fs * float64(s))
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

// cn0At estimates the C/N0 of one signal against the thermal noise σ²
// (not the capture's total noise, which a meacon raises): with N samples
// per window, E|P_k|² = A²N² + N·P_other, P_other the power of everything
// else (REFERENCES §3 model, as caEstimate), so
// A² = (mean|P|² − N·(P_d − A²))/N² solved for A², C/N0 = A²·fs/σ².
func cn0At(x []complex64, fs, sigma2 float64, prn int, chip0, fd, codeOff float64) float64 {
	p, n := corrAt(x, fs, prn, chip0, fd, codeOff)
	var m float64
	for _, v := range p {
		m += real(v)*real(v) + imag(v)*imag(v)
	}
	m /= float64(len(p))
	nf := float64(n)
	a2 := (m - nf*meanPower(x)) / (nf*nf - nf)
	return db(a2 * fs / sigma2)
}

// spoofSky is three satellites for the spoofer tests.
var spoofSky = []Satellite{
	{PRN: 4, CN0DBHz: 45, DopplerHz: 1250, CodePhaseChips: 100.5},
	{PRN: 17, CN0DBHz: 42, DopplerHz: -2300, CodePhaseChips: 512.25},
	{PRN: 28, CN0DBHz: 48, DopplerHz: 300, CodePhaseChips: 900},
}

// TestSpooferSignals: every false signal the truth lists reads back from
// the file at its stated code phase, Doppler and C/N0, and the authentic
// signals are unchanged beside it. Tolerance 0.3 dB: with 0.5 s (K ≈ 500
// windows at 4 MS/s) the estimate's standard deviation is 0.05 dB at
// 45 dB-Hz (cn0StdDB: 4.34·√((2λ+1)/K)/λ, λ = 31.6), 0.11 dB at 39 dB-Hz
// (meacon-lowered authentic signals are measured against their truth
// too); the copies of one PRN are at least 1 chip apart, where the C/A
// autocorrelation is −1/1023 or ±65/1023 of the peak (IS-GPS-200 Gold
// codes, REFERENCES §1.3). A meacon raises the noise by 10·log10(1 + g)
// (REFERENCES §11.1): 5.45 dB for g = 4 dB, measured on the data power
// within 0.05 dB (all signals together are 1 % of it).
func TestSpooferSignals(t *testing.T) {
	t.Parallel()
	for _, tc := range []struct {
		name string
		sp   Spoofer
	}{
		{"counterfeit", Spoofer{Kind: SpoofCounterfeit, CN0DBHz: 50}},
		{"counterfeit-two-prns", Spoofer{Kind: SpoofCounterfeit, CN0DBHz: 46, PRNs: []int{4, 9}}},
		{"matched-power", Spoofer{Kind: SpoofMatchedPower, PowerDB: 3}},
		{"meaconing", Spoofer{Kind: SpoofMeaconing, PowerDB: 4, DelayS: 1.2e-6}},
	} {
		sp := tc.sp
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			s := oneCapture("cf32_le", 4e6, -30, 0.5, 71, Capture{Satellites: spoofSky, Spoofers: []Spoofer{sp}})
			tr, x := writeAndRead(t, s)
			sigma2 := undb(tr.NoiseDBFS)
			if len(tr.Spoofers) != 1 {
				t.Fatalf("truth has %d spoofers", len(tr.Spoofers))
			}
			ts := tr.Spoofers[0]
			want := len(spoofSky)
			if len(sp.PRNs) > 0 {
				want = len(sp.PRNs)
			}
			if len(ts.Signals) != want || ts.StartSample != 0 || ts.EndSample != tr.Samples {
				t.Fatalf("truth %+v: want %d signals over the whole capture", ts, want)
			}
			for _, sig := range ts.Signals {
				got := cn0At(x, tr.SampleRate, sigma2, sig.PRN, sig.CodePhaseChips, sig.DopplerHz, 0)
				t.Logf("%s PRN %d: %.2f dB-Hz at %.3f chips, %+.1f Hz (truth %.2f)", sp.Kind, sig.PRN, got, sig.CodePhaseChips, sig.DopplerHz, sig.CN0DBHz)
				if math.Abs(got-sig.CN0DBHz) > 0.3 {
					t.Errorf("PRN %d: false signal reads %.2f dB-Hz, truth %.2f", sig.PRN, got, sig.CN0DBHz)
				}
				if sp.Kind == SpoofCounterfeit {
					if sig.CN0DBHz != sp.CN0DBHz || math.Abs(sig.DopplerHz) > counterfeitDopplerHz || sig.DelayChips != nil {
						t.Errorf("counterfeit signal %+v", sig)
					}
					continue
				}
				au := spoofSky[slicesIndex(spoofSky, sig.PRN)]
				d := *sig.DelayChips
				if sig.DopplerHz != au.DopplerHz || *sig.PowerOverAuthenticDB != sp.PowerDB ||
					math.Abs(chipDiff(au.CodePhaseChips-d, sig.CodePhaseChips)) > 1e-9 {
					t.Errorf("copy %+v of %+v", sig, au)
				}
				switch sp.Kind {
				case SpoofMatchedPower:
					if a := math.Abs(d); a < 2 || a > 20 {
						t.Errorf("matched-power copy %.3f chips away, want 2–20", d)
					}
				case SpoofMeaconing:
					// 1.2 µs at 1.023 Mchip/s (1 chip = 0.978 µs, REFERENCES §11.5).
					if math.Abs(d-1.2276) > 1e-9 {
						t.Errorf("meacon delay %.4f chips, want 1.2276", d)
					}
				}
			}
			// The authentic signals are where they were, at their C/N0.
			for _, au := range spoofSky {
				got := cn0At(x, tr.SampleRate, sigma2, au.PRN, au.CodePhaseChips, au.DopplerHz, 0)
				if math.Abs(got-au.CN0DBHz) > 0.3 {
					t.Errorf("authentic PRN %d reads %.2f dB-Hz, truth %.2f", au.PRN, got, au.CN0DBHz)
				}
			}
			var signals float64
			for _, au := range spoofSky {
				signals += undb(au.CN0DBHz) / tr.SampleRate
			}
			for _, sig := range ts.Signals {
				signals += undb(sig.CN0DBHz) / tr.SampleRate
			}
			noise := db(meanPower(x)/sigma2 - signals)
			if sp.Kind == SpoofMeaconing {
				if want := 10 * math.Log10(1+undb(sp.PowerDB)); math.Abs(ts.NoiseRiseDB-want) > 1e-9 || math.Abs(noise-want) > 0.05 {
					t.Errorf("meacon noise rise %.3f dB measured, truth %.3f, want %.3f", noise, ts.NoiseRiseDB, want)
				}
			} else if math.Abs(noise) > 0.05 {
				t.Errorf("noise %.3f dB above the thermal: a %s spoofer adds none", noise, sp.Kind)
			}
		})
	}
}

func slicesIndex(sats []Satellite, prn int) int {
	for i, s := range sats {
		if s.PRN == prn {
			return i
		}
	}
	return -1
}

// chipDiff wraps a code-phase difference into ±511.5 chips.
func chipDiff(a, b float64) float64 {
	return math.Mod(a-b+1.5*gpsca.CodeLength, gpsca.CodeLength) - 0.5*gpsca.CodeLength
}

// TestCounterfeitCodeCarrier: with code_carrier_hz, each counterfeit
// signal's code runs at the code Doppler of its carrier Doppler plus the
// offset the truth states (REFERENCES §11.4: a generator with independent
// code and carrier oscillators). A replica that follows the truth's code
// rate reads the full C/N0; one that keeps code Doppler = carrier
// Doppler/1540 slides off the code by offset/1540 chips/s and loses at
// least 1 dB over 0.5 s whenever that reaches 0.2 chip (offset ≥ 616 Hz;
// the mean of the triangle over a slide of s chips, squared, is
// (1 − s/2)², −2 dB at 0.2 chip, computed).
func TestCounterfeitCodeCarrier(t *testing.T) {
	t.Parallel()
	s := oneCapture("cf32_le", 4e6, -30, 0.5, 72, Capture{Satellites: spoofSky,
		Spoofers: []Spoofer{{Kind: SpoofCounterfeit, CN0DBHz: 52, CodeCarrierHz: 3000}}})
	tr, x := writeAndRead(t, s)
	sigma2 := undb(tr.NoiseDBFS)
	tested := 0
	for _, sig := range tr.Spoofers[0].Signals {
		off := sig.CodeDopplerOffsetHz
		if math.Abs(off) > 3000 {
			t.Errorf("PRN %d: code offset %g Hz beyond ±3000", sig.PRN, off)
		}
		right := cn0At(x, tr.SampleRate, sigma2, sig.PRN, sig.CodePhaseChips, sig.DopplerHz, off)
		wrong := cn0At(x, tr.SampleRate, sigma2, sig.PRN, sig.CodePhaseChips, sig.DopplerHz, 0)
		t.Logf("PRN %d: offset %+.1f Hz: %.2f dB-Hz with it, %.2f without", sig.PRN, off, right, wrong)
		if math.Abs(right-sig.CN0DBHz) > 0.3 {
			t.Errorf("PRN %d reads %.2f dB-Hz at the truth's code rate, truth %.2f", sig.PRN, right, sig.CN0DBHz)
		}
		if math.Abs(off)/gpsca.CarrierToCodeRatio*0.5 >= 0.2 {
			tested++
			if right-wrong < 1 {
				t.Errorf("PRN %d: the code-rate offset %.1f Hz costs only %.2f dB", sig.PRN, off, right-wrong)
			}
		}
	}
	if tested == 0 {
		t.Error("no offset large enough to test: draw another seed")
	}
}

// TestMultipathCopies: each satellite has one reflected copy at the
// truth's delay (within [0.2, 0.8] chips) and power (within [3, 6] dB
// below it). With Λ the correlation of rectangular chips d apart (1 − |d|
// for the ideal triangle, IS-GPS-200 codes with no filter: an ideal front
// end; replicaLambda takes it on the sample grid), the correlations at the direct and the reflected code phase are
// P_1 = N(a_1 + Λa_2), P_2 = N(Λa_1 + a_2) for the paths' complex
// amplitudes, solved window by window (the noise they carry subtracted
// in the mean); at 55 dB-Hz over 0.5 s the estimate scatters by about
// 0.1 dB at the shortest delays (λ = 316 per window for the direct
// path, 80 for a copy 6 dB down, amplified by 1/(1 − Λ²) ≤ 2.3,
// computed), within the 0.3 dB tolerance.
func TestMultipathCopies(t *testing.T) {
	t.Parallel()
	sky := []Satellite{{PRN: 6, CN0DBHz: 55, DopplerHz: 1100, CodePhaseChips: 40.25}, {PRN: 21, CN0DBHz: 55, DopplerHz: -2600, CodePhaseChips: 700.5}}
	s := oneCapture("cf32_le", 4e6, -30, 0.5, 73, Capture{Satellites: sky, Multipath: &Multipath{}})
	tr, x := writeAndRead(t, s)
	if len(tr.Multipath) != len(sky) {
		t.Fatalf("truth multipath %+v", tr.Multipath)
	}
	for i, mp := range tr.Multipath {
		sat := sky[i]
		if mp.PRN != sat.PRN || mp.DelayChips < 0.2 || mp.DelayChips > 0.8 || mp.WeakerDB < 3 || mp.WeakerDB > 6 {
			t.Errorf("multipath %+v outside the defaults", mp)
		}
		p1, n := corrAt(x, tr.SampleRate, sat.PRN, sat.CodePhaseChips, sat.DopplerHz, 0)
		p2, _ := corrAt(x, tr.SampleRate, sat.PRN, sat.CodePhaseChips-mp.DelayChips, sat.DopplerHz, 0)
		// Λ as the samples see it: the replica against itself d chips
		// later on the capture's sample grid (at small d the solution is
		// sensitive to it: a 0.005 error in Λ moves a copy 6 dB down by
		// about 0.4 dB at d = 0.25).
		l := complex(replicaLambda(sat.PRN, sat.CodePhaseChips, mp.DelayChips, gpsca.CodeRate(sat.DopplerHz)/tr.SampleRate, n), 0)
		var e1, e2 float64
		for k := range min(len(p1), len(p2)) {
			a1 := (p1[k] - l*p2[k]) / (1 - l*l)
			a2 := (p2[k] - l*p1[k]) / (1 - l*l)
			e1 += real(a1)*real(a1) + imag(a1)*imag(a1)
			e2 += real(a2)*real(a2) + imag(a2)*imag(a2)
		}
		// Each solved amplitude carries the windows' noise: P_1 and P_2
		// have noise of variance N·P_d each (P_d the data power) with
		// correlation Λ, so a_i has N·P_d/(1 − Λ²): remove its mean.
		k := float64(min(len(p1), len(p2)))
		lr := real(l)
		bias := k * meanPower(x) * float64(n) / (1 - lr*lr)
		got := db((e1 - bias) / (e2 - bias))
		t.Logf("PRN %d: copy %.3f chips late, %.2f dB weaker (truth %.2f), %d windows of %d", mp.PRN, mp.DelayChips, got, mp.WeakerDB, len(p1), n)
		if math.Abs(got-mp.WeakerDB) > 0.3 {
			t.Errorf("PRN %d: reflected copy %.2f dB below the direct signal, truth %.2f", mp.PRN, got, mp.WeakerDB)
		}
	}
}

// TestSpooferKeyed: a spoofer on from 0.1 s is absent before (its
// correlation is noise there) and present after, and the truth's sample
// span says so.
func TestSpooferKeyed(t *testing.T) {
	t.Parallel()
	s := oneCapture("cf32_le", 4e6, -30, 0.3, 74, Capture{Satellites: spoofSky,
		Spoofers: []Spoofer{{Kind: SpoofCounterfeit, CN0DBHz: 50, StartS: 0.1}}})
	tr, x := writeAndRead(t, s)
	sp := tr.Spoofers[0]
	if sp.StartSample != 400000 || sp.EndSample != tr.Samples {
		t.Fatalf("spoofer span %d–%d, want 400000–%d", sp.StartSample, sp.EndSample, tr.Samples)
	}
	sigma2 := undb(tr.NoiseDBFS)
	sig := sp.Signals[0]
	before := cn0At(x[:390000], tr.SampleRate, sigma2, sig.PRN, sig.CodePhaseChips, sig.DopplerHz, 0)
	// After: the code phase advanced by 410000 samples of code.
	ph := sig.CodePhaseChips + 410000*gpsca.CodeRate(sig.DopplerHz)/tr.SampleRate
	after := cn0At(x[410000:], tr.SampleRate, sigma2, sig.PRN, ph, sig.DopplerHz, 0)
	t.Logf("PRN %d: %.1f dB-Hz before the spoofer starts, %.2f after", sig.PRN, before, after)
	if !(before < 35 || math.IsNaN(before)) || math.Abs(after-sig.CN0DBHz) > 0.4 {
		t.Errorf("keyed spoofer: %.2f dB-Hz before its start, %.2f after (truth %.2f)", before, after, sig.CN0DBHz)
	}
}

// TestSpooferYAMLAndErrors: the YAML keys, their defaults, and bad values
// rejected with the capture, the spoofer and the key named.
func TestSpooferYAMLAndErrors(t *testing.T) {
	t.Parallel()
	const yml = `
name: spoof-yaml
sample_rate: 4e6
captures:
  - name: a
    duration_s: 0.02
    satellites: [{prn: 3, cn0_dbhz: 45, doppler_hz: 100, code_phase_chips: 10}]
    spoofers:
      - {kind: counterfeit}
      - {kind: matched_power}
      - {kind: meaconing, label: pier meacon}
    multipath: {}
`
	s, err := ParseScenario(strings.NewReader(yml), "spoof.yaml")
	if err != nil {
		t.Fatal(err)
	}
	sp := s.Captures[0].Spoofers
	// Defaults as documented on Spoofer and Multipath.
	if sp[0].CN0DBHz != 50 || sp[1].PowerDB != 3 || sp[1].DelayChips[0] != 2 || sp[1].DelayChips[1] != 20 ||
		sp[2].PowerDB != 4 || sp[2].DelayS != 1.5e-6 || sp[2].EndS != 0.02 {
		t.Errorf("defaults %+v", sp)
	}
	if m := s.Captures[0].Multipath; m.DelayChips[1] != 0.8 || m.WeakerDB[0] != 3 {
		t.Errorf("multipath defaults %+v", m)
	}
	bad := []struct{ capture, want string }{
		{`{kind: jamming}`, `spoofers[0] (jamming): kind "jamming" is not one of`},
		{`{kind: matched_power, prns: [9]}`, "prns: 9 is not a satellite of the capture"},
		{`{kind: counterfeit, prns: [40]}`, "prns: 40 not in 1..32"},
		{`{kind: matched_power, delay_chips: [5, 2]}`, "delay_chips [5 2] must be [min, max]"},
		{`{kind: meaconing, delay_chips: [1, 2]}`, "not for meaconing"},
		{`{kind: counterfeit, cn0_dbhz: 90}`, "cn0_dbhz 90 out of range"},
		{`{kind: counterfeit, start_s: 0.5}`, "start_s 0.5 / end_s"},
		{`{kind: counterfeit, power: 3}`, "field power not found"},
	}
	for _, b := range bad {
		y := strings.Replace(yml, "      - {kind: counterfeit}\n      - {kind: matched_power}\n      - {kind: meaconing, label: pier meacon}", "      - "+b.capture, 1)
		_, err := ParseScenario(strings.NewReader(y), "spoof.yaml")
		if err == nil || !strings.Contains(err.Error(), b.want) || !strings.Contains(err.Error(), "spoof.yaml") {
			t.Errorf("%s: error %v, want it to contain %q", b.capture, err, b.want)
		}
	}
	y := strings.Replace(yml, "multipath: {}", "multipath: {weaker_db: [-1, 3]}", 1)
	if _, err := ParseScenario(strings.NewReader(y), "spoof.yaml"); err == nil || !strings.Contains(err.Error(), "capture a: multipath: weaker_db") {
		t.Errorf("bad multipath: error %v", err)
	}
}

// replicaLambda is the correlation, over the first n samples, of the C/A
// code of prn sampled from code phase chip0 at cps chips per sample with
// the same code d chips later.
func replicaLambda(prn int, chip0, d, cps float64, n int) float64 {
	code, _ := gpsca.Code(prn)
	var s float64
	for i := range n {
		a := int(math.Floor(chip0+float64(i)*cps)) % gpsca.CodeLength
		b := int(math.Floor(chip0-d+gpsca.CodeLength+float64(i)*cps)) % gpsca.CodeLength
		s += float64(code[a]) * float64(code[b])
	}
	return s / float64(n)
}
