package synth

import (
	"fmt"
	"math"
	"math/cmplx"
	"testing"
)

// TestKeyed: an emitter keyed on and off several times per capture is
// present exactly in its intervals, each listed in the truth with its
// sample span: a CW's J/N by correlation within 0.1 dB inside each
// interval (≥ 2·10⁴ samples: TestCW's budget at 10 dB), nothing between
// them (correlation power under 20·σ²/M); a noise jammer's power steps
// likewise (mean power within 0.1 dB on 2·10⁴ samples, σ 0.03 dB).
func TestKeyed(t *testing.T) {
	t.Parallel()
	const fs = 2e6
	on := [][]float64{{0.01, 0.02}, {0.05, 0.07}, {0.09, 0.1}}
	cw := Emitter{Kind: KindCW, OffsetHz: 321e3, JNDB: 10, On: on}
	noise := Emitter{Kind: KindWidebandNoise, FloorRiseDB: 3, On: on}
	for _, e := range []Emitter{cw, noise} {
		tr, x := writeAndRead(t, oneCapture("cf32_le", fs, -40, 0.1, 170, Capture{Emitters: []Emitter{e}}))
		te := tr.Emitters[0]
		if len(te.Intervals) != 3 || te.StartS != 0.01 || te.EndS != 0.1 || te.StartSample != 20000 || te.EndSample != 200000 {
			t.Fatalf("%s: truth %+v", e.Kind, te)
		}
		sigma2 := undb(tr.NoiseDBFS)
		prev := 0
		for k, iv := range te.Intervals {
			if iv.StartSample != int64(math.Round(on[k][0]*fs)) || iv.EndSample != int64(math.Round(on[k][1]*fs)) || iv.StartS != on[k][0] {
				t.Errorf("%s: interval %d %+v, want %v s", e.Kind, k, iv, on[k])
			}
			lo, hi := int(iv.StartSample), int(iv.EndSample)
			switch e.Kind {
			case KindCW:
				c := toneCorrelation(x, lo, hi, *te.Tones[0].ApparentOffsetHz, fs)
				if jn := db(cmplx.Abs(c) * cmplx.Abs(c) / sigma2); math.Abs(jn-10) > 0.1 {
					t.Errorf("cw in interval %d: J/N %.3f dB, want 10", k, jn)
				}
				if prev < lo {
					c := toneCorrelation(x, prev, lo, 321e3, fs)
					if p := cmplx.Abs(c) * cmplx.Abs(c); p > 20*sigma2/float64(lo-prev) {
						t.Errorf("cw present before interval %d: %.3g (noise %.3g)", k, p, sigma2/float64(lo-prev))
					}
				}
			default:
				if p := db(meanPower(x[lo:hi]) / sigma2); math.Abs(p-3) > 0.1 {
					t.Errorf("noise in interval %d: %.3f dB above the floor, want 3", k, p)
				}
				if prev < lo {
					if p := db(meanPower(x[prev:lo]) / sigma2); math.Abs(p) > 0.1 {
						t.Errorf("noise before interval %d: %.3f dB above the floor, want 0", k, p)
					}
				}
			}
			prev = hi
		}
	}
}

// aaGain is the anti-alias model of the synthesizer, written out again for
// the test: flat to 0.8·fs/2, raised cosine to 0 at fs/2 (REFERENCES §12.6
// [M]: the outer 10–20 % of a capture rolls off).
func aaGain(f, fs float64) float64 {
	a := math.Abs(f) / (fs / 2)
	switch {
	case a <= 0.8:
		return 1
	case a >= 1:
		return 0
	}
	return 0.5 * (1 + math.Cos(math.Pi*(a-0.8)/0.2))
}

