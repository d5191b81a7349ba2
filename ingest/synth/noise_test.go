package synth

import (
	"fmt"
	"math"
	"testing"
)

// chiSquareExp is Pearson's X² = Σ (O_i − n·p_i)²/(n·p_i) of |x|²/σ² against
// the exponential law of the power of circular complex Gaussian samples,
// over `bins` equiprobable cells (edges −ln(1 − i/bins)). σ² is given, not
// estimated, so X² has bins − 1 degrees of freedom.
func chiSquareExp(x []complex64, sigma2 float64, bins int) float64 {
	edges := make([]float64, bins-1)
	for i := range edges {
		edges[i] = -math.Log(1 - float64(i+1)/float64(bins))
	}
	count := make([]float64, bins)
	for _, v := range x {
		p := abs2(v) / sigma2
		lo, hi := 0, len(edges)
		for lo < hi { // first edge above p
			m := (lo + hi) / 2
			if edges[m] > p {
				hi = m
			} else {
				lo = m + 1
			}
		}
		count[lo]++
	}
	e := float64(len(x)) / float64(bins)
	var x2 float64
	for _, o := range count {
		x2 += (o - e) * (o - e) / e
	}
	return x2
}

// TestNoise: a capture with no satellite and no emitter is thermal noise
// of power σ² = 10^(NoiseDBFS/10), circular complex Gaussian.
//
// With M = 10⁶ samples: the mean power has relative σ 1/√M = 0.1 %
// (REFERENCES §9 [C]) against the 1 % bound; the kurtosis ratio
// r = E|x|⁴/E²|x|² has σ_r = 2/√M = 0.002 (delta method with the
// exponential moments 1, 2, 6, 24, computed) against 2 % of 2 = 0.04; the
// I–Q correlation coefficient and the normalised pseudo-variance E[x²]/σ²
// have σ ≈ 1/√M and √2/√M and are held below 6/√M.
func TestNoise(t *testing.T) {
	t.Parallel()
	cases := []struct {
		format    string
		noiseDBFS float64
		fine      bool // enough levels for the χ² shape test
	}{
		{"ci16_le", -30, true},
		{"cf32_le", -30, true},
		// 8 bits: σ = 9 LSB per component; uniform quantisation adds
		// Δ²/12 per component (Widrow), 2·(1/128)²/12 = 1.0·10⁻⁵, i.e.
		// 0.1 % of σ² = 10⁻². At ~9 LSB the power takes few distinct
		// values near zero, so the fine χ² shape test does not apply.
		{"ci8", -20, false},
		{"cu8", -20, false},
	}
	for i, tc := range cases {
		t.Run(tc.format, func(t *testing.T) {
			t.Parallel()
			tr, x := writeAndRead(t, oneCapture(tc.format, 4e6, tc.noiseDBFS, 0.25, uint64(200+i), Capture{}))
			if len(tr.Satellites)+len(tr.Emitters) != 0 {
				t.Fatalf("truth lists sources in an empty capture: %+v", tr)
			}
			if want := tc.noiseDBFS - db(4e6); math.Abs(tr.N0DBFSPerHz-want) > 1e-9 {
				t.Errorf("truth N0 %g dBFS/Hz, want %g (N0 = σ²/fs)", tr.N0DBFSPerHz, want)
			}
			sigma2 := undb(tc.noiseDBFS)
			m := float64(len(x))
			var sI, sQ, sII, sQQ, sIQ float64
			for _, v := range x {
				a, b := float64(real(v)), float64(imag(v))
				sI += a
				sQ += b
				sII += a * a
				sQQ += b * b
				sIQ += a * b
			}
			p := (sII + sQQ) / m
			t.Logf("power %.4f dB re σ², kurtosis ratio %.4f, ρ_IQ %.2g", db(p/sigma2), kurtosisRatio(x), sIQ/math.Sqrt(sII*sQQ))
			if math.Abs(p/sigma2-1) > 0.01 {
				t.Errorf("mean power %.5g, want 10^(%g/10) = %.5g within 1 %% (%.3f dB off)", p, tc.noiseDBFS, sigma2, db(p/sigma2))
			}
			if r := kurtosisRatio(x); math.Abs(r/2-1) > 0.02 {
				t.Errorf("E|x|⁴/E²|x|² = %.4f, want 2 (complex Gaussian) within 2 %%", r)
			}
			lim := 6 / math.Sqrt(m)
			if rho := sIQ / math.Sqrt(sII*sQQ); math.Abs(rho) > lim {
				t.Errorf("I–Q correlation %.2g, want |ρ| < %.2g", rho, lim)
			}
			// Circularity: E[x²] = E[I²] − E[Q²] + 2jE[IQ] = 0.
			if pv := math.Hypot(sII-sQQ, 2*sIQ) / m / sigma2; pv > lim {
				t.Errorf("pseudo-variance |E[x²]|/σ² = %.2g, want < %.2g (I and Q of equal power)", pv, lim)
			}
			if dc := math.Hypot(sI, sQ) / m / math.Sqrt(sigma2); dc > lim {
				t.Errorf("mean |E[x]|/σ = %.2g, want < %.2g", dc, lim)
			}
			// Shape of |x|²/σ² against Exp(1): 16 cells, 15 degrees of
			// freedom; critical value 37.70 at α = 10⁻³ (REFERENCES §9 [C]).
			if x2 := chiSquareExp(x, sigma2, 16); tc.fine && x2 > 37.70 {
				t.Errorf("χ² of |x|²/σ² against Exp(1) = %.1f > 37.70 (15 dof, α = 1e-3)", x2)
			}
		})
	}
}

