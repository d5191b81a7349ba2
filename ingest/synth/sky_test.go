package synth

import (
	"math"
	"math/cmplx"
	"reflect"
	"testing"

	"quietband/ingest/gpsca"
)

// TestRandomSky: RandomSky draws a realistic sky from a seed, the same for
// the same seed. Over 40 seeds of 12 satellites: distinct PRNs in 1..32,
// C/N0 within 34–53 dB-Hz, |Doppler| ≤ 4.5 kHz (the geometric bound is
// 4.9 kHz, REFERENCES §4), Doppler rates within [−0.937, 0] Hz/s (−ρ̈·L1/c
// is most negative overhead, ρ̈ = GM·R_E/(r_s²·(r_s − R_E)) = 0.178 m/s²,
// and near 0 at the horizon [C: closed form, circular orbit, static
// receiver]); and the pool spreads over the sky: Dopplers beyond ±3.5 kHz
// on both sides, rates below −0.8 Hz/s, C/N0 above 50 dB-Hz.
func TestRandomSky(t *testing.T) {
	t.Parallel()
	if !reflect.DeepEqual(RandomSky(12, 5), RandomSky(12, 5)) {
		t.Fatal("RandomSky(12, 5) differs between calls")
	}
	if reflect.DeepEqual(RandomSky(12, 5), RandomSky(12, 6)) {
		t.Fatal("seeds 5 and 6 give the same sky")
	}
	zenith := -earthGM * earthRadius / (orbitRadius * orbitRadius * (orbitRadius - earthRadius)) * gpsca.L1 / speedOfLight
	var minDop, maxDop, minRate, maxRate, maxCN0 float64
	for seed := uint64(1); seed <= 40; seed++ {
		sky := RandomSky(12, seed)
		if len(sky) != 12 {
			t.Fatalf("seed %d: %d satellites", seed, len(sky))
		}
		seen := map[int]bool{}
		for _, s := range sky {
			if s.PRN < 1 || s.PRN > 32 || seen[s.PRN] {
				t.Fatalf("seed %d: PRN %d repeated or out of range", seed, s.PRN)
			}
			seen[s.PRN] = true
			if s.CN0DBHz < 34 || s.CN0DBHz > 53 || math.Abs(s.DopplerHz) > 4500 || s.DopplerRateHzS < zenith-1e-3 || s.DopplerRateHzS > 1e-3 ||
				s.CodePhaseChips < 0 || s.CodePhaseChips >= 1023 {
				t.Errorf("seed %d: unrealistic satellite %+v", seed, s)
			}
			minDop, maxDop = min(minDop, s.DopplerHz), max(maxDop, s.DopplerHz)
			minRate, maxRate = min(minRate, s.DopplerRateHzS), max(maxRate, s.DopplerRateHzS)
			maxCN0 = max(maxCN0, s.CN0DBHz)
		}
	}
	t.Logf("Doppler %.0f to %.0f Hz, rate %.3f to %.3f Hz/s (overhead %.3f), C/N0 up to %.1f", minDop, maxDop, minRate, maxRate, zenith, maxCN0)
	if minDop > -3500 || maxDop < 3500 || minRate > -0.8 || maxCN0 < 50 {
		t.Errorf("the drawn skies do not spread over the sky")
	}
	if sky := RandomSky(40, 1); len(sky) != 32 {
		t.Errorf("RandomSky(40, 1) gave %d satellites, want all 32", len(sky))
	}
}

// rateEstimate finds the Doppler rate left in correlations p taken at
// times tk with a replica of constant Doppler: squaring removes the data
// bits, leaving a phase 2·π·ḟ·t² (radians), and the rate is the one whose
// de-chirp maximises |Σ p_k²·e^{−j2π·ḟ·t_k²}| on a 0.005 Hz/s grid.
func rateEstimate(p []complex128, tk []float64) float64 {
	best, bestV := 0.0, -1.0
	for r := -2.0; r <= 2.0; r += 0.005 {
		var acc complex128
		for k, v := range p {
			acc += v * v * cmplx.Rect(1, -2*math.Pi*r*tk[k]*tk[k])
		}
		if a := cmplx.Abs(acc); a > bestV {
			best, bestV = r, a
		}
	}
	return best
}

