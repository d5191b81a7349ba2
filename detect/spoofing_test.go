package detect

import (
	"bytes"
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"testing"
	"time"

	"quietband/detect/gnss"
	"quietband/ingest"
	"quietband/ingest/synth"
)

// spoofSite runs captures of one input the way the pipeline does for
// satellites: one GNSSMeter kept from capture to capture, the site's
// baseline snapshot before each capture, Spoofing on every capture, and
// the clean ones (no spoofing event, measured) teaching the per-PRN C/N0
// baseline (learnCN0, as the pipeline does) and the sky history
// (LearnSky).
type spoofSite struct {
	meter *GNSSMeter
	bl    *Baselines
	key   string
	// frozen stops the learning (the pipeline learns nothing from a
	// capture with a cn0_drop or wideband_noise event, which a test
	// without the spectral pass does not see).
	frozen bool
}

func newSpoofSite() *spoofSite {
	return &spoofSite{meter: &GNSSMeter{}, bl: NewBaselines(), key: "site"}
}

// capture measures one capture and applies Spoofing.
func (s *spoofSite) capture(t testing.TB, path string) (SatelliteResult, Event, bool) {
	t.Helper()
	c, err := ingest.Open(path, ingest.RawSettings{})
	if err != nil {
		t.Fatal(err)
	}
	r, err := MeasureSatellites(context.Background(), c, s.meter, 65536)
	if err != nil {
		t.Fatal(err)
	}
	power := NewPowerStats(nil, r, c.SampleRate)
	base := s.bl.snapshot(s.key)
	ev, ok := Spoofing(r, &base, power, c.Start(), Config{})
	if !ok && !s.frozen && r.Unmeasured == "" && len(r.Satellites) > 0 {
		cn0 := map[int]float64{}
		for _, sat := range r.Satellites {
			cn0[sat.PRN] = sat.CN0DBHz
		}
		s.bl.update(s.key, func(b *Baseline) { b.learnCN0(cn0, StrongestMean(r.Satellites, 4), 4, 0.1) })
		s.bl.LearnSky(s.key, r, power, c.Start(), Config{})
	}
	return r, ev, ok
}

// writeScenario synthesizes s into a temporary folder.
func writeSpoofScenario(t testing.TB, s synth.Scenario) (string, []synth.Truth) {
	t.Helper()
	dir := t.TempDir()
	truths, err := synth.Write(&s, dir)
	if err != nil {
		t.Fatal(err)
	}
	return dir, truths
}

// spoofTrial is a site with a random sky (RandomSky, ten satellites: a
// typical GPS sky, REFERENCES §8) at rate fs: one clean capture for the
// baseline, then a 0.25 s capture with the spoofer.
func spoofTrial(fs float64, seed uint64, sp synth.Spoofer) synth.Scenario {
	return synth.Scenario{Name: "spoof-trial", Site: "test", Format: "ci16_le", SampleRate: fs, NoiseDBFS: -30,
		Seed: seed, RandomSky: &synth.RandomSkySpec{Satellites: 10, Seed: seed},
		Captures: []synth.Capture{{Name: "a-clean"}, {Name: "b-spoofed", OffsetS: 60, Spoofers: []synth.Spoofer{sp}}}}
}

// truthOver is the truth's power of the false signals over the authentic
// ones, mean over prns: the synthesizer's C/N0 of each false signal minus
// that of the authentic signal of its PRN.
func truthOver(tr synth.Truth, prns []int) float64 {
	var sum float64
	n := 0
	for _, prn := range prns {
		var au, sp float64
		okA, okS := false, false
		for _, s := range tr.Satellites {
			if s.PRN == prn {
				au, okA = s.CN0DBHz, true
			}
		}
		for _, s := range tr.Spoofers[0].Signals {
			if s.PRN == prn {
				sp, okS = s.CN0DBHz, true
			}
		}
		if okA && okS {
			sum += sp - au
			n++
		}
	}
	return sum / float64(n)
}