// TestWideSweep: a chirp jammer sweeping far beyond the capture band (cheap
// jammers sweep 10–40 MHz, REFERENCES §5 [M]) is written without
// aliasing, and sweep periods up to 1 ms work, inside the band or beyond.
//
//   - The truth's in-band span is the part within ±fs/2, and its
//     apparent_jn_db is J/N·mean(H²) over the sweep's samples; for a
//     linear sweep over [lo, hi] beyond the band the integral gives
//     (1/(hi−lo))·(2·0.8·fs/2 + 2·(3/8)·0.2·fs/2) (∫₀¹((1 + cos πx)/2)² dx =
//     3/8) [C: closed form]; a sweep crossing the band in ~11 samples, on
//     a sample grid that repeats every period, departs from the integral
//     by up to 0.11 dB: bound 0.15 dB. The measured J/N is the truth's
//     within 0.05 dB (signal 30 dB over the floor, 2·10⁵ samples).
//   - No aliasing: where the model frequency is in the flat band, the
//     phase-difference frequency (REFERENCES §10) of every sample matches
//     the model (the mean of f at n−1 and n) within 7σ, σ = fs/(2π√ρ)
//     at per-sample SNR ρ = J/N; where the model frequency lies beyond
//     ±fs/2, the samples hold the noise floor only (mean within 5 %).
func TestWideSweep(t *testing.T) {
	t.Parallel()
	const fs = 4e6
	cases := []struct {
		shape             string
		low, high, period float64
	}{
		{"up", -15e6, 15e6, 20e-6},
		{"down", -5e6, 25e6, 40e-6},
		{"triangle", -12e6, 8e6, 60e-6},
		{"up", -6e6, 6e6, 1e-3},
		{"up", -1.5e6, 1.5e6, 1e-3}, // inside the band: unshaped, as before
	}
	for i, tc := range cases {
		t.Run(fmt.Sprintf("%s/%g-%g/%gs", tc.shape, tc.low, tc.high, tc.period), func(t *testing.T) {
			t.Parallel()
			const jnDB = 30
			e := Emitter{Kind: KindSwept, JNDB: jnDB, LowHz: tc.low, HighHz: tc.high, PeriodS: tc.period, Shape: tc.shape}
			tr, x := writeAndRead(t, oneCapture("cf32_le", fs, -50, 0.05, uint64(180+i), Capture{Emitters: []Emitter{e}}))
			te := tr.Emitters[0]
			sigma2 := undb(tr.NoiseDBFS)
			inside := tc.low > -fs/2 && tc.high < fs/2
			apparent := float64(jnDB)
			if inside {
				// No new option: the truth is as it always was.
				if te.ApparentJNDB != nil {
					t.Errorf("in-band sweep: truth has apparent_jn_db %g", *te.ApparentJNDB)
				}
			} else {
				if te.ApparentJNDB == nil || te.InBandLowHz == nil {
					t.Fatalf("truth lacks apparent values: %+v", te)
				}
				if *te.InBandLowHz != max(tc.low, -fs/2) || *te.InBandHighHz != min(tc.high, fs/2) {
					t.Errorf("in-band span %g to %g Hz", *te.InBandLowHz, *te.InBandHighHz)
				}
				closed := jnDB + db((0.8*fs+0.375*0.2*fs)/(tc.high-tc.low))
				if d := *te.ApparentJNDB - closed; math.Abs(d) > 0.15 {
					t.Errorf("apparent_jn_db %.3f, closed form %.3f", *te.ApparentJNDB, closed)
				}
				apparent = *te.ApparentJNDB
			}
			if got := db(meanPower(x)/sigma2 - 1); math.Abs(got-apparent) > 0.05 {
				t.Errorf("measured J/N %.3f dB, truth %.3f", got, apparent)
			}
			sd := fs / (2 * math.Pi * math.Sqrt(undb(jnDB)))
			var worst float64
			var outP float64
			var outN, checked int
			for n := 1; n < len(x); n++ {
				f0 := sweepModel(tc.shape, tc.low, tc.high, tc.period, float64(n-1)/fs)
				f1 := sweepModel(tc.shape, tc.low, tc.high, tc.period, float64(n)/fs)
				// Skip the samples next to a sawtooth's flyback, where the
				// phase is free (and rounding decides which side of the
				// boundary a sample falls on).
				fb := false
				for k := n - 2; k <= n+1; k++ {
					a := sweepModel(tc.shape, tc.low, tc.high, tc.period, float64(k)/fs)
					b := sweepModel(tc.shape, tc.low, tc.high, tc.period, float64(k+1)/fs)
					fb = fb || math.Abs(b-a) > (tc.high-tc.low)/2
				}
				if fb {
					continue
				}
				switch {
				case math.Abs(f0) < 0.8*fs/2 && math.Abs(f1) < 0.8*fs/2:
					fhat := cmplx.Phase(complex128(x[n])*cmplx.Conj(complex128(x[n-1]))) / (2 * math.Pi) * fs
					d := math.Abs(math.Remainder(fhat-(f0+f1)/2, fs))
					worst = max(worst, d)
					checked++
				case math.Abs(f0) > fs/2 && math.Abs(f1) > fs/2:
					outP += abs2(x[n])
					outN++
				}
			}
			t.Logf("J/N %.3f dB; %d in-band samples within %.1f kHz of the sweep (σ %.1f kHz); %d samples beyond the band at %.3f of the floor",
				apparent, checked, worst/1e3, sd/1e3, outN, outP/float64(max(outN, 1))/sigma2)
			if worst > 7*sd {
				t.Errorf("instantaneous frequency %.1f kHz from the sweep model (7σ = %.1f kHz): aliased or off", worst/1e3, 7*sd/1e3)
			}
			if outN > 0 && math.Abs(outP/float64(outN)/sigma2-1) > 0.05 {
				t.Errorf("while the sweep is beyond ±fs/2 the samples hold %.3f × the noise floor: something aliased in", outP/float64(outN)/sigma2)
			}
			if inside && checked < len(x)/2 {
				t.Errorf("only %d samples checked", checked)
			}
		})
	}
}

