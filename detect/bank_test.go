package detect

import (
	"context"
	"fmt"
	"math"
	"path/filepath"
	"sync"
	"testing"

	"quietband/ingest"
	"quietband/ingest/synth"
)

// The helpers in this file serve the detector tests (cw_test.go,
// swept_test.go, ...), which check the detector bank against the synthesizer's
// truth (synthetic data; the tolerances are the detector issue's
// requirements). Each scenario starts from a baseline learned on clean
// captures of the same input, as a site would have.

var (
	learnMu sync.Mutex
	learnt  = map[string]*Baselines{}
)

// sky is a set of satellites to put in every test capture, so that the
// GNSS signals' own spectrum is part of what the baseline absorbs.
func sky() []synth.Satellite {
	return []synth.Satellite{
		{PRN: 4, CN0DBHz: 45, DopplerHz: 1200, CodePhaseChips: 100},
		{PRN: 9, CN0DBHz: 42, DopplerHz: -2500, CodePhaseChips: 700.5},
		{PRN: 17, CN0DBHz: 40, DopplerHz: 3100, CodePhaseChips: 333},
		{PRN: 28, CN0DBHz: 47, DopplerHz: -400, CodePhaseChips: 12.25},
	}
}

// baseScenario is one input of the tests: rate, format, capture length.
func baseScenario(fs float64, format string, dur float64) synth.Scenario {
	return synth.Scenario{Name: "bank", Site: "test-bench", Format: format, SampleRate: fs,
		CenterHz: 1575.42e6, NoiseDBFS: -30, Seed: 11,
		Captures: []synth.Capture{{Name: "c", DurationS: dur, Satellites: sky()}}}
}

// learnedState returns a state whose baseline for the input was learned
// from three clean captures.
func learnedState(t testing.TB, fs float64, format string, dur float64) *State {
	t.Helper()
	key := fmt.Sprintf("%g/%s/%g", fs, format, dur)
	learnMu.Lock()
	defer learnMu.Unlock()
	if b, ok := learnt[key]; ok {
		return &State{Baselines: cloneBaselines(b), episodes: map[string][]openEpisode{}}
	}
	s := baseScenario(fs, format, dur)
	s.Seed = 99
	s.Captures = nil
	for i := 0; i < 3; i++ {
		s.Captures = append(s.Captures, synth.Capture{Name: fmt.Sprintf("learn-%d", i), DurationS: dur, Satellites: sky(), OffsetS: float64(i)})
	}
	st := NewState()
	p := NewPipeline(Config{}, st)
	for _, r := range run(t, p, s) {
		if len(r.Events) != 0 {
			t.Fatalf("learning capture raised %d events", len(r.Events))
		}
	}
	learnt[key] = cloneBaselines(st.Baselines)
	return &State{Baselines: cloneBaselines(st.Baselines), episodes: map[string][]openEpisode{}}
}

func cloneBaselines(b *Baselines) *Baselines {
	c := NewBaselines()
	b.mu.Lock()
	defer b.mu.Unlock()
	for k, v := range b.items {
		cp := *v
		cp.PSD = append([]float64(nil), v.PSD...)
		c.items[k] = &cp
	}
	return c
}

// run writes the scenario and processes its captures in order.
func run(t testing.TB, p *Pipeline, s synth.Scenario) []*Result {
	t.Helper()
	dir := t.TempDir()
	truths, err := synth.Write(&s, dir)
	if err != nil {
		t.Fatal(err)
	}
	var out []*Result
	for _, tr := range truths {
		c, err := ingest.Open(filepath.Join(dir, tr.Capture), ingest.RawSettings{})
		if err != nil {
			t.Fatal(err)
		}
		r, err := p.Process(context.Background(), c, tr.Capture)
		if err != nil {
			t.Fatal(err)
		}
		out = append(out, r)
	}
	return out
}

// detectOne synthesizes one capture with the emitters on a learned
// baseline and returns its events.
func detectOne(t *testing.T, fs float64, format string, dur float64, seed uint64, em ...synth.Emitter) []Event {
	t.Helper()
	st := learnedState(t, fs, format, dur)
	s := baseScenario(fs, format, dur)
	s.Seed = seed
	s.Captures[0].Emitters = em
	return run(t, NewPipeline(Config{}, st), s)[0].Events
}

func only(t *testing.T, evs []Event, class string) *Event {
	t.Helper()
	var got *Event
	for i := range evs {
		if evs[i].Class == class {
			if got != nil {
				t.Errorf("two %s events", class)
			}
			got = &evs[i]
		} else {
			t.Errorf("unexpected %s event at %.0f Hz (J/N %.1f dB)", evs[i].Class, evs[i].OffsetHz, evs[i].JNDB)
		}
	}
	if got == nil {
		t.Fatalf("no %s event among %d", class, len(evs))
	}
	return got
}

func within(t *testing.T, what string, got, want, tol float64) {
	t.Helper()
	if math.Abs(got-want) > tol {
		t.Errorf("%s = %.6g, want %.6g ± %.3g", what, got, want, tol)
	}
}