// TestSpoofingFound is the requirement: each of a counterfeit sky,
// a matched-power spoofer and a meacon is found in at least 95 % of
// synthesized 0.25 s captures at 4–10 MS/s, with the right kind, only
// PRNs the spoofer sends, delay_chips within 0.1 chip of the meacon's
// delay and power_over_authentic_db within 1.5 dB of the truth (the mean
// over the event's PRNs of the false signals' C/N0 over the authentic
// ones', as the synthesizer wrote them).
//
// Each trial is a site with a random sky of ten satellites (RandomSky:
// 35–53 dB-Hz), one clean capture for its baseline, then the spoofed one:
//   - counterfeit: every satellite at a uniform C/N0 drawn in 48–54 dB-Hz,
//     other code phases and Dopplers (the case);
//   - matched power: +3 dB over each authentic signal, 2–20 chips away;
//   - meaconing: the band re-radiated 1–3 µs late at +2..+6 dB.
//
// The default run takes two trials per kind at 4, 5 and 10 MS/s (18
// spoofed captures); QUIETBAND_LONG=1 takes twenty (180), which is what
// the 95 % is measured on.
func TestSpoofingFound(t *testing.T) {
	trials := 2
	if os.Getenv("QUIETBAND_LONG") == "1" {
		trials = 20
	}
	type kindCase struct {
		name, kind string
		draw       func(rng *rand.Rand) synth.Spoofer
	}
	kinds := []kindCase{
		{"counterfeit", "counterfeit", func(rng *rand.Rand) synth.Spoofer {
			return synth.Spoofer{Kind: synth.SpoofCounterfeit, CN0DBHz: math.Round(10*(48+6*rng.Float64())) / 10}
		}},
		{"matched-power", "counterfeit", func(rng *rand.Rand) synth.Spoofer {
			return synth.Spoofer{Kind: synth.SpoofMatchedPower, PowerDB: 3}
		}},
		{"meaconing", "meaconing", func(rng *rand.Rand) synth.Spoofer {
			return synth.Spoofer{Kind: synth.SpoofMeaconing, DelayS: math.Round((1+2*rng.Float64())*1e9) / 1e15,
				PowerDB: math.Round(10*(2+4*rng.Float64())) / 10}
		}},
	}
	for _, kc := range kinds {
		for _, fs := range []float64{4e6, 5e6, 10e6} {
			t.Run(fmt.Sprintf("%s/%gMSps", kc.name, fs/1e6), func(t *testing.T) {
				t.Parallel()
				rng := rand.New(rand.NewPCG(101, uint64(fs)))
				found := 0
				var overErr, delayErr []float64
				for trial := range trials {
					sp := kc.draw(rng)
					dir, truths := writeSpoofScenario(t, spoofTrial(fs, uint64(1000*fs/1e6)+uint64(trial), sp))
					site := newSpoofSite()
					if _, ev, ok := site.capture(t, filepath.Join(dir, truths[0].Capture)); ok {
						t.Errorf("trial %d: spoofing event on the clean capture: %+v", trial, ev.Params)
					}
					tr := truths[1]
					r, ev, ok := site.capture(t, filepath.Join(dir, tr.Capture))
					if !ok {
						t.Logf("trial %d (%+v): not found; %d satellites, %d with two peaks", trial, sp, len(r.Satellites), len(r.Correlations))
						continue
					}
					p := ev.Params
					if p.Kind != kc.kind {
						t.Errorf("trial %d: kind %q, want %q (indicators %v)", trial, p.Kind, kc.kind, p.Indicators)
						continue
					}
					found++
					for _, prn := range p.PRNs {
						if !slices.ContainsFunc(tr.Spoofers[0].Signals, func(s synth.TruthSpoofSignal) bool { return s.PRN == prn }) {
							t.Errorf("trial %d: PRN %d in the event, not sent by the spoofer", trial, prn)
						}
					}
					if p.PowerOverAuthenticDB == nil {
						t.Errorf("trial %d: no power_over_authentic_db", trial)
					} else {
						want := truthOver(tr, p.PRNs)
						overErr = append(overErr, *p.PowerOverAuthenticDB-want)
						if d := *p.PowerOverAuthenticDB - want; math.Abs(d) > 1.5 {
							t.Errorf("trial %d: power_over_authentic_db %.2f, truth %.2f over PRNs %v", trial, *p.PowerOverAuthenticDB, want, p.PRNs)
						}
					}
					if kc.kind == "meaconing" {
						want := sp.DelayS * 1.023e6
						if p.DelayChips == nil {
							t.Errorf("trial %d: meaconing without delay_chips", trial)
						} else {
							delayErr = append(delayErr, *p.DelayChips-want)
							if d := *p.DelayChips - want; math.Abs(d) > 0.1 {
								t.Errorf("trial %d: delay_chips %.3f, truth %.3f", trial, *p.DelayChips, want)
							}
						}
					} else if p.DelayChips != nil {
						t.Errorf("trial %d: delay_chips %v on a counterfeit event", trial, *p.DelayChips)
					}
					if ev.BandwidthHz != 2.046e6 || ev.OffsetHz != 0 || len(p.Peaks) == 0 {
						t.Errorf("trial %d: event bandwidth %g, offset %g, %d peaks", trial, ev.BandwidthHz, ev.OffsetHz, len(p.Peaks))
					}
				}
				t.Logf("found %d of %d; power_over_authentic_db errors %.2f; delay errors %.3f", found, trials, overErr, delayErr)
				if float64(found) < 0.95*float64(trials) {
					t.Errorf("found in %d of %d captures, want ≥ 95 %%", found, trials)
				}
			})
		}
	}
}