// hopPulse is one pulse of a hopping train: where it is and which channel
// carries it.
type hopPulse struct {
	first, end, ch int
}

// pulsesByChannel finds the pulses above half amplitude a (runs of at
// least 5 samples: noise makes the envelope flicker across the threshold
// on a pulse's flanks) and attributes each to the channel whose tone
// correlation over the pulse is strongest, requiring it to be 20 dB above
// every other channel's.
func pulsesByChannel(t *testing.T, x []complex64, fs, a float64, channels []float64) []hopPulse {
	t.Helper()
	var out []hopPulse
	for _, p := range findPulses(x, fs, a) {
		if p.end-p.first < 5 {
			continue
		}
		best, second := -1, 0.0
		var pw []float64
		for _, f := range channels {
			c := toneCorrelation(x, p.first, p.end, f, fs)
			pw = append(pw, cmplx.Abs(c)*cmplx.Abs(c))
		}
		for k, v := range pw {
			if best < 0 || v > pw[best] {
				best = k
			}
		}
		for k, v := range pw {
			if k != best {
				second = max(second, v)
			}
		}
		if pw[best] < 100*second {
			t.Fatalf("pulse at sample %d: channel powers %v, no channel clearly carries it", p.first, pw)
		}
		out = append(out, hopPulse{p.first, p.end, best})
	}
	return out
}

