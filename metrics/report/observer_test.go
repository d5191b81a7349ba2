package report

import (
	"math"
	"sort"
	"testing"

	"quietband/detect"
	"quietband/ingest/synth"
)

// TestObserverSummary checks the bounded summary against the
// synthesizer's truth: grid size within bounds, the tone in the column
// of its DFT bin, the noise and tone levels of the PSD and envelope, and
// the tone's switch-on in the row that holds its start time.
func TestObserverSummary(t *testing.T) {
	cases := []struct {
		name      string
		fs, dur   float64
		toneHz    float64
		toneJN    float64
		startFrac float64
	}{
		// 4 MS/s: N = 1024 (DefaultFFTSize), 0.2 s = 781 frames → 2
		// frames per row, 512 columns of 2 bins.
		{"4MSps", 4e6, 0.2, 312.5e3, 10, 0.4},
		// 2 MS/s: N = 512, 0.6 s = 2343 frames → 6 per row, 391 rows.
		{"2MSps-long", 2e6, 0.6, -250e3, 6, 0.25},
		// 1 MS/s: N = 256, fewer bins than MaxCols: one bin per column.
		{"1MSps", 1e6, 0.15, 100e3, 10, 0.5},
		// A tone present throughout, for the SK check.
		{"steady", 4e6, 0.1, -700e3, 10, 0},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			s := scenario(tc.fs, synth.Capture{Name: "cw", DurationS: tc.dur, Emitters: []synth.Emitter{{
				Kind: synth.KindCW, StartS: tc.startFrac * tc.dur, Tones: []synth.Tone{{OffsetHz: tc.toneHz, JNDB: tc.toneJN}}}}})
			ob := runScenario(t, t.TempDir(), s)[0]
			sm, tr := ob.summary, ob.truth
			n := sm.FFTSize
			if n != detect.DefaultFFTSize(tc.fs) {
				t.Fatalf("FFT size %d, want %d", n, detect.DefaultFFTSize(tc.fs))
			}
			frames := int(tr.Samples / int64(n))
			if sm.Rows > MaxRows || sm.Cols > MaxCols || sm.Rows*sm.RowFrames < frames || (sm.Rows-1)*sm.RowFrames >= frames ||
				sm.Cols*sm.ColBins != n || len(sm.Grid) != sm.Rows*sm.Cols || len(sm.EnvMean) > MaxEnvelope {
				t.Fatalf("grid %d×%d (%d frames/row, %d bins/col) for %d frames of %d bins, envelope %d",
					sm.Rows, sm.Cols, sm.RowFrames, sm.ColBins, frames, n, len(sm.EnvMean))
			}
			// The tone sits in DFT bin round(f·N/fs) of the centred order
			// (bin k ↔ k·fs/N, the DFT's frequency grid).
			bin := int(math.Round(tc.toneHz*float64(n)/tc.fs)) + n/2
			col := bin / sm.ColBins
			lastRow := sm.Rows - 2 // the last row may hold a partial one
			best, bestV := -1, math.Inf(-1)
			for c := 0; c < sm.Cols; c++ {
				if v := sm.Grid[lastRow*sm.Cols+c]; v > bestV {
					best, bestV = c, v
				}
			}
			if best != col {
				t.Errorf("brightest column %d (%.0f Hz), want %d (tone at %.0f Hz)", best, sm.Offset(best*sm.ColBins), col, tc.toneHz)
			}
			// Noise level: white noise of variance σ² has E[P(k)] = σ²/N
			// in the engine's normalization (detect.Spectrum doc, Hann
			// window power-normalized); σ² = 10^(noise_dbfs/10) (synth).
			sigma2 := math.Pow(10, tr.NoiseDBFS/10)
			var noise []float64
			for k, v := range sm.PSD {
				if !sm.Excluded[k] && (k < bin-8 || k > bin+8) {
					noise = append(noise, v)
				}
			}
			sort.Float64s(noise)
			med := noise[len(noise)/2]
			// The mean over F frames of exponential powers has a relative
			// spread 1/√F; the median over hundreds of bins is tighter
			// still: 0.1 dB is many standard errors for F ≥ 390.
			if d := 10 * math.Log10(med/(sigma2/float64(n))); math.Abs(d) > 0.1 {
				t.Errorf("median noise bin %.3g, want σ²/N = %.3g (%.2f dB off)", med, sigma2/float64(n), d)
			}
			// Tone power: Σ_k P(k) = A² for a tone of amplitude A
			// (Parseval with the normalized window); A² = 10^(J/N/10)·σ²,
			// present for a fraction (1 − start) of the frames.
			var toneSum float64
			for k := bin - 6; k <= bin+6; k++ {
				toneSum += sm.PSD[k] - sigma2/float64(n)
			}
			want := math.Pow(10, tc.toneJN/10) * sigma2 * float64(tr.Samples-tr.Emitters[0].StartSample) / float64(tr.Samples)
			// ±6 bins hold all but about 10⁻⁵ of a Hann-windowed tone's
			// power (computed from the window's transform, |W(δ)| ∝
			// |sin πδ / (πδ(1 − δ²))| at δ bins off); the noise left in
			// them after subtracting its mean is far below 0.1 dB of A².
			if d := 10 * math.Log10(toneSum/want); math.Abs(d) > 0.1 {
				t.Errorf("tone power %.4g, want %.4g (%.2f dB off)", toneSum, want, d)
			}
			// Switch-on: the first row whose tone cell stands 10 dB above
			// the noise is the row holding the tone's first sample (or the
			// next, when the tone fills too little of that row).
			startFrame := int(tr.Emitters[0].StartSample / int64(n))
			wantRow := startFrame / sm.RowFrames
			noiseDB := 10 * math.Log10(sigma2/float64(n))
			on := -1
			for r := 0; r < sm.Rows; r++ {
				if sm.Grid[r*sm.Cols+col] > noiseDB+10 {
					on = r
					break
				}
			}
			if on != wantRow && on != wantRow+1 {
				t.Errorf("tone appears in row %d, want %d (start frame %d, %d frames per row)", on, wantRow, startFrame, sm.RowFrames)
			}
			// Envelope: mean frame power σ² before the tone, σ² + A² after.
			step := sm.EnvFrames * n
			before := sm.EnvMean[0]
			after := sm.EnvMean[len(sm.EnvMean)-2]
			checks := []struct {
				name      string
				got, want float64
			}{{"after", after, sigma2 * (1 + math.Pow(10, tc.toneJN/10))}}
			if int64(step) <= tr.Emitters[0].StartSample {
				checks = append(checks, struct {
					name      string
					got, want float64
				}{"before", before, sigma2})
			}
			for _, c := range checks {
				// One point averages EnvFrames·N samples: a relative spread
				// of about 1/√(EnvFrames·N) (< 7 %); 1 dB is a wide margin.
				if d := 10 * math.Log10(c.got/c.want); math.Abs(d) > 1 {
					t.Errorf("envelope %s the tone: %.4g, want %.4g", c.name, c.got, c.want)
				}
			}
			if tc.startFrac > 0 {
				return
			}
			// SK: a steady tone drives SK below 1, towards
			// (1 + 2ρ)/(1 + ρ)² (Nita & Gary 2010b); noise bins average 1.
			if sm.SKBlocks == 0 || !(sm.SKMean[bin] < sm.SKThreshold[0]) {
				t.Errorf("SK at the tone %.3g, want below the lower threshold %.3g", sm.SKMean[bin], sm.SKThreshold[0])
			}
			var skNoise float64
			var cnt int
			for k := range sm.SKMean {
				if !sm.Excluded[k] && (k < bin-8 || k > bin+8) {
					skNoise += sm.SKMean[k]
					cnt++
				}
			}
			// E[SK] = 1 under the null (the estimator is unbiased, Nita &
			// Gary 2010b eq. 8); the mean over thousands of values is
			// within ±0.02 of it.
			if m := skNoise / float64(cnt); math.Abs(m-1) > 0.02 {
				t.Errorf("mean SK over noise bins %.4f, want 1", m)
			}
		})
	}
}