// TestWidebandNoise: floor_rise_db R raises the total power by R dB. The
// truth's J/N is the AGC relation read backwards, R = 10·log10(1 + J/N)
// (REFERENCES §9 [C]: J/N = −10, −3, 0, +10 dB give 0.41, 1.76, 3.01,
// 10.41 dB, quoted to 0.01 dB). M = 4·10⁵ samples: power σ 1/√M = 0.16 %
// = 0.007 dB against 0.05 dB.
func TestWidebandNoise(t *testing.T) {
	t.Parallel()
	cases := []struct {
		rise, jn   float64 // REFERENCES §9 pairs
		start, end float64
	}{
		{rise: 0.41, jn: -10},
		{rise: 1.76, jn: -3},
		{rise: 3.01, jn: 0},
		{rise: 10.41, jn: 10},
		{rise: 3.01, jn: 0, start: 0.03, end: 0.08},
	}
	for i, tc := range cases {
		t.Run(fmt.Sprintf("%gdB/%g-%g", tc.rise, tc.start, tc.end), func(t *testing.T) {
			t.Parallel()
			e := Emitter{Kind: KindWidebandNoise, FloorRiseDB: tc.rise, StartS: tc.start, EndS: tc.end}
			tr, x := writeAndRead(t, oneCapture("ci16_le", 4e6, -30, 0.1, uint64(300+i), Capture{Emitters: []Emitter{e}}))
			te := tr.Emitters[0]
			// The table is rounded to 0.01 dB; dJN/dR = (1 + J/N)/(J/N).
			jn := undb(tc.jn)
			if tol := 0.005*(1+jn)/jn + 1e-3; math.Abs(te.JNDB-tc.jn) > tol {
				t.Errorf("truth J/N %.3f dB for a %g dB rise, want %g ± %.3f", te.JNDB, tc.rise, tc.jn, tol)
			}
			sigma2 := undb(tr.NoiseDBFS)
			lo, hi := int(te.StartSample), int(te.EndSample)
			if got := db(meanPower(x[lo:hi]) / sigma2); math.Abs(got-tc.rise) > 0.05 {
				t.Errorf("floor rise %.3f dB, want %g within 0.05 dB", got, tc.rise)
			}
			if r := kurtosisRatio(x[lo:hi]); math.Abs(r/2-1) > 0.02 {
				t.Errorf("kurtosis ratio %.4f with the noise jammer on, want 2", r)
			}
			if lo > 0 || hi < len(x) {
				off := append(append([]complex64(nil), x[:lo]...), x[hi:]...)
				if got := db(meanPower(off) / sigma2); math.Abs(got) > 0.05 {
					t.Errorf("power outside the emitter span %.3f dB above the floor, want 0", got)
				}
			}
		})
	}
}

// bandHop is the overlap-add hop of the band-limited noise source for a
// band of bw at rate fs (its block length over two).
func bandHop(fs, bw float64) int {
	return newBandNoise(nil, fs, 0, bw, 1, span{}).n / 2
}

