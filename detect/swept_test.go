package detect

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"path/filepath"
	"testing"

	"quietband/ingest"
	"quietband/ingest/synth"
)

// TestSwept: chirps at J/N ≥ 0 dB, periods 8–30 µs, spans 30–80 % of the
// band: period within 2 %, span within 5 %, shape right.
func TestSwept(t *testing.T) {
	const fs = 10e6
	for _, tc := range []struct {
		period, spanFrac, jn float64
		shape                string
	}{
		{8e-6, 0.3, 0, "up"},
		{12e-6, 0.5, 5, "down"},
		{20e-6, 0.8, 0, "up"},
		{30e-6, 0.6, 10, "triangle"},
		{16e-6, 0.4, 0, "triangle"},
		{25e-6, 0.7, 3, "down"},
	} {
		t.Run(fmt.Sprintf("%s-%gus-%g-%gdB", tc.shape, tc.period*1e6, tc.spanFrac, tc.jn), func(t *testing.T) {
			span := tc.spanFrac * fs
			lo := -span/2 + 0.05*fs
			ev := only(t, detectOne(t, fs, "ci16_le", 0.1, 6, synth.Emitter{Kind: synth.KindSwept, JNDB: tc.jn,
				LowHz: lo, HighHz: lo + span, PeriodS: tc.period, Shape: tc.shape}), ClassSwept)
			p := ev.Params
			within(t, "period", *p.SweepPeriodS, tc.period, 0.02*tc.period)
			within(t, "span", *p.SweepHighHz-*p.SweepLowHz, span, 0.05*span)
			within(t, "low edge", *p.SweepLowHz, lo, 0.05*span)
			if p.Shape != tc.shape {
				t.Errorf("shape %s, want %s", p.Shape, tc.shape)
			}
		})
	}
}

// BenchmarkSwept runs the sweep detector on a 10 MS/s block with a chirp
// (the per-sample phase autocorrelation and the fold both run).
func BenchmarkSwept(b *testing.B) {
	benchDetector(b, &Swept{}, benchBlock(b, 10e6, synth.Emitter{Kind: synth.KindSwept, JNDB: 5, LowHz: -2e6, HighHz: 2e6, PeriodS: 12e-6}))
}

// TestFastAtan2 checks the approximation against math.Atan2 over the
// circle (the reference library), within its stated 0.005 rad.
func TestFastAtan2(t *testing.T) {
	worst := 0.0
	for i := 0; i < 3600; i++ {
		a := float64(i)/3600*2*math.Pi - math.Pi + 1e-9
		for _, r := range []float64{1e-3, 1, 7} {
			x, y := r*math.Cos(a), r*math.Sin(a)
			got := float64(fastAtan2(float32(y), float32(x)))
			d := math.Abs(math.Remainder(got-math.Atan2(y, x), 2*math.Pi))
			worst = math.Max(worst, d)
		}
	}
	if worst > 0.005 {
		t.Fatalf("worst error %.4f rad", worst)
	}
}

// TestSweptSlow: sweeps slower than the frame-based search reaches
// (periods 100 µs to 1 ms, as cheap jammers' slow sweeps) are found by the
// decimated frequency track: period within 2 %, span within 5 %, shape
// right, J/N within 1 dB (the tolerances; the truth is the
// synthesizer's).
func TestSweptSlow(t *testing.T) {
	for _, tc := range []struct {
		fs, period, spanFrac, jn float64
		shape                    string
	}{
		{4e6, 100e-6, 0.75, 10, "up"},
		{4e6, 250e-6, 0.75, 5, "triangle"},
		{10e6, 500e-6, 0.8, 5, "down"},
		{10e6, 1e-3, 0.6, 0, "up"},
	} {
		t.Run(fmt.Sprintf("%s-%gus-%gMSps", tc.shape, tc.period*1e6, tc.fs/1e6), func(t *testing.T) {
			span := tc.spanFrac * tc.fs
			lo := -span / 2
			ev := only(t, detectOne(t, tc.fs, "ci16_le", 0.25, 6, synth.Emitter{Kind: synth.KindSwept, JNDB: tc.jn,
				LowHz: lo, HighHz: lo + span, PeriodS: tc.period, Shape: tc.shape}), ClassSwept)
			p := ev.Params
			within(t, "period", *p.SweepPeriodS, tc.period, 0.02*tc.period)
			within(t, "span", *p.SweepHighHz-*p.SweepLowHz, span, 0.05*span)
			within(t, "J/N dB", ev.JNDB, tc.jn, 1)
			if p.Shape != tc.shape {
				t.Errorf("shape %s, want %s", p.Shape, tc.shape)
			}
		})
	}
}