// TestObserverPulses: the observer keeps the detected pulse arrivals,
// which fall on the synthesized pulse train's PRI grid.
func TestObserverPulses(t *testing.T) {
	const pri = 200e-6
	s := scenario(4e6, synth.Capture{Name: "pulses", DurationS: 0.1, Emitters: []synth.Emitter{{
		Kind: synth.KindPulsed, Pulse: "rect", WidthS: 5e-6, PRIS: pri, JNDB: 15}}})
	ob := runScenario(t, t.TempDir(), s)[0]
	sm := ob.summary
	if sm.PulsesSeen < 400 || len(sm.Pulses) != min(sm.PulsesSeen, MaxPulses) {
		t.Fatalf("%d pulses seen, %d kept; want about 0.1 s / 200 µs = 500", sm.PulsesSeen, len(sm.Pulses))
	}
	// Arrival differences are whole multiples of the PRI (to within a
	// few samples of edge timing). A pulse cut by a block boundary may be
	// reported by both blocks: arrivals closer than two pulse widths are
	// one pulse.
	priS := pri * sm.SampleRate
	var arr []int64
	for _, g := range sm.Pulses {
		if len(arr) == 0 || float64(g-arr[len(arr)-1]) > 2*5e-6*sm.SampleRate {
			arr = append(arr, g)
		}
	}
	for i := 1; i < len(arr); i++ {
		d := float64(arr[i] - arr[i-1])
		k := math.Round(d / priS)
		if k < 1 || math.Abs(d-k*priS) > 4 {
			t.Fatalf("arrivals %d and %d are %.0f samples apart, not a multiple of the PRI (%.0f)", i-1, i, d, priS)
		}
	}
}