// benchBlock synthesizes one block of a capture at fs with the emitters
// (over a learned baseline) and prepares it as the pipeline would, for the
// per-detector benchmarks.
func benchBlock(b *testing.B, fs float64, em ...synth.Emitter) *BlockInput {
	b.Helper()
	st := learnedState(b, fs, "ci16_le", 0.05)
	s := baseScenario(fs, "ci16_le", 0.05)
	s.Captures[0].Emitters = em
	c := writeOne(b, s)
	cfg := Config{}.Defaults(fs)
	r, err := c.NewReader(cfg.FFTSize * cfg.Frames)
	if err != nil {
		b.Fatal(err)
	}
	defer r.Close()
	blk, err := r.Next()
	if err != nil {
		b.Fatal(err)
	}
	x := append([]complex64(nil), blk.Samples...)
	center, _ := c.CenterHz()
	base := st.Baselines.snapshot(BaselineKey(c.Format.String(), fs, center, true, cfg.FFTSize))
	eng := NewSpectrum(cfg.FFTSize, cfg.Frames, fs)
	in := &BlockInput{F: eng.Analyze(0, x, 0), Samples: x, Cfg: &cfg, Excluded: make([]bool, cfg.FFTSize)}
	exclusions(in.Excluded, cfg.FFTSize, fs, &cfg, center, true)
	(&SpectralKurtosis{}).Compute(in)
	ref := newNoiseReference(cfg.FFTSize)
	ref.reset(base.PSD, base.Frames)
	var thr thresholdCache
	ref.apply(in, &thr)
	return in
}

// benchDetector measures one detector on a prepared block and reports
// samples per second.
func benchDetector(b *testing.B, d Detector, in *BlockInput) {
	var out []Finding
	b.ReportAllocs()
	for b.Loop() {
		out = d.Detect(in, out[:0])
	}
	b.ReportMetric(float64(len(in.Samples))*float64(b.N)/b.Elapsed().Seconds()/1e6, "MS/s")
}

// BenchmarkSpectrum is the engine's one FFT pass over a ci16 block at
// 10 MS/s (2048-point frames), single core.
func BenchmarkSpectrum(b *testing.B) {
	const fs = 10e6
	in := benchBlock(b, fs)
	eng := NewSpectrum(in.F.N, in.F.Frames, fs)
	b.ReportAllocs()
	for b.Loop() {
		eng.Analyze(0, in.Samples, 0)
	}
	b.ReportMetric(float64(len(in.Samples))*float64(b.N)/b.Elapsed().Seconds()/1e6, "MS/s")
}

// BenchmarkBank processes a whole ci16 capture with every spectral
// detector (no GNSS), single core, at 10 and 20 MS/s, clean and with a
// chirp jammer (which wakes the per-sample sweep analysis).
func BenchmarkBank(b *testing.B) {
	for _, fs := range []float64{10e6, 20e6} {
		for _, jam := range []bool{false, true} {
			name := fmt.Sprintf("%gMSps", fs/1e6)
			if jam {
				name += "-chirp"
			}
			b.Run(name, func(b *testing.B) {
				st := learnedState(b, fs, "ci16_le", 0.2)
				s := baseScenario(fs, "ci16_le", 0.2)
				if jam {
					s.Captures[0].Emitters = []synth.Emitter{{Kind: synth.KindSwept, JNDB: 10, LowHz: -0.3 * fs, HighHz: 0.3 * fs, PeriodS: 12e-6}}
				}
				c := writeOne(b, s)
				p := NewPipeline(Config{}, st)
				b.ReportAllocs()
				for b.Loop() {
					if _, err := p.Process(context.Background(), c, "bench"); err != nil {
						b.Fatal(err)
					}
				}
				b.ReportMetric(float64(c.Samples)*float64(b.N)/b.Elapsed().Seconds()/1e6, "MS/s")
			})
		}
	}
}

// BenchmarkBlock is the steady state of the spectral pass: one ci16 block
// decoded, through the engine, every detector and the tracker, with a
// learned baseline, single core. It must not allocate.
func BenchmarkBlock(b *testing.B) {
	for _, fs := range []float64{10e6, 20e6} {
		b.Run(fmt.Sprintf("%gMSps", fs/1e6), func(b *testing.B) {
			in := benchBlock(b, fs)
			cfg := Config{}.Defaults(fs)
			p := NewPipeline(Config{}, nil)
			bk := p.bankFor(cfg, fs)
			base := &Baseline{PSD: append([]float64(nil), in.Floor...)}
			bk.reset(base, 1575.42e6, true)
			// ci16 input: the block is decoded from its bytes each time.
			raw := make([]byte, len(in.Samples)*ingest.CI16LE.SampleBytes())
			ingest.CI16LE.Encode(raw, in.Samples)
			x := make([]complex64, len(in.Samples))
			blk := ingest.Block{Samples: x}
			for range 3 { // warm the buffers up
				ingest.CI16LE.Decode(x, raw)
				bk.block(blk, nil)
			}
			b.ReportAllocs()
			for b.Loop() {
				ingest.CI16LE.Decode(x, raw)
				blk.Start += int64(len(blk.Samples))
				bk.block(blk, nil)
			}
			b.ReportMetric(float64(len(in.Samples))*float64(b.N)/b.Elapsed().Seconds()/1e6, "MS/s")
		})
	}
}

// writeOne synthesizes the scenario's first capture and opens it.
func writeOne(tb testing.TB, s synth.Scenario) *ingest.Capture {
	tb.Helper()
	dir := tb.TempDir()
	truths, err := synth.Write(&s, dir)
	if err != nil {
		tb.Fatal(err)
	}
	c, err := ingest.Open(filepath.Join(dir, truths[0].Capture), ingest.RawSettings{})
	if err != nil {
		tb.Fatal(err)
	}
	return c
}
