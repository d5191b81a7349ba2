package detect

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"quietband/ingest/synth"
)

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