// TestSpoofingCleanMultipath is the false-alarm requirement: no
// spoofing event on clean captures with multipath (every satellite with a
// reflected copy 0.2–0.8 chip late, 3–6 dB weaker: reflections stay within
// 1.5 chips and below the direct path, REFERENCES §11.5). Sites of ten
// satellites (RandomSky), ten captures a minute apart each (the sky
// moving, the baseline learning as in the pipeline), multipath on all but
// the first, at 4, 5 and 10 MS/s in turn. The default run takes 3 sites
// (27 captures with multipath); QUIETBAND_LONG=1 takes 23 (207).
func TestSpoofingCleanMultipath(t *testing.T) {
	sites := 3
	if os.Getenv("QUIETBAND_LONG") == "1" {
		sites = 23
	}
	rates := []float64{4e6, 5e6, 10e6}
	events, captures, pairs := 0, 0, 0
	for i := range sites {
		s := synth.Scenario{Name: fmt.Sprintf("mp-%d", i), Site: "test", Format: "ci16_le", SampleRate: rates[i%3], NoiseDBFS: -30,
			Seed: uint64(200 + i), RandomSky: &synth.RandomSkySpec{Satellites: 10, Seed: uint64(300 + i)}}
		for k := range 10 {
			c := synth.Capture{Name: fmt.Sprintf("c%02d", k), OffsetS: float64(k) * 60}
			if k > 0 {
				c.Multipath = &synth.Multipath{}
			}
			s.Captures = append(s.Captures, c)
		}
		dir, truths := writeSpoofScenario(t, s)
		site := newSpoofSite()
		for k, tr := range truths {
			r, ev, ok := site.capture(t, filepath.Join(dir, tr.Capture))
			if k > 0 {
				captures++
			}
			pairs += len(r.Correlations)
			if ok {
				events++
				t.Errorf("site %d (%g MS/s) %s: spoofing event %s %v, PRNs %v", i, s.SampleRate/1e6, tr.Capture, ev.Params.Kind, ev.Params.Indicators, ev.Params.PRNs)
			}
		}
	}
	t.Logf("%d captures with multipath: %d spoofing events, %d PRNs with a second peak", captures, events, pairs)
}