// TestHoppingPulses: a pulsed emitter with channels_hz sends every pulse
// (or pair) on one of its channels, pseudo-randomly: each pulse sits on
// exactly one channel (20 dB above the others); each channel carries
// 1/K of the pulses, and consecutive pulses share a channel 1/K of the
// time (a cyclic hop would never), both within 5 binomial σ [C]; the two
// pulses of a pair share their channel; another emitter in the same
// capture hops differently. The truth lists the channels on the
// recording's axis.
func TestHoppingPulses(t *testing.T) {
	t.Parallel()
	const fs = 10e6
	chans := []float64{-3e6, 0, 3e6}
	rect := Emitter{Kind: KindPulsed, Pulse: "rect", WidthS: 6.4e-6, PRIS: 50e-6, JNDB: 30, ChannelsHz: chans}
	pairs := Emitter{Kind: KindPulsed, Pulse: "gaussian_pair", PRIS: 200e-6, JNDB: 30, ChannelsHz: []float64{-2e6, 2e6}, StartS: 0.05}
	rect2 := rect
	rect2.StartS = 0.05
	s := oneCapture("cf32_le", fs, -40, 0.1, 190, Capture{Emitters: []Emitter{rect}})
	s.Captures[0].Emitters[0].EndS = 0.05
	s.Captures[0].Emitters = append(s.Captures[0].Emitters, pairs)
	s.Captures = append(s.Captures, Capture{Name: "two", OffsetS: 1, DurationS: 0.1, Emitters: []Emitter{
		{Kind: KindPulsed, Pulse: "rect", WidthS: 6.4e-6, PRIS: 50e-6, JNDB: 30, ChannelsHz: chans, EndS: 0.05}, rect2}})
	dir, truths := writeScenario(t, s)
	x := readCapture(t, dir, truths[0])
	sigma2 := undb(truths[0].NoiseDBFS)
	a := math.Sqrt(undb(30) * sigma2)
	te := truths[0].Emitters[0]
	if fmt.Sprint(te.ApparentChannelsHz) != fmt.Sprint(chans) || math.Abs(*te.ApparentJNDB-30) > 1e-9 {
		t.Errorf("truth channels %v, apparent J/N %v", te.ApparentChannelsHz, *te.ApparentJNDB)
	}
	check := func(name string, ps []hopPulse, k int, want int) {
		counts := make([]float64, k)
		same := 0.0
		for i, p := range ps {
			counts[p.ch]++
			if i > 0 && p.ch == ps[i-1].ch {
				same++
			}
		}
		n := float64(len(ps))
		if math.Abs(n-float64(want)) > 2 {
			t.Errorf("%s: %d pulses found, want about %d", name, len(ps), want)
		}
		for c, v := range counts {
			if sd := math.Sqrt(n / float64(k) * (1 - 1/float64(k))); math.Abs(v-n/float64(k)) > 5*sd {
				t.Errorf("%s: channel %d carries %g of %g pulses, want %g ± %.0f", name, c, v, n, n/float64(k), 5*sd)
			}
		}
		if sd := math.Sqrt((n - 1) / float64(k) * (1 - 1/float64(k))); math.Abs(same-(n-1)/float64(k)) > 5*sd {
			t.Errorf("%s: %g of %g consecutive pulses share a channel, want %.0f ± %.0f", name, same, n-1, (n-1)/float64(k), 5*sd)
		}
		t.Logf("%s: %g pulses, per channel %v, %g consecutive pairs on one channel", name, n, counts, same)
	}
	rectPulses := pulsesByChannel(t, x[:int(0.05*fs)], fs, a, chans)
	check("rect", rectPulses, 3, 1000)
	pairPulses := pulsesByChannel(t, x[int(0.05*fs):], fs, a, []float64{-2e6, 2e6})
	// Pairs: pulses 12 µs apart share the channel.
	var pairSeq []hopPulse
	for i := 0; i+1 < len(pairPulses); i += 2 {
		p, q := pairPulses[i], pairPulses[i+1]
		if d := float64(q.first-p.first) / fs; math.Abs(d-12e-6) > 1e-6 {
			t.Fatalf("pulses %d and %d are %.2f µs apart, not a pair", i, i+1, d*1e6)
		}
		if p.ch != q.ch {
			t.Errorf("pair at sample %d: pulses on channels %d and %d", p.first, p.ch, q.ch)
		}
		pairSeq = append(pairSeq, p)
	}
	check("gaussian pairs", pairSeq, 2, 250)
	// Another emitter of the same scenario hops otherwise.
	y := readCapture(t, dir, truths[1])
	a1 := pulsesByChannel(t, y[:int(0.05*fs)], fs, a, chans)
	a2 := pulsesByChannel(t, y[int(0.05*fs):], fs, a, chans)
	var same int
	for i := range min(len(a1), len(a2)) {
		if a1[i].ch == a2[i].ch {
			same++
		}
	}
	if n := min(len(a1), len(a2)); float64(same) > float64(n)/3+5*math.Sqrt(float64(n)*2/9) {
		t.Errorf("two emitters share %d of %d hops: the same sequence", same, n)
	}
}