// chunkPowerStd predicts the standard deviation of the mean power of L
// consecutive samples of a stationary circular Gaussian process with
// autocorrelation R(τ): by Isserlis' theorem cov(|x_i|², |x_j|²) =
// |R(i−j)|², so var = (1/L²) Σ_{|τ|<L} (L − |τ|)·|R(τ)|². For white noise σ²
// plus a flat band of power J and width B, |R(τ)| = |σ²δ(τ) +
// J·sinc(Bτ/fs)·e^{j2πf0τ/fs}|.
func chunkPowerStd(l int, fs, sigma2, j, bw, f0 float64) float64 {
	var v float64
	for tau := -(l - 1); tau < l; tau++ {
		u := bw * float64(tau) / fs
		s := 1.0
		if tau != 0 {
			s = math.Sin(math.Pi*u) / (math.Pi * u)
		}
		r := complex(j*s, 0) * complex(math.Cos(2*math.Pi*f0*float64(tau)/fs), math.Sin(2*math.Pi*f0*float64(tau)/fs))
		if tau == 0 {
			r += complex(sigma2, 0)
		}
		v += float64(l-abs(tau)) * (real(r)*real(r) + imag(r)*imag(r))
	}
	return math.Sqrt(v) / float64(l)
}

func abs(i int) int {
	if i < 0 {
		return -i
	}
	return i
}