// TestSpoofingInterference: no spoofing event under any interference
// class of the test bank (REFERENCES §5, §6: CW, swept in the band and
// far wider, slow sweeps, DME-like pairs, rectangular pulses, narrow and
// wider noise bands, wideband noise; J/N 10 to 40 dB, the bank of
// detect/gnss's TestInterferenceBank), each after a clean capture of the
// same site, at 4 MS/s.
func TestSpoofingInterference(t *testing.T) {
	bank := []struct {
		name string
		em   func(jn float64) synth.Emitter
	}{
		{"cw", func(jn float64) synth.Emitter { return synth.Emitter{Kind: synth.KindCW, OffsetHz: 312.7e3, JNDB: jn} }},
		{"sweep-inband-100us", func(jn float64) synth.Emitter {
			return synth.Emitter{Kind: synth.KindSwept, LowHz: -1.2e6, HighHz: 1.2e6, PeriodS: 100e-6, JNDB: jn}
		}},
		{"sweep-20MHz-10us", func(jn float64) synth.Emitter {
			return synth.Emitter{Kind: synth.KindSwept, LowHz: -10e6, HighHz: 10e6, PeriodS: 10e-6, JNDB: jn}
		}},
		{"sweep-slow-1ms", func(jn float64) synth.Emitter {
			return synth.Emitter{Kind: synth.KindSwept, LowHz: -1.5e6, HighHz: 1.5e6, PeriodS: 1e-3, JNDB: jn}
		}},
		{"dme-pairs", func(jn float64) synth.Emitter {
			return synth.Emitter{Kind: synth.KindPulsed, OffsetHz: 150e3, PRIS: 1 / 2700.0, JNDB: jn}
		}},
		{"rect-10us", func(jn float64) synth.Emitter {
			return synth.Emitter{Kind: synth.KindPulsed, Pulse: "rect", OffsetHz: -300e3, PRIS: 200e-6, WidthS: 10e-6, JNDB: jn}
		}},
		{"band-200kHz", func(jn float64) synth.Emitter {
			return synth.Emitter{Kind: synth.KindNarrowbandNoise, OffsetHz: 250e3, BandwidthHz: 200e3, JNDB: jn}
		}},
		{"band-1MHz", func(jn float64) synth.Emitter {
			return synth.Emitter{Kind: synth.KindNarrowbandNoise, OffsetHz: -400e3, BandwidthHz: 1e6, JNDB: jn}
		}},
		{"wideband", func(jn float64) synth.Emitter {
			return synth.Emitter{Kind: synth.KindWidebandNoise, FloorRiseDB: 10 * math.Log10(1+math.Pow(10, jn/10))}
		}},
	}
	levels := []float64{10, 40}
	if os.Getenv("QUIETBAND_LONG") == "1" {
		levels = []float64{10, 20, 30, 40}
	}
	for bi, b := range bank {
		t.Run(b.name, func(t *testing.T) {
			t.Parallel()
			for li, jn := range levels {
				s := synth.Scenario{Name: "bank", Site: "test", Format: "ci16_le", SampleRate: 4e6, NoiseDBFS: -30,
					Seed: uint64(400 + 10*bi + li), RandomSky: &synth.RandomSkySpec{Satellites: 10, Seed: uint64(500 + 10*bi + li)},
					Captures: []synth.Capture{{Name: "a"}, {Name: "b", OffsetS: 60, Emitters: []synth.Emitter{b.em(jn)}}}}
				dir, truths := writeSpoofScenario(t, s)
				site := newSpoofSite()
				for _, tr := range truths {
					r, ev, ok := site.capture(t, filepath.Join(dir, tr.Capture))
					t.Logf("J/N %g dB %s: %d satellites, %d with a second peak", jn, tr.Capture, len(r.Satellites), len(r.Correlations))
					if ok {
						t.Errorf("J/N %g dB %s: spoofing event %s %v, PRNs %v", jn, tr.Capture, ev.Params.Kind, ev.Params.Indicators, ev.Params.PRNs)
					}
				}
			}
		})
	}
}

// TestSpoofingRealRecordings: no spoofing event, and no second peak, on
// the two real recordings of testdata/realdata (their README: satellites
// only, no interference), each read twice through one meter as two
// captures of an input.
func TestSpoofingRealRecordings(t *testing.T) {
	for _, rc := range []struct {
		file string
		raw  ingest.RawSettings
	}{
		{"L1_20211202_084700_4MHz_IQ.bin", ingest.RawSettings{Format: ingest.CI8, SampleRate: 4e6, CenterHz: 1575.42e6, HasCenter: true}},
		{"L1_20211125_004000_12MHz_I.bin", ingest.RawSettings{Format: ingest.RI8, SampleRate: 12e6, CenterHz: 1575.42e6, HasCenter: true,
			IFHz: 3e6, LOSide: ingest.LowSide}},
	} {
		c, err := ingest.Open(filepath.Join("..", "testdata", "realdata", rc.file), rc.raw)
		if err != nil {
			t.Fatal(err)
		}
		m := &GNSSMeter{}
		var base *Baseline
		for pass := range 2 {
			r, err := MeasureSatellites(context.Background(), c, m, 65536)
			if err != nil {
				t.Fatal(err)
			}
			st := &Stats{Quantization: "2-bit"}
			ev, ok := Spoofing(r, base, NewPowerStats(st, r, c.SampleRate), c.Start(), Config{})
			t.Logf("%s pass %d: %d satellites, %d with a second peak", rc.file, pass, len(r.Satellites), len(r.Correlations))
			if ok || len(r.Correlations) > 0 {
				t.Errorf("%s pass %d: spoofing event %v (%+v), second peaks %+v", rc.file, pass, ok, ev.Params, r.Correlations)
			}
			bl := NewBaselines()
			bl.LearnSky("k", r, NewPowerStats(st, r, c.SampleRate), c.Start(), Config{})
			b := bl.snapshot("k")
			base = &b
		}
	}
}

