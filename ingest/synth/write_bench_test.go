package synth

import (
	"runtime"
	"testing"
)

// busy20MSps is a 20 MS/s scenario with the eight satellites of the
// built-in site and the given emitters.
func busy20MSps(dur float64, emitters ...Emitter) Scenario {
	c := Capture{Name: "busy", DurationS: dur, Satellites: siteSky(0), Emitters: emitters}
	return oneCapture("ci16_le", 20e6, -30, dur, 1, c)
}

// chirp20 is a chirp jammer sweeping ±8 MHz every 12 µs.
var chirp20 = Emitter{Kind: KindSwept, JNDB: 10, LowHz: -8e6, HighHz: 8e6, PeriodS: 12e-6, Shape: "up"}

// BenchmarkWrite20MSps synthesizes and writes 0.1 s at 20 MS/s (ci16_le
// SigMF, data synced) with 8 satellites and a chirp, and reports the
// throughput in complex samples per second.
func BenchmarkWrite20MSps(b *testing.B) {
	dir := b.TempDir()
	s := busy20MSps(0.1, chirp20)
	if err := s.Normalize(); err != nil {
		b.Fatal(err)
	}
	var samples int64
	for b.Loop() {
		truths, err := Write(&s, dir)
		if err != nil {
			b.Fatal(err)
		}
		samples += truths[0].Samples
	}
	b.ReportMetric(float64(samples)/b.Elapsed().Seconds()/1e6, "MS/s")
}

// TestWriteStreams writes a 2 s capture at 20 MS/s (4·10⁷ samples, 160 MB
// of ci16) with every kind of source and checks that the bytes allocated
// on the heap stay under 16 MiB: a writer that held the capture in memory
// would need 320 MB of complex64 for it. Not a timing test.
func TestWriteStreams(t *testing.T) {
	if testing.Short() {
		t.Skip("writes 160 MB")
	}
	// The chirp and the band noise, the slowest sources per sample (two
	// math.Mod per sample; a 65536-point FFT per 32768 samples for a
	// 10 kHz band at 20 MS/s), are on for 0.1 s and 0.2 s only; their
	// state is the same size whatever the span.
	ch := chirp20
	ch.StartS, ch.EndS = 0.9, 1.0
	s := busy20MSps(2, ch,
		Emitter{Kind: KindCW, OffsetHz: 1.5e6, JNDB: 0},
		Emitter{Kind: KindPulsed, JNDB: 10, PRIS: 370e-6, OffsetHz: -2e6},
		Emitter{Kind: KindWidebandNoise, FloorRiseDB: 1, StartS: 0.5, EndS: 1.5},
		Emitter{Kind: KindNarrowbandNoise, JNDB: 0, OffsetHz: 3e6, BandwidthHz: 1e4, StartS: 1.2, EndS: 1.4},
	)
	dir := t.TempDir()
	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	truths, err := Write(&s, dir)
	runtime.ReadMemStats(&after)
	if err != nil {
		t.Fatal(err)
	}
	if truths[0].Samples != 40_000_000 {
		t.Fatalf("%d samples written", truths[0].Samples)
	}
	grow := after.TotalAlloc - before.TotalAlloc
	t.Logf("TotalAlloc grew by %.2f MiB for %d samples", float64(grow)/(1<<20), truths[0].Samples)
	if grow > 16<<20 {
		t.Errorf("writing 2 s at 20 MS/s allocated %.1f MiB, want < 16 MiB (streaming)", float64(grow)/(1<<20))
	}
}