// TestDopplerRate: a satellite whose Doppler changes at ḟ Hz/s carries
// that rate in its carrier: the rate left after a constant-Doppler replica
// is ḟ within 0.03 Hz/s (the de-chirp peak is 1/T² = 1 Hz/s wide over
// 1 s; at 50 dB-Hz it is found to a few 0.001 Hz/s), 0 for a satellite
// without a rate; and the replica with the truth's rate reads the C/N0
// back within 0.25 dB (TestSatelliteCN0's budget).
func TestDopplerRate(t *testing.T) {
	t.Parallel()
	const fs = 4e6
	for i, rate := range []float64{-0.9, 0.6, 0} {
		sat := Satellite{PRN: 14, CN0DBHz: 50, DopplerHz: 1500, CodePhaseChips: 512.5, DopplerRateHzS: rate}
		tr, x := writeAndRead(t, oneCapture("ci16_le", fs, -30, 1, uint64(210+i), Capture{Satellites: []Satellite{sat}}))
		ts := tr.Satellites[0]
		if rate != 0 && (ts.ApparentDopplerRateHzS == nil || *ts.ApparentDopplerRateHzS != rate) {
			t.Fatalf("truth %+v", ts)
		}
		flat := replicaFor(sat.PRN, sat.CodePhaseChips, sat.DopplerHz, 0, gpsca.CodeRate(sat.DopplerHz), fs)
		p, _ := flat.correlations(t, x)
		tk := make([]float64, len(p))
		for k := range tk {
			// Window k starts at code epoch k+1, about (k+1) ms in.
			tk[k] = (float64(k+1)*gpsca.CodeLength - sat.CodePhaseChips) / gpsca.CodeRate(sat.DopplerHz)
		}
		got := rateEstimate(p, tk)
		full := replicaFor(sat.PRN, sat.CodePhaseChips, sat.DopplerHz, rate, gpsca.CodeRate(sat.DopplerHz), fs)
		cn0 := full.cn0(t, x, fs)
		t.Logf("rate %g Hz/s: measured %.3f; C/N0 with the rate %.2f dB-Hz", rate, got, cn0)
		if math.Abs(got-rate) > 0.03 {
			t.Errorf("Doppler rate %g Hz/s: the carrier shows %.3f", rate, got)
		}
		if math.Abs(cn0-sat.CN0DBHz) > 0.25 {
			t.Errorf("Doppler rate %g Hz/s: C/N0 %.2f dB-Hz with the full replica, truth %g", rate, cn0, sat.CN0DBHz)
		}
	}
}

// TestSkyPropagation: a scenario's sky is carried to each capture's
// offset_s: Doppler f_D + ḟ·Δt and code phase advanced by ∫R dt,
// R = 1.023 MHz·(1 + f_D(t)/L1) (IS-GPS-200: code Doppler = carrier
// Doppler/1540), here integrated by Simpson's rule [C] and compared to
// 10⁻⁶ chip; the samples agree (C/N0 read back at the propagated values,
// nothing at the start's code phase). A capture listing satellites: []
// has none.
func TestSkyPropagation(t *testing.T) {
	t.Parallel()
	const fs = 4e6
	sky := []Satellite{{PRN: 7, CN0DBHz: 50, DopplerHz: 2000, CodePhaseChips: 100.3, DopplerRateHzS: -0.5}}
	s := Scenario{Name: "sky", Format: "ci16_le", SampleRate: fs, NoiseDBFS: -30, Start: testStart, Seed: 220, Sky: sky,
		Captures: []Capture{{Name: "t0", DurationS: 0.5}, {Name: "t20", OffsetS: 20, DurationS: 0.5}, {Name: "t45", OffsetS: 45.5, DurationS: 0.5},
			{Name: "none", OffsetS: 50, DurationS: 0.01, Satellites: []Satellite{}}}}
	dir, truths := writeScenario(t, s)
	if len(truths[3].Satellites) != 0 {
		t.Errorf("capture with satellites: [] has %d", len(truths[3].Satellites))
	}
	for i, dt := range []float64{0, 20, 45.5} {
		ts := truths[i].Satellites[0]
		wantDop := 2000 - 0.5*dt
		// Simpson on the Doppler part; the nominal chips exactly mod 1023.
		const steps = 1000
		var sum float64
		for k := 0; k <= steps; k++ {
			w := 2.0
			switch {
			case k == 0 || k == steps:
				w = 1
			case k%2 == 1:
				w = 4
			}
			sum += w * (2000 - 0.5*dt*float64(k)/steps) / 1540
		}
		dopChips := sum * dt / steps / 3
		wantCode := gpsca.WrapChips(100.3 + math.Mod(gpsca.ChipRate*dt, gpsca.CodeLength) + dopChips)
		if math.Abs(ts.DopplerHz-wantDop) > 1e-9 || math.Abs(math.Remainder(ts.CodePhaseChips-wantCode, gpsca.CodeLength)) > 1e-6 {
			t.Errorf("Δt %g s: Doppler %.6f code phase %.7f; want %.6f, %.7f", dt, ts.DopplerHz, ts.CodePhaseChips, wantDop, wantCode)
		}
		x := readCapture(t, dir, truths[i])
		at := replicaFor(7, ts.CodePhaseChips, ts.DopplerHz, -0.5, gpsca.CodeRate(ts.DopplerHz), fs)
		start := replicaFor(7, 100.3, ts.DopplerHz, -0.5, gpsca.CodeRate(ts.DopplerHz), fs)
		c1, c0 := at.cn0(t, x, fs), start.cn0(t, x, fs)
		t.Logf("Δt %g s: C/N0 at the propagated code phase %.2f dB-Hz, at the start's %.2f", dt, c1, c0)
		if math.Abs(c1-50) > 0.3 {
			t.Errorf("Δt %g s: C/N0 %.2f at the propagated values, truth 50", dt, c1)
		}
		if dt != 0 && c0 > 40 {
			t.Errorf("Δt %g s: the unpropagated code phase still finds %.2f dB-Hz", dt, c0)
		}
	}
}