// TestSpoofingBuiltins: the built-in scenarios end to end (ingest/synth's
// spoofing and jam-then-spoof, 0.25 s at 4 MS/s): the clean captures and
// the one with multipath raise nothing, the counterfeit and the
// matched-power captures raise a counterfeit event, the meacon a
// meaconing one at its delay (1.5 µs = 1.5345 chips, within 0.1 chip);
// after the noise jammer (whose capture raises nothing of this class),
// the captures with the counterfeit sky raise counterfeit events.
func TestSpoofingBuiltins(t *testing.T) {
	for _, tc := range []struct {
		name string
		want []string // per capture: "" or the kind
	}{
		{"spoofing", []string{"", "", "", "counterfeit", "counterfeit", "meaconing", ""}},
		// jts-4: the jammer holds the acquisition snapshot, the
		// counterfeit comes later in the capture: it is not judged.
		{"jam-then-spoof", []string{"", "", "", "?", "counterfeit", "counterfeit"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			s, err := synth.Builtin(tc.name)
			if err != nil {
				t.Fatal(err)
			}
			dir, truths := writeSpoofScenario(t, s)
			site := newSpoofSite()
			for i, tr := range truths {
				r, ev, ok := site.capture(t, filepath.Join(dir, tr.Capture))
				got := ""
				if ok {
					got = ev.Params.Kind
				}
				t.Logf("%s: %d satellites, %d with a second peak: %q %v %v", tr.Capture, len(r.Satellites), len(r.Correlations), got, ev.Params.Indicators, ev.Params.PRNs)
				if tc.want[i] != "?" && got != tc.want[i] {
					t.Errorf("%s: spoofing %q, want %q", tr.Capture, got, tc.want[i])
				}
				if got == "meaconing" {
					if d := ev.Params.DelayChips; d == nil || math.Abs(*d-1.5345) > 0.1 {
						t.Errorf("%s: delay_chips %v, truth 1.5345", tr.Capture, d)
					}
				}
			}
		})
	}
}