// frontEnd20 is a busy front end: passband FIR, I/Q imbalance, DC offset,
// 12-bit quantization, a spur, a clock offset, a gain step, a sample drop
// and a gap.
func frontEnd20() *FrontEnd {
	return &FrontEnd{
		Passband:     &Passband{TiltDB: 3, RippleDB: 0.5, RippleCycles: 3, RolloffDB: 20, RolloffFraction: 0.15},
		IQImbalance:  &IQImbalance{GainError: 0.02, PhaseDeg: 1.5},
		DCOffset:     &IQValue{I: 0.003, Q: -0.002},
		Quantization: &Quantization{Bits: 12, SigmaLSB: 40},
		Spurs:        []Tone{{OffsetHz: 2.5e6, JNDB: 3}},
		ClockPPM:     ref(1.5),
		GainSteps:    []GainStep{{AtS: 0.03, DB: 1}},
		SampleDrops:  []SampleDrop{{AtS: 0.05, Samples: 16384}},
		Gaps:         []Gap{{AtS: 0.07, Samples: 4096}},
	}
}

// BenchmarkWriteFrontEnd20MSps is BenchmarkWrite20MSps through frontEnd20
// and with the satellites' Doppler rates: the front end's cost per sample
// (it is not on the default path).
func BenchmarkWriteFrontEnd20MSps(b *testing.B) {
	dir := b.TempDir()
	s := busy20MSps(0.1, chirp20)
	s.FrontEnd = frontEnd20()
	for i := range s.Captures[0].Satellites {
		s.Captures[0].Satellites[i].DopplerRateHzS = -0.5
	}
	if err := s.Normalize(); err != nil {
		b.Fatal(err)
	}
	var samples int64
	for b.Loop() {
		truths, err := Write(&s, dir)
		if err != nil {
			b.Fatal(err)
		}
		samples += truths[0].Samples
	}
	b.ReportMetric(float64(samples)/b.Elapsed().Seconds()/1e6, "MS/s")
}

// TestWriteStreamsFrontEnd is TestWriteStreams through a busy front end
// (frontEnd20, with the drop and gap moved to 0.5 s), keyed wide-swept and
// hopping emitters and satellites with Doppler rates, then as real samples
// at an IF: 0.3 s at 20 MS/s (6·10⁶ samples, 48 MB as complex64) must
// allocate under 16 MiB. Not a timing test.
func TestWriteStreamsFrontEnd(t *testing.T) {
	if testing.Short() {
		t.Skip("writes 24 MB twice")
	}
	wide := Emitter{Kind: KindSwept, JNDB: 10, LowHz: -20e6, HighHz: 20e6, PeriodS: 20e-6, On: [][]float64{{0.03, 0.06}, {0.2, 0.25}}}
	hop := Emitter{Kind: KindPulsed, Pulse: "rect", WidthS: 6.4e-6, PRIS: 100e-6, JNDB: 15, ChannelsHz: []float64{-6e6, -3e6, 0, 3e6, 6e6},
		StartS: 0.1, EndS: 0.15}
	for _, format := range []string{"ci16_le", "ri16_le"} {
		t.Run(format, func(t *testing.T) {
			s := busy20MSps(0.3, wide, hop)
			s.Format = format
			s.FrontEnd = frontEnd20()
			s.FrontEnd.SampleDrops[0].AtS, s.FrontEnd.Gaps[0].AtS = 0.15, 0.2
			if format == "ri16_le" {
				s.FrontEnd.IQImbalance = nil
				s.FrontEnd.DCOffset.Q = 0
			}
			for i := range s.Captures[0].Satellites {
				s.Captures[0].Satellites[i].DopplerRateHzS = -0.7
			}
			dir := t.TempDir()
			var before, after runtime.MemStats
			runtime.GC()
			runtime.ReadMemStats(&before)
			truths, err := Write(&s, dir)
			runtime.ReadMemStats(&after)
			if err != nil {
				t.Fatal(err)
			}
			if truths[0].Samples != 6_000_000 {
				t.Fatalf("%d samples written", truths[0].Samples)
			}
			grow := after.TotalAlloc - before.TotalAlloc
			t.Logf("TotalAlloc grew by %.2f MiB for %d samples", float64(grow)/(1<<20), truths[0].Samples)
			if grow > 16<<20 {
				t.Errorf("writing 0.3 s at 20 MS/s through the front end allocated %.1f MiB, want < 16 MiB (streaming)", float64(grow)/(1<<20))
			}
		})
	}
}
