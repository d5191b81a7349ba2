package detect

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"path/filepath"
	"sync"
	"testing"

	"quietband/ingest"
	"quietband/ingest/synth"
)

// The tests in this file check the detector bank against the synthesizer's
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
func learnedState(t *testing.T, fs float64, format string, dur float64) *State {
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
func run(t *testing.T, p *Pipeline, s synth.Scenario) []*Result {
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

// TestCW: tones detected down to J/N −15 dB in 0.25 s at 10 MS/s, frequency
// within 0.1 bin, J/N within 1 dB, three simultaneous tones resolved.
func TestCW(t *testing.T) {
	const fs = 10e6
	bin := fs / float64(DefaultFFTSize(fs))
	for _, tc := range []struct {
		name  string
		tones []synth.Tone
	}{
		{"one tone at -15 dB", []synth.Tone{{OffsetHz: 1234567.8, JNDB: -15}}},
		{"one tone at 0 dB", []synth.Tone{{OffsetHz: -2718281.8, JNDB: 0}}},
		{"one tone at +20 dB", []synth.Tone{{OffsetHz: 400321, JNDB: 20}}},
		{"three tones", []synth.Tone{{OffsetHz: -3e6 + 1777, JNDB: -10}, {OffsetHz: 250e3 + 913, JNDB: 0}, {OffsetHz: 3.3e6 - 421, JNDB: 10}}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			ev := only(t, detectOne(t, fs, "ci16_le", 0.25, 5, synth.Emitter{Kind: synth.KindCW, Tones: tc.tones}), ClassCW)
			if len(ev.Params.Tones) != len(tc.tones) {
				t.Fatalf("%d tones, want %d: %+v", len(ev.Params.Tones), len(tc.tones), ev.Params.Tones)
			}
			for i, want := range tc.tones {
				got := ev.Params.Tones[i]
				within(t, "tone offset (bins)", got.OffsetHz/bin, want.OffsetHz/bin, 0.1)
				within(t, "tone J/N dB", got.JNDB, want.JNDB, 1)
			}
		})
	}
}

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

// TestPulsed: DME-like pairs and rectangular pulses of 2–50 µs every
// 100 µs – 5 ms at peak J/N ≥ 10 dB: width within 10 %, PRI within 1 %,
// pair spacing within 0.5 µs.
func TestPulsed(t *testing.T) {
	const fs = 10e6
	for _, tc := range []synth.Emitter{
		{Kind: synth.KindPulsed, Pulse: "gaussian_pair", JNDB: 10, PRIS: 370e-6, OffsetHz: 1e6},
		{Kind: synth.KindPulsed, Pulse: "gaussian_pair", JNDB: 20, PRIS: 1e-3, OffsetHz: -2e6},
		{Kind: synth.KindPulsed, Pulse: "rect", JNDB: 10, WidthS: 2e-6, PRIS: 100e-6},
		{Kind: synth.KindPulsed, Pulse: "rect", JNDB: 12, WidthS: 10e-6, PRIS: 1e-3, OffsetHz: 500e3},
		{Kind: synth.KindPulsed, Pulse: "rect", JNDB: 10, WidthS: 50e-6, PRIS: 5e-3, OffsetHz: -1.5e6},
	} {
		t.Run(fmt.Sprintf("%s-%gus-%gus", tc.Pulse, tc.WidthS*1e6, tc.PRIS*1e6), func(t *testing.T) {
			ev := only(t, detectOne(t, fs, "ci16_le", 0.25, 7, tc), ClassPulsed)
			p := ev.Params
			want := tc.WidthS
			if tc.Pulse == "gaussian_pair" {
				want = 3.5e-6 // ICAO Annex 10 DME pulse duration (half amplitude)
			}
			within(t, "pulse width", *p.PulseWidthS, want, 0.1*want)
			within(t, "PRI", *p.PRIS, tc.PRIS, 0.01*tc.PRIS)
			if tc.Pulse == "gaussian_pair" {
				if p.PairSpacingS == nil {
					t.Fatal("no pair spacing")
				}
				within(t, "pair spacing", *p.PairSpacingS, synth.DMEPairSpacing, 0.5e-6)
			}
			within(t, "peak J/N dB", ev.JNDB, tc.JNDB, 1)
		})
	}
}

// TestNoiseBands: a wideband floor rise ≥ 1 dB detected with error ≤ 0.3 dB;
// band-limited noise at J/N ≥ 0 dB with bandwidth within 15 % and centre
// within 5 % of the bandwidth.
func TestNoiseBands(t *testing.T) {
	const fs = 4e6
	for _, rise := range []float64{1, 3, 10} {
		t.Run(fmt.Sprintf("wideband-%gdB", rise), func(t *testing.T) {
			ev := only(t, detectOne(t, fs, "ci16_le", 0.1, 8, synth.Emitter{Kind: synth.KindWidebandNoise, FloorRiseDB: rise}), ClassWidebandNoise)
			within(t, "floor rise", *ev.Params.FloorRiseDB, rise, 0.3)
		})
	}
	for _, tc := range []struct{ off, bw, jn float64 }{
		{800e3, 200e3, 0}, {-1.2e6, 500e3, 3}, {300e3, 1e6, 0}, {-500e3, 60e3, 6},
	} {
		t.Run(fmt.Sprintf("band-%gkHz-%gkHz-%gdB", tc.off/1e3, tc.bw/1e3, tc.jn), func(t *testing.T) {
			ev := only(t, detectOne(t, fs, "ci16_le", 0.1, 9, synth.Emitter{Kind: synth.KindNarrowbandNoise,
				OffsetHz: tc.off, BandwidthHz: tc.bw, JNDB: tc.jn}), ClassNarrowbandNoise)
			within(t, "bandwidth", ev.BandwidthHz, tc.bw, 0.15*tc.bw)
			within(t, "centre", ev.OffsetHz, tc.off, 0.05*tc.bw)
			within(t, "J/N dB", ev.JNDB, tc.jn, 1)
		})
	}
}

// TestCleanCapturesRaiseNothing: no event at all on clean captures
// (satellites and noise) of several formats and rates after the baseline
// is learned. 200 captures; short ones to keep the run quick.
func TestCleanCapturesRaiseNothing(t *testing.T) {
	inputs := []struct {
		fs     float64
		format string
	}{{4e6, "ci16_le"}, {4e6, "ci8"}, {10e6, "cf32_le"}, {5e6, "cu8"}}
	n := 200
	if testing.Short() {
		n = 40
	}
	for i, in := range inputs {
		st := learnedState(t, in.fs, in.format, 0.05)
		s := baseScenario(in.fs, in.format, 0.05)
		s.Seed = uint64(1000 + i)
		s.Captures = nil
		for k := 0; k < n/len(inputs); k++ {
			s.Captures = append(s.Captures, synth.Capture{Name: fmt.Sprintf("clean-%d", k), DurationS: 0.05,
				Satellites: sky(), OffsetS: float64(k) * 10})
		}
		for k, r := range run(t, NewPipeline(Config{}, st), s) {
			for _, e := range r.Events {
				t.Errorf("%s %s capture %d: %s event at %.0f Hz, J/N %.1f dB", in.format, fmtRate(in.fs), k, e.Class, e.OffsetHz, e.JNDB)
			}
		}
	}
}

func fmtRate(fs float64) string { return fmt.Sprintf("%g MS/s", fs/1e6) }

// TestRandomMix: over a randomized mix of emitters, the class of each
// detected event is right for ≥ 95 %, and interference covering part of a
// capture starts and ends within 5 ms of the truth.
func TestRandomMix(t *testing.T) {
	const fs = 4e6
	n := 200
	if testing.Short() {
		n = 40
	}
	rng := rand.New(rand.NewPCG(42, 7))
	right, detected, timed, timedOK := 0, 0, 0, 0
	st := learnedState(t, fs, "ci16_le", 0.1)
	for i := 0; i < n; i++ {
		em := randomEmitter(rng, fs)
		// Half of them cover only part of the capture.
		if rng.IntN(2) == 0 && em.Kind != synth.KindPulsed {
			em.StartS = 0.02 + 0.02*rng.Float64()
			em.EndS = em.StartS + 0.03 + 0.02*rng.Float64()
		}
		s := baseScenario(fs, "ci16_le", 0.1)
		s.Seed = uint64(500 + i)
		s.Captures[0].Emitters = []synth.Emitter{em}
		p := NewPipeline(Config{}, &State{Baselines: cloneBaselines(st.Baselines), episodes: map[string][]openEpisode{}})
		evs := run(t, p, s)[0].Events
		if len(evs) == 0 {
			t.Logf("missed %s %+v", em.Kind, em)
			continue
		}
		// The strongest event is the one to classify.
		best := evs[0]
		for _, e := range evs {
			if e.JNDB > best.JNDB {
				best = e
			}
		}
		detected++
		if best.Class == em.Kind {
			right++
		} else {
			t.Logf("%s classified as %s", em.Kind, best.Class)
		}
		if em.StartS > 0 && best.Class == em.Kind {
			timed++
			s0 := float64(best.SampleStart) / fs
			s1 := float64(best.SampleStart+best.SampleCount) / fs
			if math.Abs(s0-em.StartS) <= 5e-3 && math.Abs(s1-em.EndS) <= 5e-3 {
				timedOK++
			} else {
				t.Logf("%s timed %.1f..%.1f ms, truth %.1f..%.1f", em.Kind, s0*1e3, s1*1e3, em.StartS*1e3, em.EndS*1e3)
			}
		}
	}
	t.Logf("detected %d/%d, class right %d, timing right %d/%d", detected, n, right, timedOK, timed)
	if detected < n*9/10 {
		t.Errorf("detected only %d of %d", detected, n)
	}
	if float64(right) < 0.95*float64(detected) {
		t.Errorf("class right for %d of %d detected (< 95 %%)", right, detected)
	}
	if float64(timedOK) < 0.95*float64(timed) {
		t.Errorf("start and end within 5 ms for %d of %d", timedOK, timed)
	}
}

func randomEmitter(rng *rand.Rand, fs float64) synth.Emitter {
	u := func(a, b float64) float64 { return a + (b-a)*rng.Float64() }
	switch rng.IntN(5) {
	case 0:
		return synth.Emitter{Kind: synth.KindCW, Tones: []synth.Tone{{OffsetHz: u(-0.45, 0.45) * fs, JNDB: u(-10, 20)}}}
	case 1:
		span := u(0.3, 0.8) * fs
		lo := u(-fs/2+1e3, fs/2-span-1e3)
		return synth.Emitter{Kind: synth.KindSwept, JNDB: u(0, 20), LowHz: lo, HighHz: lo + span,
			PeriodS: u(8e-6, 30e-6), Shape: []string{"up", "down", "triangle"}[rng.IntN(3)]}
	case 2:
		if rng.IntN(2) == 0 {
			return synth.Emitter{Kind: synth.KindPulsed, Pulse: "gaussian_pair", JNDB: u(10, 25), PRIS: u(200e-6, 2e-3), OffsetHz: u(-1e6, 1e6)}
		}
		w := u(2e-6, 50e-6)
		return synth.Emitter{Kind: synth.KindPulsed, Pulse: "rect", JNDB: u(10, 25), WidthS: w, PRIS: u(math.Max(100e-6, 4*w), 5e-3), OffsetHz: u(-1e6, 1e6)}
	case 3:
		return synth.Emitter{Kind: synth.KindWidebandNoise, FloorRiseDB: u(1, 10)}
	}
	bw := u(50e3, 1e6)
	return synth.Emitter{Kind: synth.KindNarrowbandNoise, BandwidthHz: bw, OffsetHz: u(-fs/2+bw, fs/2-bw), JNDB: u(0, 15)}
}