// TestClassifyPowerCN0Matrix: the rows of REFERENCES §11.2's indicator
// matrix, with the values its models give [C]: wideband jamming at
// J/N = 0 dB (power +3.01 dB, every C/N0 −3.01 dB, §9); a spoofer sending
// eight PRNs 3 dB over authentic 45 dB-Hz signals in a 2.046 MHz band
// (power +0.79 dB, §11.1 table; tracked C/N0 44.41 → 46.38 dB-Hz, §11.1);
// a 3 dB gain step (C/N0 unchanged); a blocked sky (eight signals 8 dB
// down: power −0.46 dB at most, §11.2); multipath (flat, small C/N0
// fluctuations); and what cannot be read (no site in-band power, low-bit
// samples, a capture too short to track).
func TestClassifyPowerCN0Matrix(t *testing.T) {
	prns := []int{2, 5, 9, 12, 17, 21, 26, 30}
	base := &Baseline{CN0: map[int]float64{}, InBandPowerDBFS: -30, InBandCaptures: 4, CN0Mean: 44.41}
	for _, p := range prns {
		base.CN0[p] = 44.41
	}
	sats := func(delta float64) SatelliteResult {
		var r SatelliteResult
		for i, p := range prns {
			// ±0.2 dB of estimator scatter, alternating.
			r.Satellites = append(r.Satellites, Satellite{PRN: p, CN0DBHz: 44.41 + delta + 0.2*float64(1-2*(i%2)), Method: MethodTracked})
		}
		return r
	}
	power := func(rise float64) PowerStats { return PowerStats{InBandDBFS: ptr(-30 + rise)} }
	for _, tc := range []struct {
		name        string
		r           SatelliteResult
		p           PowerStats
		base        *Baseline
		class       string
		ok          bool
		rise, delta float64
	}{
		{"wideband jamming J/N 0 dB", sats(-3.01), power(3.01), base, PowerCN0Jammer, true, 3.01, -3.01},
		{"spoofer +3 dB, 8 PRNs", sats(46.38 - 44.41), power(0.79), base, PowerCN0Spoofer, true, 0.79, 1.97},
		{"gain step +3 dB", sats(0), power(3), base, PowerCN0GainChange, true, 3, 0},
		{"blocked sky −8 dB", sats(-8), power(-0.46), base, PowerCN0Obstruction, true, -0.46, -8},
		{"multipath", sats(-0.3), power(0.05), base, "", true, 0.05, -0.3},
		{"weak rise, C/N0 flat", sats(0), power(0.7), base, "", true, 0.7, 0},
		{"no site in-band power", sats(0), power(3), &Baseline{CN0: base.CN0}, "", false, 0, 0},
		{"low-bit samples", sats(0), PowerStats{InBandDBFS: ptr(-27.0), LowBit: true}, base, "", false, 0, 0},
		{"too short to track", SatelliteResult{Satellites: sats(0).Satellites, Unmeasured: "too short"}, power(3), base, "", false, 0, 0},
	} {
		t.Run(tc.name, func(t *testing.T) {
			got, ok := ClassifyPowerCN0(tc.r, tc.base, tc.p)
			if ok != tc.ok || got.Class != tc.class {
				t.Fatalf("class %q ok %v, want %q %v (%+v)", got.Class, ok, tc.class, tc.ok, got)
			}
			if ok && (math.Abs(got.PowerRiseDB-tc.rise) > 1e-9 || math.Abs(got.CN0ChangeDB-tc.delta) > 1e-9 || got.PRNs != len(prns)) {
				t.Errorf("rise %g, C/N0 change %g over %d PRNs; want %g, %g over %d", got.PowerRiseDB, got.CN0ChangeDB, got.PRNs, tc.rise, tc.delta, len(prns))
			}
			if GainChange(tc.r, tc.base, tc.p) != (tc.class == PowerCN0GainChange) {
				t.Errorf("GainChange disagrees with the class %q", got.Class)
			}
		})
	}
}

// TestPowerCN0Synthesized: the gain-change and blocked-sky cases
// (and a jammer and a spoofer) on synthesized captures of the demo's sky
// at 4 MS/s, after three clean captures for the baselines: the front end's
// gain up 3 dB reads as a gain change (GainChange true: the pipeline
// vetoes a wideband_noise event on it); every satellite 8 dB down
// (AttenuationDB) reads as an obstruction and raises cn0_drop
// (cn0DropFrom); band noise raising the floor 6 dB reads as a jammer; a
// counterfeit sky at 50 dB-Hz as a spoofer. None raises a spoofing event
// but the last.
func TestPowerCN0Synthesized(t *testing.T) {
	sky := synth.Demo().Captures[0].Satellites
	caps := []synth.Capture{{Name: "a"}, {Name: "b", OffsetS: 60}, {Name: "c", OffsetS: 120},
		{Name: "gain", OffsetS: 180, FrontEnd: &synth.FrontEnd{GainDB: ptr(3.0)}},
		{Name: "blocked", OffsetS: 240, AttenuationDB: 8},
		{Name: "jammer", OffsetS: 300, Emitters: []synth.Emitter{{Kind: synth.KindWidebandNoise, FloorRiseDB: 6}}},
		{Name: "spoofer", OffsetS: 360, Spoofers: []synth.Spoofer{{Kind: synth.SpoofCounterfeit, CN0DBHz: 50}}}}
	for i := range caps {
		caps[i].Satellites = sky
	}
	s := synth.Scenario{Name: "powercn0", Site: "test", Format: "ci16_le", SampleRate: 4e6, NoiseDBFS: -30, Seed: 61, Captures: caps}
	dir, truths := writeSpoofScenario(t, s)
	site := newSpoofSite()
	want := map[string]string{"gain": PowerCN0GainChange, "blocked": PowerCN0Obstruction, "jammer": PowerCN0Jammer, "spoofer": PowerCN0Spoofer}
	for i, tr := range truths {
		site.frozen = i >= 3 // the baselines of the three clean captures
		base := site.bl.snapshot(site.key)
		c, err := ingest.Open(filepath.Join(dir, tr.Capture), ingest.RawSettings{})
		if err != nil {
			t.Fatal(err)
		}
		r, ev, spoofed := site.capture(t, filepath.Join(dir, tr.Capture))
		name := caps[i].Name
		w, judged := want[name]
		if !judged {
			continue
		}
		power := NewPowerStats(nil, r, c.SampleRate)
		pc, ok := ClassifyPowerCN0(r, &base, power)
		t.Logf("%s: %+v (ok %v); spoofing %v %v", name, pc, ok, spoofed, ev.Params.Indicators)
		if !ok || pc.Class != w {
			t.Errorf("%s: class %q (ok %v), want %q", name, pc.Class, ok, w)
		}
		if GainChange(r, &base, power) != (name == "gain") {
			t.Errorf("%s: GainChange %v", name, !(name == "gain"))
		}
		if _, drop := cn0DropFrom(r, &base, 3); drop != (name == "blocked" || name == "jammer") {
			t.Errorf("%s: cn0_drop %v", name, drop)
		}
		if spoofed != (name == "spoofer") {
			t.Errorf("%s: spoofing event %v (%v)", name, spoofed, ev.Params.Indicators)
		}
	}
}

