package synth

import (
	"math"
	"math/cmplx"
	"math/rand/v2"

	"quietband/ingest/gpsca"
)

// Orbit and Earth constants of RandomSky.
const (
	earthRadius  = 6371e3         // m, mean
	orbitRadius  = 26560e3        // m, GPS semi-major axis (IS-GPS-200 nominal, from memory)
	earthGM      = 3.986004418e14 // m³/s², WGS 84 (from memory)
	speedOfLight = 299792458.0    // m/s
	minElevation = 10.0           // degrees: lower satellites are not drawn
	maxSkyDopHz  = 4500.0         // |Doppler| of a drawn satellite, Hz
)

// RandomSky returns a realistic sky of n GPS satellites (distinct PRNs
// 1–32, n ≤ 32) drawn from seed, for tests and demos:
//
//   - each satellite sits at a random place on the sky above 10° elevation
//     (sin(elevation) uniform: uniform over the dome), on a circular orbit
//     of radius 26 560 km at speed √(GM/r) = 3.874 km/s in a random
//     direction, seen from a static receiver on a spherical Earth; Earth
//     rotation is neglected (its few hundred Hz are within what is drawn);
//   - Doppler f_D = −ρ̇·L1/c, ρ̇ the range rate (REFERENCES §4: at most
//     929 m/s, ±4.9 kHz), redrawn until |f_D| ≤ 4.5 kHz;
//   - Doppler rate −ρ̈·L1/c with ρ̈ = (|v|² + a·(r_s − r_u) − ρ̇²)/ρ and
//     a = −GM·r_s/|r_s|³: from −0.937 Hz/s (overhead) to about 0 (at the
//     horizon), since the range accelerates away all through a pass;
//   - C/N0 = 35 + 18·sin(elevation) ± 1 dB (uniform), at most 53 dB-Hz
//     (open sky 35–50 dB-Hz is typical, REFERENCES §8 [M]; the slope with
//     elevation is common practice);
//   - code phase uniform in [0, 1023) chips.
//
// The same seed gives the same sky. Propagate moves it forward in time.
func RandomSky(n int, seed uint64) []Satellite {
	n = max(0, min(n, 32))
	rng := rand.New(rand.NewPCG(seed, 0x736b79)) // "sky"
	prns := rng.Perm(32)[:n]
	v := math.Sqrt(earthGM / orbitRadius)
	out := make([]Satellite, 0, n)
	for _, p := range prns {
		var sat Satellite
		for {
			sinEl := math.Sin(minElevation*math.Pi/180) + rng.Float64()*(1-math.Sin(minElevation*math.Pi/180))
			cosEl := math.Sqrt(1 - sinEl*sinEl)
			az := 2 * math.Pi * rng.Float64()
			e := [3]float64{cosEl * math.Cos(az), cosEl * math.Sin(az), sinEl} // line of sight
			// |r_u + ρe| = r_s with r_u = (0, 0, R_E).
			rho := -earthRadius*sinEl + math.Sqrt(earthRadius*earthRadius*sinEl*sinEl+orbitRadius*orbitRadius-earthRadius*earthRadius)
			rs := [3]float64{rho * e[0], rho * e[1], earthRadius + rho*e[2]}
			// A random unit vector perpendicular to r_s.
			t1 := unit(cross(rs, [3]float64{1, 0, 0}))
			t2 := unit(cross(rs, t1))
			psi := 2 * math.Pi * rng.Float64()
			vs := [3]float64{}
			for k := range vs {
				vs[k] = v * (math.Cos(psi)*t1[k] + math.Sin(psi)*t2[k])
			}
			rhoDot := dot(vs, e)
			acc := -earthGM / (orbitRadius * orbitRadius * orbitRadius)
			los := [3]float64{rs[0], rs[1], rs[2] - earthRadius} // r_s − r_u
			rhoDDot := (v*v + acc*dot(rs, los) - rhoDot*rhoDot) / rho
			fd := -rhoDot * gpsca.L1 / speedOfLight
			jitter := 2*rng.Float64() - 1
			code := 1023 * rng.Float64()
			if math.Abs(fd) > maxSkyDopHz {
				continue
			}
			sat = Satellite{PRN: p + 1,
				CN0DBHz:        math.Round(100*min(53, 35+18*sinEl+jitter)) / 100,
				DopplerHz:      math.Round(10*fd) / 10,
				DopplerRateHzS: math.Round(1e4*(-rhoDDot*gpsca.L1/speedOfLight)) / 1e4,
				CodePhaseChips: math.Round(1e3*code) / 1e3}
			break
		}
		out = append(out, sat)
	}
	return out
}

