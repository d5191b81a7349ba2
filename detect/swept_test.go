package detect

import (
	"fmt"
	"math"
	"testing"

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