// TestSpoofingSkyAndCodeCarrier: a site that learned its sky over three
// clean captures sees, one sidereal day later (the GPS sky repeats, 23 h
// 56 min 4 s: common practice), a counterfeit of three PRNs it never saw
// at that time of day, strong (52 dB-Hz) and from a generator whose code
// and carrier oscillators disagree by up to ±3 kHz of carrier (REFERENCES
// §11.4). No authentic signal of those PRNs is there, so there is no
// second peak: unexpected_prns and code_carrier_chips_s fire together and
// make a counterfeit event listing those PRNs. The same capture at
// another time of day, where the site has no history, raises nothing.
func TestSpoofingSkyAndCodeCarrier(t *testing.T) {
	sky := synth.Demo().Captures[0].Satellites // PRNs 3 7 11 14 19 22 27 31
	fake := []int{5, 16, 29}
	start := time.Date(2026, 3, 14, 6, 0, 0, 0, time.UTC)
	s := synth.Scenario{Name: "sky", Site: "test", Format: "ci16_le", SampleRate: 4e6, NoiseDBFS: -30, Seed: 62, Start: start,
		Captures: []synth.Capture{{Name: "a"}, {Name: "b", OffsetS: 60}, {Name: "c", OffsetS: 120},
			{Name: "d", OffsetS: SiderealDay + 60, Spoofers: []synth.Spoofer{{Kind: synth.SpoofCounterfeit, CN0DBHz: 52, PRNs: fake, CodeCarrierHz: 3000}}},
			{Name: "e", OffsetS: SiderealDay/2 + 60, Spoofers: []synth.Spoofer{{Kind: synth.SpoofCounterfeit, CN0DBHz: 52, PRNs: fake, CodeCarrierHz: 3000}}}}}
	for i := range s.Captures {
		s.Captures[i].Satellites = sky
	}
	dir, truths := writeSpoofScenario(t, s)
	site := newSpoofSite()
	for i, tr := range truths {
		r, ev, ok := site.capture(t, filepath.Join(dir, tr.Capture))
		t.Logf("%s: %d satellites, code rates %+v; event %v %s %v %v", tr.Capture, len(r.Satellites), r.CodeRates, ok, ev.Params.Kind, ev.Params.Indicators, ev.Params.PRNs)
		switch i {
		case 3:
			ind := ev.Params.Indicators
			if !ok || ev.Params.Kind != "counterfeit" || ind["unexpected_prns"] != 3 || ind["code_carrier_chips_s"] <= codeCarrierChips {
				t.Errorf("%s: event %v %+v, want counterfeit with 3 unexpected PRNs and a code-carrier mismatch", tr.Capture, ok, ev.Params)
			}
			for _, p := range fake {
				if !slices.Contains(ev.Params.PRNs, p) {
					t.Errorf("%s: PRN %d missing from %v", tr.Capture, p, ev.Params.PRNs)
				}
			}
		case 4:
			if ok && ev.Params.Indicators["unexpected_prns"] > 0 {
				t.Errorf("%s: unexpected PRNs where the site has no history: %v", tr.Capture, ev.Params.Indicators)
			}
		default:
			if ok {
				t.Errorf("%s: spoofing event on a clean capture: %v", tr.Capture, ev.Params.Indicators)
			}
		}
	}
}