// TestOverlaps: emitters of any kind add up: pulses with a strong CW, a CW
// inside a noise band, a sweep with a CW. In each capture the CW's J/N by
// correlation is its own (within 0.1 dB, or 0.2 dB inside the noise band
// where the band's density adds a 1.4 % σ over 2·10⁶ samples), the mean
// power is the sum of the truths' powers (0.1 dB), and the pulses are all
// there once the CW is subtracted (one pair per PRI).
func TestOverlaps(t *testing.T) {
	t.Parallel()
	const fs = 4e6
	s := Scenario{Name: "overlaps", Format: "cf32_le", SampleRate: fs, NoiseDBFS: -40, Start: testStart, Seed: 200,
		Captures: []Capture{
			{Name: "pulses-cw", DurationS: 0.1, Emitters: []Emitter{
				{Kind: KindPulsed, JNDB: 30, PRIS: 400e-6, OffsetHz: 500e3},
				{Kind: KindCW, OffsetHz: -800e3, JNDB: 25}}},
			{Name: "cw-in-band", OffsetS: 1, DurationS: 0.5, Emitters: []Emitter{
				{Kind: KindNarrowbandNoise, JNDB: 10, OffsetHz: 1e6, BandwidthHz: 200e3},
				{Kind: KindCW, OffsetHz: 1.02e6, JNDB: 0}}},
			{Name: "sweep-cw", OffsetS: 2, DurationS: 0.1, Emitters: []Emitter{
				{Kind: KindSwept, JNDB: 10, LowHz: -1.5e6, HighHz: 1.5e6, PeriodS: 12e-6},
				{Kind: KindCW, OffsetHz: 700e3, JNDB: 0}}},
		}}
	dir, truths := writeScenario(t, s)
	for i, tr := range truths {
		x := readCapture(t, dir, tr)
		sigma2 := undb(tr.NoiseDBFS)
		want := sigma2
		var cw TruthEmitter
		for _, e := range tr.Emitters {
			switch e.Kind {
			case KindCW:
				cw = e
				want += undb(e.Tones[0].JNDB) * sigma2
			case KindPulsed:
				want += 2 * math.Sqrt(math.Pi/DMEAlpha) / e.PRIS * undb(e.JNDB) * sigma2
			default:
				want += undb(e.JNDB) * sigma2
			}
		}
		if d := db(meanPower(x) / want); math.Abs(d) > 0.1 {
			t.Errorf("%s: mean power %.3f dB from the sum of the truth", tr.Capture, d)
		}
		c := toneCorrelation(x, 0, len(x), cw.Tones[0].OffsetHz, fs)
		tol := 0.1
		if i == 1 {
			tol = 0.2
		}
		if jn := db(cmplx.Abs(c) * cmplx.Abs(c) / sigma2); math.Abs(jn-cw.Tones[0].JNDB) > tol {
			t.Errorf("%s: CW J/N %.3f dB, truth %g", tr.Capture, jn, cw.Tones[0].JNDB)
		}
		if i == 0 {
			// Subtract the tone, then count pulse pairs: one per PRI.
			y := make([]complex64, len(x))
			rot := cmplx.Rect(1, 2*math.Pi*cw.Tones[0].OffsetHz/fs)
			p := c
			for n := range x {
				if n%4096 == 0 {
					_, frac := math.Modf(cw.Tones[0].OffsetHz / fs * float64(n))
					p = c * cmplx.Rect(1, 2*math.Pi*frac)
				}
				y[n] = x[n] - complex64(p)
				p *= rot
			}
			pulses := findPulses(y, fs, math.Sqrt(undb(30)*sigma2))
			if want := 2 * int(0.1/400e-6); math.Abs(float64(len(pulses)-want)) > 2 {
				t.Errorf("%s: %d pulses found beside the CW, want about %d", tr.Capture, len(pulses), want)
			}
		}
	}
}