// TestNarrowbandNoise checks band-limited noise against its truth: a Welch
// PSD (Welch 1967; gonum FFT, Hann window, 50 % overlap) shows the band at
// the configured offset and −3 dB width, the added power is J/N·σ², the
// samples are Gaussian, and the power does not step where the source's
// overlap-added blocks join.
func TestNarrowbandNoise(t *testing.T) {
	t.Parallel()
	cases := []struct {
		offset, bw, jn, noise float64
	}{
		{800e3, 200e3, 3, -30},   // the built-in "narrowband"
		{-1.1e6, 500e3, 10, -30}, // below centre
		{250e3, 10e3, 6, -30},    // narrow enough for a longer source block
		{0, 1e6, 20, -40},        // far above the floor: the band alone
	}
	const fs, dur = 4e6, 0.25
	for i, tc := range cases {
		t.Run(fmt.Sprintf("%gHz/%gHz", tc.offset, tc.bw), func(t *testing.T) {
			t.Parallel()
			e := Emitter{Kind: KindNarrowbandNoise, OffsetHz: tc.offset, BandwidthHz: tc.bw, JNDB: tc.jn}
			tr, x := writeAndRead(t, oneCapture("ci16_le", fs, tc.noise, dur, uint64(400+i), Capture{Emitters: []Emitter{e}}))
			if tr.Clipped != 0 {
				t.Fatalf("%d samples clipped", tr.Clipped)
			}
			sigma2 := undb(tc.noise)
			j := undb(tc.jn) * sigma2

			// Added power, time domain. Its σ is about 1/√(B·T) of J
			// (time-bandwidth product; 0.3 % to 2 % here) plus 1/√M of the
			// total, well inside 0.2 dB.
			if got := db((meanPower(x) - sigma2) / sigma2); math.Abs(got-tc.jn) > 0.2 {
				t.Errorf("added power J/N %.3f dB, want %g within 0.2 dB", got, tc.jn)
			}

			// Welch PSD: about 32 bins across the band.
			n := 256
			for float64(n)*tc.bw/fs < 32 {
				n *= 2
			}
			psd := welch(x, n, fs)
			floor := sigma2 / fs
			// Excess over the white floor, in frequency order.
			ex := make([]float64, n)
			for idx := range ex { // frequency −fs/2 + idx·fs/n
				ex[idx] = psd[(idx+n/2)%n] - floor
			}
			freq := func(idx int) float64 { return -fs/2 + float64(idx)*fs/float64(n) }
			c := int(math.Round((tc.offset + fs/2) / fs * float64(n)))
			var core []float64
			for idx := range ex {
				if math.Abs(freq(idx)-tc.offset) < 0.3*tc.bw {
					core = append(core, ex[idx])
				}
			}
			plateau := median(core)
			if want := j / tc.bw; math.Abs(db(plateau/want)) > 0.5 {
				t.Errorf("in-band PSD %.4g/Hz, want J/B = %.4g/Hz", plateau, want)
			}
			// Half-power crossings, walking out from the centre, with
			// linear interpolation between bins.
			edge := func(step int) float64 {
				for idx := c; idx+step >= 0 && idx+step < n; idx += step {
					a, b := ex[idx], ex[idx+step]
					if b < plateau/2 {
						return freq(idx) + float64(step)*fs/float64(n)*(a-plateau/2)/(a-b)
					}
				}
				t.Fatalf("band edge not found")
				return 0
			}
			lo, hi := edge(-1), edge(+1)
			t.Logf("added J/N %.3f dB; band %.0f…%.0f Hz (width %.0f, centre %.0f); plateau %.3f dB re J/B; kurtosis %.4f",
				db((meanPower(x)-sigma2)/sigma2), lo, hi, hi-lo, (lo+hi)/2, db(plateau*tc.bw/j), kurtosisRatio(x))
			if w := hi - lo; math.Abs(w/tc.bw-1) > 0.05 {
				t.Errorf("−3 dB width %.0f Hz, want %g within 5 %%", w, tc.bw)
			}
			if ctr := (lo + hi) / 2; math.Abs(ctr-tc.offset) > 0.05*tc.bw {
				t.Errorf("band centre %.0f Hz, want %g", ctr, tc.offset)
			}
			// Nothing outside the band: median excess beyond 1.5 B/2 from
			// the centre is ≤ 2 % of the floor.
			var out []float64
			for idx := range ex {
				if d := math.Abs(freq(idx) - tc.offset); d > 0.75*tc.bw && d < fs/2-0.75*tc.bw {
					out = append(out, ex[idx])
				}
			}
			if m := median(out); math.Abs(m) > 0.02*floor {
				t.Errorf("PSD outside the band %.3g above the floor (%.2g of it)", m, m/floor)
			}

			// Gaussian: σ_r ≈ 2/√K with K ≈ B·T independent samples of the
			// band (delta method as in TestNoise); 5σ.
			keff := math.Min(float64(len(x)), tc.bw*dur)
			if r, tol := kurtosisRatio(x), 5*2/math.Sqrt(keff); math.Abs(r-2) > tol {
				t.Errorf("kurtosis ratio %.4f, want 2 ± %.3f (Gaussian)", r, tol)
			}

			// Overlap-add joins. (a) Power folded by position within a hop:
			// 32 cells, each one value per hop; every cell mean must agree
			// with the overall mean within 4.5 standard errors (the spread
			// across hops measured, not assumed).
			hop := bandHop(fs, tc.bw)
			const cells = 32
			hops := len(x) / hop
			cellVals := make([][]float64, cells)
			for h := 0; h < hops; h++ {
				for cc := 0; cc < cells; cc++ {
					s := h*hop + cc*hop/cells
					cellVals[cc] = append(cellVals[cc], meanPower(x[s:s+hop/cells]))
				}
			}
			total := meanPower(x[:hops*hop])
			for cc, v := range cellVals {
				m, sd := meanStd(v)
				if z := (m - total) / (sd / math.Sqrt(float64(len(v)))); math.Abs(z) > 4.5 {
					t.Errorf("power at hop position %d/%d is %.4g, mean %.4g (z = %.1f): a step at the block joins", cc, cells, m, total, z)
				}
			}
			// (b) The variance of consecutive 1024-sample chunks is as flat
			// as a stationary Gaussian process allows: the spread of the
			// chunk powers matches the Isserlis prediction within 15 %
			// (about 5σ for ~10³ chunks).
			const l = 1024
			var chunks []float64
			for s := 0; s+l <= len(x); s += l {
				chunks = append(chunks, meanPower(x[s:s+l]))
			}
			_, sd := meanStd(chunks)
			want := chunkPowerStd(l, fs, sigma2, j, tc.bw, tc.offset)
			t.Logf("chunk-power std %.4g, Isserlis %.4g (ratio %.3f); hop %d samples", sd, want, sd/want, hop)
			if ratio := sd / want; math.Abs(ratio-1) > 0.15 {
				t.Errorf("std of 1024-sample chunk powers %.4g, a stationary Gaussian band gives %.4g (ratio %.3f)", sd, want, ratio)
			}
		})
	}
}