// TestSkyHistoryPersisted: the sky history and in-band power survive the
// baselines' file (WriteTo, ReadBaselines), and a snapshot is a copy.
func TestSkyHistoryPersisted(t *testing.T) {
	bl := NewBaselines()
	at := time.Date(2026, 3, 14, 6, 0, 0, 0, time.UTC)
	r := SatelliteResult{Satellites: []Satellite{{PRN: 3, CN0DBHz: 45, Method: MethodTracked}, {PRN: 31, CN0DBHz: 41, Method: MethodTracked}}}
	for k := range 3 {
		bl.LearnSky("k", r, PowerStats{InBandDBFS: ptr(-33.0 + float64(k))}, at.Add(time.Duration(k)*time.Minute), Config{})
	}
	bl.update("k", func(b *Baseline) { b.FFTSize, b.PSD = 1, []float64{1} }) // WriteTo keeps learned passbands only
	var buf bytes.Buffer
	if _, err := bl.WriteTo(&buf); err != nil {
		t.Fatal(err)
	}
	got, err := ReadBaselines(&buf)
	if err != nil {
		t.Fatal(err)
	}
	b := got.snapshot("k")
	// The mean of −33, −32, −31 over the warm-up captures.
	if math.Abs(b.InBandPowerDBFS+32) > 1e-9 || b.InBandCaptures != 3 || b.Sky.SeenCount() != 2 {
		t.Fatalf("read back: in-band %g over %d, %d PRNs seen", b.InBandPowerDBFS, b.InBandCaptures, b.Sky.SeenCount())
	}
	strong := []Satellite{{PRN: 3, CN0DBHz: 45, Method: MethodTracked}, {PRN: 9, CN0DBHz: 46, Method: MethodTracked}, {PRN: 31, CN0DBHz: 41, Method: MethodTracked}}
	if u := b.Sky.unexpected(strong, at.Add(time.Duration(SiderealDay*float64(time.Second)))); !slices.Equal(u, []int{9}) {
		t.Errorf("a sidereal day later: unexpected %v, want [9]", u)
	}
	if u := b.Sky.unexpected(strong, at.Add(6*time.Hour)); u != nil {
		t.Errorf("six hours later (no history): unexpected %v", u)
	}
	b.Sky.Seen[9] = "1"
	if again := got.snapshot("k"); again.Sky.Seen[9] != "" {
		t.Error("the snapshot shares its sky history with the set")
	}
}

// TestDelayCluster: the meacon's common delay is the largest group of
// delays within 0.5 chip of each other (REFERENCES §11.5).
func TestDelayCluster(t *testing.T) {
	mk := func(prn int, d float64) gnss.Correlation { return gnss.Correlation{PRN: prn, DelayChips: -d} }
	got := delayCluster([]gnss.Correlation{mk(1, 1.50), mk(2, 3.1), mk(3, 1.62), mk(4, 1.45), mk(5, 9), mk(6, 1.96)})
	var prns []int
	for _, c := range got {
		prns = append(prns, c.PRN)
	}
	if !slices.Equal(prns, []int{1, 3, 4}) {
		t.Errorf("cluster %v, want [1 3 4]", prns)
	}
	if v, n := codeCarrier([]gnss.CodeRate{{PRN: 1, ErrChipsS: 1.0}, {PRN: 2, ErrChipsS: 1.05, SigmaChipsS: 0.02}, {PRN: 3, ErrChipsS: 0.95},
		{PRN: 4, ErrChipsS: 2.5, SigmaChipsS: 0.1}, {PRN: 5, ErrChipsS: -0.2, SigmaChipsS: 0.5}}); n != 1 || math.Abs(v-1.5) > 1e-9 {
		// Median 1.0 (a recorder's clocks): PRN 4 departs by 1.5 chips/s
		// at 15σ; PRN 5 by 1.2 but within 4σ.
		t.Errorf("code-carrier: %d PRNs, largest %g; want 1, 1.5", n, v)
	}
}