// wideChirp writes a capture of white noise (−30 dBFS) plus a chirp
// sweeping span Hz around the centre with the given period (a sawtooth up
// or down, or a triangle), at J/N jn while in the band, seen through a
// recorder whose anti-alias filter passes |f| < 0.4 fs and stops at fs/2
// (raised-cosine between). Span may far exceed the band, as cheap jammers'
// 10–40 MHz sweeps do at a narrower recorder (REFERENCES §5). An
// independent generator from the synthesizer's: the phase is accumulated
// from the instantaneous frequency sample by sample.
func wideChirp(t *testing.T, fs, span, period, jn float64, shape string, dur float64, seed uint64) *ingest.Capture {
	t.Helper()
	n := int(dur * fs)
	x := make([]complex64, n)
	rng := rand.New(rand.NewPCG(seed, 99))
	const noise = 1e-3
	sd := math.Sqrt(noise / 2)
	amp := math.Sqrt(noise * math.Pow(10, jn/10))
	ph := 0.0
	for i := range x {
		u := math.Mod(float64(i)/fs, period) / period
		var fr float64
		switch shape {
		case "up":
			fr = -span/2 + span*u
		case "down":
			fr = span/2 - span*u
		default:
			fr = -span/2 + span*2*u
			if u >= 0.5 {
				fr = span/2 - span*2*(u-0.5)
			}
		}
		ph = math.Mod(ph+2*math.Pi*fr/fs, 2*math.Pi)
		g := 0.0
		if a := math.Abs(fr); a < 0.4*fs {
			g = 1
		} else if a < 0.5*fs {
			g = 0.5 * (1 + math.Cos(math.Pi*(a-0.4*fs)/(0.1*fs)))
		}
		x[i] = complex(float32(amp*g*math.Cos(ph)+sd*rng.NormFloat64()), float32(amp*g*math.Sin(ph)+sd*rng.NormFloat64()))
	}
	dir := t.TempDir()
	w, err := ingest.CreateSigMF(filepath.Join(dir, "wide"), ingest.SigMFHeader{Format: ingest.CF32LE, SampleRate: fs,
		CenterHz: 1575.42e6, HasCenter: true})
	if err != nil {
		t.Fatal(err)
	}
	if err := w.Write(x); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	c, err := ingest.Open(filepath.Join(dir, "wide"+ingest.MetaExt), ingest.RawSettings{})
	if err != nil {
		t.Fatal(err)
	}
	return c
}

// TestSweptBeyondBand: a sweep wider than the recorder's band is seen as
// short chirp bursts at its period (or, when it leaves the band only
// briefly, as a sweep with a gap). It is a swept event, not pulses: rate
// within 5 % and period within 2 % of the truth, shape right, its span
// stated as exceeding the band, the whole span (rate × period, or
// rate × period/2 for a triangle) within 10 %, the part seen inside the
// band. No baseline: a single-file replay.
func TestSweptBeyondBand(t *testing.T) {
	for _, tc := range []struct {
		fs, span, period, jn float64
		shape                string
	}{
		{4e6, 20e6, 10e-6, 15, "up"},
		{4e6, 40e6, 20e-6, 15, "down"},
		{10e6, 20e6, 15e-6, 10, "up"},
		{4e6, 20e6, 20e-6, 15, "triangle"},
		{10e6, 12e6, 8e-6, 5, "up"},
		{10e6, 30e6, 40e-6, 10, "triangle"},
	} {
		t.Run(fmt.Sprintf("%s-%gMHz-%gus-%gMSps", tc.shape, tc.span/1e6, tc.period*1e6, tc.fs/1e6), func(t *testing.T) {
			c := wideChirp(t, tc.fs, tc.span, tc.period, tc.jn, tc.shape, 0.1, 3)
			r, err := NewPipeline(Config{}, nil).Process(context.Background(), c, "wide")
			if err != nil {
				t.Fatal(err)
			}
			ev := only(t, r.Events, ClassSwept)
			p := ev.Params
			rate := tc.span / tc.period
			if tc.shape == "triangle" {
				rate *= 2
			}
			within(t, "|rate|", math.Abs(*p.SweepRateHzPerS), rate, 0.05*rate)
			within(t, "period", *p.SweepPeriodS, tc.period, 0.02*tc.period)
			if p.Shape != tc.shape {
				t.Errorf("shape %s, want %s", p.Shape, tc.shape)
			}
			if !p.SpanExceedsBand {
				t.Error("span_exceeds_band not set")
			}
			if p.SweepSpanHz == nil {
				t.Fatal("no sweep_span_hz")
			}
			within(t, "span", *p.SweepSpanHz, tc.span, 0.1*tc.span)
			if *p.SweepLowHz < -tc.fs/2 || *p.SweepHighHz > tc.fs/2 {
				t.Errorf("part seen %.0f..%.0f Hz reaches beyond ±fs/2", *p.SweepLowHz, *p.SweepHighHz)
			}
		})
	}
}