// Propagate returns the satellites dt seconds later, at constant Doppler
// rate: f_D + ḟ·dt, and the code phase advanced by the chips sent in
// between, ∫R = 1.023 MHz·dt + (f_D·dt + ḟ·dt²/2)/1540 (code Doppler is
// carrier Doppler/1540, IS-GPS-200). A constant rate holds for minutes: a
// real pass changes its rate by about 10⁻⁴ Hz/s² (F·ω² with F = 4.5 kHz
// and ω = 2π/11.97 h) [C].
func Propagate(sats []Satellite, dt float64) []Satellite {
	out := make([]Satellite, len(sats))
	for i, s := range sats {
		out[i] = s
		if dt == 0 {
			continue
		}
		out[i].DopplerHz = s.DopplerHz + s.DopplerRateHzS*dt
		chips := gpsca.ChipRate*dt + (s.DopplerHz*dt+s.DopplerRateHzS*dt*dt/2)/gpsca.CarrierToCodeRatio
		out[i].CodePhaseChips = gpsca.WrapChips(s.CodePhaseChips + math.Mod(chips, gpsca.CodeLength))
	}
	return out
}

func dot(a, b [3]float64) float64 { return a[0]*b[0] + a[1]*b[1] + a[2]*b[2] }

func cross(a, b [3]float64) [3]float64 {
	return [3]float64{a[1]*b[2] - a[2]*b[1], a[2]*b[0] - a[0]*b[2], a[0]*b[1] - a[1]*b[0]}
}

func unit(a [3]float64) [3]float64 {
	l := math.Sqrt(dot(a, a))
	return [3]float64{a[0] / l, a[1] / l, a[2] / l}
}

// movingSatellite adds one GPS L1 C/A signal whose Doppler changes at a
// constant rate and whose frequencies pass through the receiver's clock
// (FrontEnd.ClockPPM). At sample n (of the capture's nominal clock; n may
// be negative, before the first sample, for the passband's filter):
//
//	code phase  chip0 + c1·n + c2·n²   (chips; bits of 20 code periods)
//	carrier     f1·n + f2·n² cycles + φ0
//
// with, for a reference ε fast, fs nominal, f_D and ḟ the true Doppler
// and rate: f1 = ((L1 + f_D)/(1+ε) − fc)/fs, f2 = ḟ/(2·fs²·(1+ε)²),
// c1 = R(f_D)/((1+ε)·fs), c2 = f2/1540 (code follows carrier at 1/1540).
type movingSatellite struct {
	amp                float64
	code               [gpsca.CodeLength]int8
	bits               []int8
	chip0, c1, c2      float64
	f1, f2, phase0     float64
	nbits, periodChips int64
}

func newMovingSatellite(amp float64, code [gpsca.CodeLength]int8, bits []int8, sat Satellite, fs float64, ck clock, phase0 float64) *movingSatellite {
	sc := 1 + ck.eps
	f2 := sat.DopplerRateHzS / (2 * fs * fs * sc * sc)
	return &movingSatellite{amp: amp, code: code, bits: bits,
		chip0: gpsca.WrapChips(sat.CodePhaseChips),
		c1:    gpsca.CodeRate(sat.DopplerHz) / (sc * fs),
		c2:    f2 / gpsca.CarrierToCodeRatio,
		f1:    ck.carrier(gpsca.L1+sat.DopplerHz) / fs,
		f2:    f2, phase0: phase0,
		nbits: int64(len(bits)), periodChips: gpsca.CodeLength * 20}
}

func (s *movingSatellite) add(dst []complex64, n0 int64) {
	nb := float64(n0)
	_, frac := math.Modf(s.f1*nb + s.f2*nb*nb)
	p := cmplx.Rect(s.amp, 2*math.Pi*frac+s.phase0)
	// The phase step from n to n+1 is f1 + f2·(2n + 1) cycles; it grows by
	// 2·f2 every sample.
	_, step := math.Modf(s.f1 + s.f2*(2*nb+1))
	rot := cmplx.Rect(1, 2*math.Pi*step)
	acc := cmplx.Rect(1, 4*math.Pi*s.f2)
	for i := range dst {
		n := nb + float64(i)
		c := int64(math.Floor(s.chip0 + s.c1*n + s.c2*n*n))
		ci := c % gpsca.CodeLength
		if ci < 0 {
			ci += gpsca.CodeLength
		}
		bi := floorDiv(c, s.periodChips) % s.nbits
		if bi < 0 {
			bi += s.nbits
		}
		dst[i] += complex64(p * complex(float64(s.code[ci]*s.bits[bi]), 0))
		p *= rot
		rot *= acc
	}
}

// floorDiv is ⌊a/b⌋ for b > 0.
func floorDiv(a, b int64) int64 {
	q := a / b
	if a%b != 0 && a < 0 {
		q--
	}
	return q
}
