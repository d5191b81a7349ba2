package gnss

// Issue 14 ("Real recorders ..."), what its Must show asks of the
// satellite meter, on captures written by package synth (an independent
// generator: its own code tables, front-end chain and truth sidecar, not
// this package's synthesize) and read back through package ingest, as
// the pipeline reads them: a receiver clock offset of ±10 kHz found by
// default and the offset reported within 20 Hz; a configurable clock
// range; an inverted spectrum found and measured upright; a sample drop
// and a zero-filled gap reported as a shared loss of lock; no false PRN
// over a bank of every interference class (J/N up to 40 dB for sweeps,
// 30 dB for noise) nor over noise-only captures of real front ends; how
// often satellites of 38 dB-Hz are still found per class and J/N; and the
// bank below 10 dB (the last two with QUIETBAND_LONG=1).

import (
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"quietband/ingest"
	"quietband/ingest/gpsca"
	"quietband/ingest/synth"
)

// issue14Long reports whether the long variants run (QUIETBAND_LONG=1).
func issue14Long() bool { return os.Getenv("QUIETBAND_LONG") == "1" }

// twoBitLossDB is the correlation loss of a 2-bit quantizer with levels
// ±1, ±3 and its threshold at σ (synth's default): 0.549 dB, REFERENCES
// §12.3 [C] (Hegarty 2011 quotes 0.55 dB).
const twoBitLossDB = 0.549

// pipelinePfa is the false-alarm probability per PRN search that
// detect.GNSSMeter configures: 10⁻³ per 32-PRN capture.
const pipelinePfa = 1e-3 / 32

// writeRecorder writes capture i of scenario s into dir with package
// synth and returns its truth and the path Open takes.
func writeRecorder(t *testing.T, s *synth.Scenario, i int, dir string) (synth.Truth, string) {
	t.Helper()
	if err := s.Normalize(); err != nil {
		t.Fatal(err)
	}
	tr, err := synth.WriteCapture(s, i, dir)
	if err != nil {
		t.Fatal(err)
	}
	return tr, filepath.Join(dir, tr.Capture)
}

// meterFile measures a capture file with m the way the pipeline feeds
// the meter: ingest.Open, then the Reader's blocks in order (65536
// complex samples, a 4 MS/s pipeline block).
func meterFile(t *testing.T, m *Meter, path string) (Measurement, *ingest.Capture) {
	t.Helper()
	c, err := ingest.Open(path, ingest.RawSettings{})
	if err != nil {
		t.Fatal(err)
	}
	center, ok := c.CenterHz()
	if !ok {
		t.Fatalf("%s: no centre", path)
	}
	if err := m.Start(c.SampleRate, center); err != nil {
		t.Fatal(err)
	}
	r, err := c.NewReader(65536)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	for {
		b, err := r.Next()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		m.Block(b.Start, b.Samples)
	}
	return m.Result(), c
}

// uprightDoppler is a truth satellite's Doppler on the recording's axis
// before any inversion: (L1 + f_D)/(1+ε) − L1 (synth's apparent Doppler,
// whose sign an inversion flips back here), or f_D without a front end.
func uprightDoppler(s synth.TruthSatellite, inverted bool) float64 {
	if s.ApparentDopplerHz == nil {
		return s.DopplerHz
	}
	if inverted {
		return -*s.ApparentDopplerHz
	}
	return *s.ApparentDopplerHz
}

// recorderSky is n satellites at the given C/N0 levels on distinct random
// PRNs, Doppler within ±4.5 kHz (a static receiver's geometric range,
// REFERENCES §12.5), random code phase.
func recorderSky(rng *rand.Rand, levels []float64) []synth.Satellite {
	var out []synth.Satellite
	for i, p := range rng.Perm(32)[:len(levels)] {
		out = append(out, synth.Satellite{PRN: p + 1, CN0DBHz: levels[i],
			DopplerHz: (2*rng.Float64() - 1) * 4500, CodePhaseChips: rng.Float64() * gpsca.CodeLength})
	}
	return out
}

// satErrors compares a measurement with a synth truth: for each truth
// satellite at or above minCN0 (dB-Hz) the measured one, or a miss; the
// worst Doppler (Hz), code phase (chips) and C/N0 (dB) errors, the C/N0
// against the truth less the front end's quantization loss lossDB; and
// the PRNs reported that are not in the truth.
type satErrors struct {
	missed          []int
	falsePRN        []int
	dop, code, cn0  float64
	cn0Errs         []float64 // signed C/N0 errors of the satellites compared
	compared, found int
	truthMedianHz   float64 // median upright Doppler of the PRNs measured
}

func compareSats(r Measurement, truth synth.Truth, inverted bool, minCN0, lossDB float64) satErrors {
	var e satErrors
	var dops []float64
	for _, s := range truth.Satellites {
		i := slices.IndexFunc(r.Satellites, func(m Measured) bool { return m.PRN == s.PRN })
		if i >= 0 {
			dops = append(dops, uprightDoppler(s, inverted))
		}
		if s.CN0DBHz < minCN0 {
			continue
		}
		e.compared++
		if i < 0 {
			e.missed = append(e.missed, s.PRN)
			continue
		}
		e.found++
		m := r.Satellites[i]
		e.dop = math.Max(e.dop, math.Abs(m.DopplerHz-uprightDoppler(s, inverted)))
		e.code = math.Max(e.code, math.Abs(chipErr(m.CodePhaseChips, s.CodePhaseChips)))
		e.cn0 = math.Max(e.cn0, math.Abs(m.CN0dBHz-(s.CN0DBHz-lossDB)))
		e.cn0Errs = append(e.cn0Errs, m.CN0dBHz-(s.CN0DBHz-lossDB))
	}
	for _, m := range r.Satellites {
		if !slices.ContainsFunc(truth.Satellites, func(s synth.TruthSatellite) bool { return s.PRN == m.PRN }) {
			e.falsePRN = append(e.falsePRN, m.PRN)
		}
	}
	if len(dops) > 0 {
		slices.Sort(dops)
		n := len(dops)
		e.truthMedianHz = dops[n/2]
		if n%2 == 0 {
			e.truthMedianHz = (dops[n/2-1] + dops[n/2]) / 2
		}
	}
	return e
}

// TestIssue14ClockOffsetRecorder: recorders whose reference is off by
// ±6.35 ppm (±10 kHz at L1, issue 14's Must show) or ±2 ppm (a TCXO's
// 3.2 kHz, REFERENCES §12.5), written by synth (clock_ppm acts on every
// carrier and the code rate) as ci16_le at 4 MS/s and as a 2-bit ci8
// front end at 5 MS/s, 0.25 s per capture, two captures per recorder
// (the second searched narrowly around the learned offset). With the
// meter's default clock range every satellite of 40 dB-Hz and more is
// found and tracked, with Doppler within 20 Hz, code phase within
// 0.05 chip (issue 14's bounds for the real recordings) and C/N0 within
// 2 dB of the truth (a single 0.25 s estimate scatters by up to about
// 0.85 dB, TestTrackCN0Accuracy) less the quantizer's loss (0.549 dB for
// 2 bits at T = σ, REFERENCES §12.3 [C], Hegarty 2011 quotes 0.55 dB);
// no PRN outside the truth; and the clock offset reported lies within
// 20 Hz (the Must show) of the median of the measured PRNs' true Dopplers
// on the recording's axis (the statistic ClockOffset defines, computed
// from synth's truth). The orientation is never reported inverted; it
// may be left undetermined, with the note that says so, when the
// satellites' Dopplers are too close to zero to separate the two
// orientations over the pull-in (the test of REFERENCES §12.2 weighs
// each satellite by its Doppler; the count is logged). With -short or
// the purego tag (whose point is the Go twins of the kernels) half the
// recorder and offset pairs run, each offset and recorder still once.
func TestIssue14ClockOffsetRecorder(t *testing.T) {
	type recorder struct {
		format string
		fs     float64
		quant  *synth.Quantization
		lossDB float64
	}
	recorders := []recorder{{"ci16_le", 4e6, nil, 0}, {"ci8", 5e6, &synth.Quantization{Bits: 2, ThresholdSigma: 1}, twoBitLossDB}}
	undetermined := 0
	var cn0Errs []float64
	rng := rand.New(rand.NewPCG(1401, 1))
	var worstClock, worstDop, worstCode, worstCN0 float64
	reduced := testing.Short() || puregoBuild // half the cases: see below
	captures := 0
	for ci, clockHz := range []float64{10000, -10000, 3150, -3150} {
		for ri, rec := range recorders {
			if reduced && (ci+ri)%2 == 1 {
				continue
			}
			t.Run(fmt.Sprintf("%+gHz/%s", clockHz, rec.format), func(t *testing.T) {
				ppm := -clockHz / gpsca.L1 * 1e6 // synth: Doppler moves by −ppm·L1
				s := &synth.Scenario{Name: "clock", Site: "issue14", Format: rec.format, SampleRate: rec.fs,
					NoiseDBFS: -20, Seed: rng.Uint64(),
					FrontEnd: &synth.FrontEnd{ClockPPM: &ppm, Quantization: rec.quant},
					Captures: []synth.Capture{{Name: "a", DurationS: 0.25}, {Name: "b", DurationS: 0.25, OffsetS: 60}}}
				sky := recorderSky(rng, []float64{38, 40, 43, 46, 49})
				s.Captures[0].Satellites, s.Captures[1].Satellites = sky, sky
				m := NewMeter(MeterConfig{Acq: AcqConfig{Pfa: pipelinePfa}})
				dir := t.TempDir()
				for i := range s.Captures {
					truth, path := writeRecorder(t, s, i, dir)
					r, _ := meterFile(t, m, path)
					e := compareSats(r, truth, false, 40, rec.lossDB)
					what := fmt.Sprintf("capture %d", i)
					if len(e.missed) > 0 || len(e.falsePRN) > 0 {
						t.Errorf("%s: missed %v, false PRNs %v (notes %q)", what, e.missed, e.falsePRN, r.Notes)
					}
					for _, sat := range r.Satellites {
						if sat.Method != MethodTracked {
							t.Errorf("%s: PRN %d %s", what, sat.PRN, sat.Method)
						}
					}
					if e.dop > 20 || e.code > 0.05 || e.cn0 > 2 {
						t.Errorf("%s: worst errors Doppler %.1f Hz, code %.3f chip, C/N0 %.2f dB", what, e.dop, e.code, e.cn0)
					}
					if r.WideSearch != (i == 0) {
						t.Errorf("%s: wide search %v", what, r.WideSearch)
					}
					clkErr := r.ClockOffsetHz - e.truthMedianHz
					if !r.HasClock || math.Abs(clkErr) > 20 {
						t.Errorf("%s: clock offset %.1f Hz (%v), median true Doppler %.1f Hz", what, r.ClockOffsetHz, r.HasClock, e.truthMedianHz)
					}
					switch {
					case r.Inverted == nil && slices.ContainsFunc(r.Notes, func(n string) bool { return strings.Contains(n, "do not separate the two orientations") }):
						undetermined++
						t.Logf("%s: orientation undetermined: %q", what, r.Notes)
					case r.Inverted == nil || *r.Inverted:
						t.Errorf("%s: orientation %v, want upright (notes %q)", what, r.Inverted, r.Notes)
					}
					t.Logf("%s: %d of %d satellites ≥ 40 dB-Hz, %d reported; clock offset %+.1f Hz (error %+.2f Hz); worst Doppler %.2f Hz, code %.4f chip, C/N0 %.2f dB",
						what, e.found, e.compared, len(r.Satellites), r.ClockOffsetHz, clkErr, e.dop, e.code, e.cn0)
					captures++
					worstClock = math.Max(worstClock, math.Abs(clkErr))
					cn0Errs = append(cn0Errs, e.cn0Errs...)
					worstDop, worstCode, worstCN0 = math.Max(worstDop, e.dop), math.Max(worstCode, e.code), math.Max(worstCN0, e.cn0)
				}
			})
		}
	}
	var sum, sq float64
	for _, d := range cn0Errs {
		sum, sq = sum+d, sq+d*d
	}
	n := float64(len(cn0Errs))
	t.Logf("over all recorders: clock offset error ≤ %.2f Hz; Doppler ≤ %.2f Hz, code phase ≤ %.4f chip, C/N0 ≤ %.2f dB (bias %+.2f dB, RMS %.2f dB over %d); orientation undetermined in %d of %d captures",
		worstClock, worstDop, worstCode, worstCN0, sum/n, math.Sqrt(sq/n), len(cn0Errs), undetermined, captures)
}

// TestIssue14ClockRange: the search range is a setting. A recorder 20 kHz
// off (12.7 ppm, beyond the default ±(5 + 10) kHz: AcqConfig) is not
// found by default, and is found, with its offset within 20 Hz, when
// ClockMaxHz is 20 kHz; neither reports a PRN that is not there. Captures
// from this package's synthesize (in memory, 0.15 s at 4 MS/s).
func TestIssue14ClockRange(t *testing.T) {
	const fs = 4e6
	rng := rand.New(rand.NewPCG(1402, 1))
	sats := skyWithClock(rng, []float64{42, 45, 48}, 20000)
	c := synthesize(rng, fs, gpsca.L1, 1, int(0.15*fs), sats)
	for _, tc := range []struct {
		name  string
		clock float64
		found bool
	}{{"default", 0, false}, {"ClockMaxHz 20 kHz", 20000, true}} {
		r := measure(t, NewMeter(MeterConfig{Acq: AcqConfig{Pfa: pipelinePfa, ClockMaxHz: tc.clock}}), fs, c.x, 65536)
		for _, m := range r.Satellites {
			if !slices.ContainsFunc(sats, func(s satSpec) bool { return s.prn == m.PRN }) {
				t.Errorf("%s: false PRN %+v", tc.name, m)
			}
		}
		if !tc.found {
			if len(r.Satellites) != 0 {
				t.Errorf("%s: %d satellites found 20 kHz off, beyond the search", tc.name, len(r.Satellites))
			}
			continue
		}
		checkSats(t, tc.name, r, sats)
		if want := truthMedian(sats); !r.HasClock || math.Abs(r.ClockOffsetHz-want) > 20 {
			t.Errorf("%s: clock offset %.1f Hz, truth median %.1f Hz", tc.name, r.ClockOffsetHz, want)
		} else {
			t.Logf("%s: clock offset %.1f Hz, truth median %.1f Hz", tc.name, r.ClockOffsetHz, want)
		}
	}
}

// TestIssue14InversionRecorder: recorders that swap I and Q (synth's
// spectrum_inverted: every Doppler flips, code Doppler does not,
// REFERENCES §12.2), 2-bit ci8 at 4 MS/s like the real 4 MS/s recording
// and ci16_le at 10 MS/s, with a clock offset of +7 kHz, 0.3 s: the
// inversion is found from the satellites and reported, and they are
// measured on the corrected samples: Doppler within 20 Hz and code phase
// within 0.05 chip of the truth (issue 14's bounds), C/N0 within 2 dB
// less the quantizer's loss (as TestIssue14ClockOffsetRecorder; the issue saw 3.5–8 dB low and
// code phases 1.5 chips off when the inversion went unnoticed). The same
// recorders upright are reported upright. A real-IF recorder with a
// high-side LO (ri8 at 2 × 5 MS/s; the IF conversion undoes the
// inversion a high-side LO makes, Tsui 2005 ch. 6) is upright too.
func TestIssue14InversionRecorder(t *testing.T) {
	rng := rand.New(rand.NewPCG(1403, 1))
	clock := -7000 / gpsca.L1 * 1e6
	for _, tc := range []struct {
		name     string
		format   string
		fs       float64
		quant    *synth.Quantization
		lossDB   float64
		inverted bool
		realIF   *synth.RealIF
	}{
		{"2-bit ci8 inverted", "ci8", 4e6, &synth.Quantization{Bits: 2, ThresholdSigma: 1}, twoBitLossDB, true, nil},
		{"ci16 inverted", "ci16_le", 10e6, nil, 0, true, nil},
		{"2-bit ci8 upright", "ci8", 4e6, &synth.Quantization{Bits: 2, ThresholdSigma: 1}, twoBitLossDB, false, nil},
		{"ri8 high-side LO", "ri8", 5e6, nil, 0, false, &synth.RealIF{IFHz: 2.5e6, LOSide: "high"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			inv := tc.inverted
			s := &synth.Scenario{Name: "inversion", Site: "issue14", Format: tc.format, SampleRate: tc.fs, NoiseDBFS: -20,
				Seed: rng.Uint64(), RealIF: tc.realIF,
				FrontEnd: &synth.FrontEnd{ClockPPM: &clock, Quantization: tc.quant, SpectrumInverted: &inv},
				Captures: []synth.Capture{{Name: "c", DurationS: 0.3, Satellites: recorderSky(rng, []float64{40, 42, 45, 47, 50})}}}
			if tc.realIF != nil {
				s.FrontEnd.SpectrumInverted = nil
			}
			truth, path := writeRecorder(t, s, 0, t.TempDir())
			r, _ := meterFile(t, NewMeter(MeterConfig{Acq: AcqConfig{Pfa: pipelinePfa}}), path)
			if r.Inverted == nil || *r.Inverted != tc.inverted {
				t.Fatalf("orientation %v, want inverted %v (notes %q)", r.Inverted, tc.inverted, r.Notes)
			}
			e := compareSats(r, truth, tc.inverted, 40, tc.lossDB)
			if len(e.missed) > 0 || len(e.falsePRN) > 0 || e.dop > 20 || e.code > 0.05 || e.cn0 > 2 {
				t.Errorf("missed %v, false %v; worst Doppler %.1f Hz, code %.3f chip, C/N0 %.2f dB", e.missed, e.falsePRN, e.dop, e.code, e.cn0)
			}
			t.Logf("inverted %v found; %d of %d satellites; worst Doppler %.2f Hz, code %.4f chip, C/N0 %.2f dB; clock offset %+.1f Hz (truth median %+.1f)",
				*r.Inverted, e.found, e.compared, e.dop, e.code, e.cn0, r.ClockOffsetHz, e.truthMedianHz)
		})
	}
}

// TestIssue14SampleDrop: a recorder that loses 1234 samples at 170 ms
// (synth's sample_drops: the sky continues k samples later, every code
// phase jumps at once, REFERENCES §12.7) or zero-fills 20 ms from 170 ms
// (synth's gaps) is reported as a shared loss of lock (DropSample) no
// earlier than the event and at most 12 ms after it (the lock monitor
// judges the mean of eight 1 ms prompts and allows 3 ms between the
// channels: Tracker.SharedLoss; "no earlier" within one 1 ms prompt),
// with the C/N0 taken from the prompts before it still within 2 dB of the
// truth (TestIssue14ClockOffsetRecorder's bound), and a note naming the
// sample; a 1 ms zero-fill (one prompt of eight) and the same capture
// without a fault report no drop. A 20 ms zero-fill at 90 ms, before the
// ~110 ms tracking needs, leaves the satellites acquired (their values
// from acquisition and the loops), the capture unmeasured for C/N0, and
// a note that says tracking stopped at the gap (not that a 250 ms
// capture is too short).
func TestIssue14SampleDrop(t *testing.T) {
	const fs = 4e6
	rng := rand.New(rand.NewPCG(1404, 1))
	sky := recorderSky(rng, []float64{42, 44, 46, 48, 50})
	for _, tc := range []struct {
		name  string
		fe    synth.FrontEnd
		at    float64 // s, the fault; 0: none
		drop  bool
		early bool // before tracking could finish
	}{
		{"drop 1234 samples", synth.FrontEnd{SampleDrops: []synth.SampleDrop{{AtS: 0.17, Samples: 1234}}}, 0.17, true, false},
		{"zero-fill 20 ms", synth.FrontEnd{Gaps: []synth.Gap{{AtS: 0.17, Samples: int64(0.02 * fs)}}}, 0.17, true, false},
		{"zero-fill 20 ms at 90 ms", synth.FrontEnd{Gaps: []synth.Gap{{AtS: 0.09, Samples: int64(0.02 * fs)}}}, 0.09, true, true},
		{"zero-fill 1 ms", synth.FrontEnd{Gaps: []synth.Gap{{AtS: 0.17, Samples: int64(0.001 * fs)}}}, 0.17, false, false},
		{"no fault", synth.FrontEnd{}, 0, false, false},
	} {
		t.Run(tc.name, func(t *testing.T) {
			fe := tc.fe
			s := &synth.Scenario{Name: "drop", Site: "issue14", Format: "ci16_le", SampleRate: fs, NoiseDBFS: -20,
				Seed: rng.Uint64(), FrontEnd: &fe, Captures: []synth.Capture{{Name: "c", DurationS: 0.25, Satellites: sky}}}
			truth, path := writeRecorder(t, s, 0, t.TempDir())
			r, _ := meterFile(t, NewMeter(MeterConfig{Acq: AcqConfig{Pfa: pipelinePfa}}), path)
			e := compareSats(r, truth, false, 40, 0)
			cn0Tol := 2.0
			if tc.early {
				cn0Tol = 3.5 // acquired values: TestRealRecording12MHzIF's bound for them
			}
			if len(e.missed) > 0 || len(e.falsePRN) > 0 || e.cn0 > cn0Tol {
				t.Errorf("missed %v, false %v, worst C/N0 error %.2f dB", e.missed, e.falsePRN, e.cn0)
			}
			if !tc.drop {
				if r.HasDrop {
					t.Errorf("drop reported at sample %d (%.1f ms)", r.DropSample, float64(r.DropSample)/fs*1e3)
				}
				t.Logf("no drop reported; worst C/N0 error %.2f dB", e.cn0)
				return
			}
			if !r.HasDrop {
				t.Fatalf("no drop reported (notes %q)", r.Notes)
			}
			ms := float64(r.DropSample) / fs * 1e3
			if ms < tc.at*1e3-1 || ms > tc.at*1e3+12 {
				t.Errorf("drop reported at %.1f ms, the recorder's fault at %.0f ms", ms, tc.at*1e3)
			}
			if !slices.ContainsFunc(r.Notes, func(n string) bool {
				return strings.Contains(n, fmt.Sprintf("near sample %d", r.DropSample)) && strings.Contains(n, "sample drop or gap")
			}) {
				t.Errorf("no note naming the sample: %q", r.Notes)
			}
			for _, sat := range r.Satellites {
				if want := map[bool]string{true: MethodAcquired, false: MethodTracked}[tc.early]; sat.Method != want {
					t.Errorf("PRN %d %s, want %s", sat.PRN, sat.Method, want)
				}
			}
			if tc.early {
				if r.Unmeasured == "" || !strings.HasPrefix(r.Unmeasured, "tracking stopped at the sample drop or gap near") ||
					slices.ContainsFunc(r.Notes, func(n string) bool { return strings.Contains(n, "is too short") }) {
					t.Errorf("unmeasured %q, notes %q", r.Unmeasured, r.Notes)
				}
			} else if r.Unmeasured != "" {
				t.Errorf("unmeasured %q", r.Unmeasured)
			}
			t.Logf("drop reported at %.1f ms (fault at %.0f ms); worst C/N0 error %.2f dB, Doppler %.2f Hz, code %.4f chip",
				ms, tc.at*1e3, e.cn0, e.dop, e.code)
		})
	}
}

// recorderEmitter is one class of issue 14's interference bank for
// package synth, at J/N jn.
type recorderEmitter struct {
	class string
	make  func(rng *rand.Rand, fs, jn float64) synth.Emitter
	maxJN float64 // the bank's highest J/N: 40 dB, 30 dB for noise (the Must show)
}

// recorderBank covers every class synth makes (REFERENCES §5, §6): CW and
// several tones, sweeps within the band (sawtooth and triangle, 8–30 µs),
// sweeps far wider than the band (10–40 MHz in about 10 µs, civil
// jammers, REFERENCES §5 from memory), slow sweeps (1 ms), DME-like pulse
// pairs, rectangular pulses, pulses hopping over channels, band-limited
// noise (100 kHz to 1.5 MHz) and wideband noise.
var recorderBank = []recorderEmitter{
	{"cw", func(rng *rand.Rand, fs, jn float64) synth.Emitter {
		return synth.Emitter{Kind: synth.KindCW, JNDB: jn, OffsetHz: (2*rng.Float64() - 1) * 0.3 * fs}
	}, 40},
	{"tones", func(rng *rand.Rand, fs, jn float64) synth.Emitter {
		var tones []synth.Tone
		for range 4 {
			tones = append(tones, synth.Tone{OffsetHz: (2*rng.Float64() - 1) * 0.4 * fs, JNDB: jn - 6})
		}
		return synth.Emitter{Kind: synth.KindCW, Tones: tones}
	}, 40},
	{"sweep", func(rng *rand.Rand, fs, jn float64) synth.Emitter {
		w := (0.3 + 0.5*rng.Float64()) * fs / 2
		shape := []string{"up", "down", "triangle"}[rng.IntN(3)]
		return synth.Emitter{Kind: synth.KindSwept, JNDB: jn, LowHz: -w, HighHz: w, PeriodS: (8 + 22*rng.Float64()) * 1e-6, Shape: shape}
	}, 40},
	{"sweep-wide", func(rng *rand.Rand, fs, jn float64) synth.Emitter {
		// 10–40 MHz wide; the period at least long enough for 12 samples
		// per pass through the band (synth refuses fewer than 8).
		w := (5 + 15*rng.Float64()) * 1e6
		period := max((8+20*rng.Float64())*1e-6, 12*2*w/(fs*fs))
		return synth.Emitter{Kind: synth.KindSwept, JNDB: jn, LowHz: -w, HighHz: w, PeriodS: period, Shape: "up"}
	}, 40},
	{"sweep-slow", func(rng *rand.Rand, fs, jn float64) synth.Emitter {
		w := 0.35 * fs
		return synth.Emitter{Kind: synth.KindSwept, JNDB: jn, LowHz: -w, HighHz: w, PeriodS: 1e-3, Shape: "triangle"}
	}, 40},
	{"dme", func(rng *rand.Rand, fs, jn float64) synth.Emitter {
		return synth.Emitter{Kind: synth.KindPulsed, JNDB: jn, Pulse: "gaussian_pair", PRIS: 1 / (1000 + 2000*rng.Float64()),
			OffsetHz: (2*rng.Float64() - 1) * 0.3 * fs}
	}, 40},
	{"rect", func(rng *rand.Rand, fs, jn float64) synth.Emitter {
		return synth.Emitter{Kind: synth.KindPulsed, JNDB: jn, Pulse: "rect", WidthS: (2 + 18*rng.Float64()) * 1e-6,
			PRIS: (100 + 900*rng.Float64()) * 1e-6, OffsetHz: (2*rng.Float64() - 1) * 0.2 * fs}
	}, 40},
	{"hopping", func(rng *rand.Rand, fs, jn float64) synth.Emitter {
		return synth.Emitter{Kind: synth.KindPulsed, JNDB: jn, Pulse: "rect", WidthS: 10e-6, PRIS: 300e-6,
			ChannelsHz: []float64{-0.3 * fs, -0.1 * fs, 0.1 * fs, 0.3 * fs}}
	}, 40},
	{"band-noise", func(rng *rand.Rand, fs, jn float64) synth.Emitter {
		bw := 100e3 + 1.4e6*rng.Float64()
		return synth.Emitter{Kind: synth.KindNarrowbandNoise, JNDB: jn, BandwidthHz: bw,
			OffsetHz: (2*rng.Float64() - 1) * (0.45*fs - bw/2)}
	}, 30},
	{"wideband", func(rng *rand.Rand, fs, jn float64) synth.Emitter {
		return synth.Emitter{Kind: synth.KindWidebandNoise, FloorRiseDB: 10 * math.Log10(1+math.Pow(10, jn/10))}
	}, 30},
}

// TestIssue14NoFalsePRNRecorderBank: issue 14's "no PRN reported that is
// not in the recording, under any interference in the test bank", on an
// independent bank: captures written by synth with six satellites at
// 38–50 dB-Hz and one emitter of each class of recorderBank at a J/N
// drawn in [10, maxJN] dB (maxJN itself in each class's first capture),
// 0.15 s each, through three recorders: ci16_le at 4 and at 10 MS/s with
// the thermal noise at −50 dBFS (room for a 40 dB jammer below full
// scale), and a 2-bit ci8 front end at 5 MS/s without AGC (its
// quantizer set for the thermal noise, so a strong emitter takes over
// its levels, as in such front ends); half of the captures after a
// clean 30 ms capture of the site (narrow search) and half without (the
// whole clock range). No false PRN may be reported (any is an error).
// When no satellite is reported after a clean capture of the site, or
// when mitigation acted, the notes must say that the satellites are
// lost, not absent. How many of the satellites that the interference
// leaves at 38 dB-Hz or more (C/N0 − 10·log10(1 + J/N) for wideband
// noise, REFERENCES §5, §9) were found is logged per class and front end
// (the J/N limits are TestIssue14JNLimits38's). One capture per class
// (at maxJN, without site history) by default; 12 per class (120) with
// QUIETBAND_LONG=1.
func TestIssue14NoFalsePRNRecorderBank(t *testing.T) {
	perClass := 1
	if issue14Long() {
		perClass = 12
	}
	rng := rand.New(rand.NewPCG(1405, 1))
	type recorder struct {
		name      string
		format    string
		fs, noise float64
		quant     *synth.Quantization
	}
	recorders := []recorder{{"ci16 4 MS/s", "ci16_le", 4e6, -50, nil}, {"2-bit 5 MS/s", "ci8", 5e6, -20, &synth.Quantization{Bits: 2, ThresholdSigma: 1}},
		{"ci16 10 MS/s", "ci16_le", 10e6, -50, nil}}
	totalFalse, captures := 0, 0
	for _, cls := range recorderBank {
		t.Run(cls.class, func(t *testing.T) {
			found, left := map[string]int{}, map[string]int{}
			for k := range perClass {
				rc := recorders[(k+len(cls.class))%len(recorders)]
				jn := 10 + (cls.maxJN-10)*rng.Float64()
				if k == 0 {
					jn = cls.maxJN // the Must show's highest level, always
				}
				em := cls.make(rng, rc.fs, jn)
				sky := recorderSky(rng, []float64{38, 40, 42, 44, 47, 50})
				s := &synth.Scenario{Name: "bank", Site: "issue14", Format: rc.format, SampleRate: rc.fs, NoiseDBFS: rc.noise,
					Seed: rng.Uint64(), Captures: []synth.Capture{
						{Name: "clean", DurationS: 0.03, Satellites: sky},
						{Name: "jammed", DurationS: 0.15, OffsetS: 60, Satellites: sky, Emitters: []synth.Emitter{em}}}}
				if rc.quant != nil {
					s.FrontEnd = &synth.FrontEnd{Quantization: rc.quant}
				}
				dir := t.TempDir()
				m := NewMeter(MeterConfig{Acq: AcqConfig{Pfa: pipelinePfa}})
				history := k%2 == 1
				if history {
					_, clean := writeRecorder(t, s, 0, dir)
					meterFile(t, m, clean)
				}
				truth, path := writeRecorder(t, s, 1, dir)
				r, _ := meterFile(t, m, path)
				captures++
				e := compareSats(r, truth, false, 0, 0)
				if len(e.falsePRN) > 0 {
					totalFalse += len(e.falsePRN)
					t.Errorf("%s at %.1f dB J/N, %s: false PRNs %v (mitigation %+v)", cls.class, jn, rc.name, e.falsePRN, r.Mitigation)
				}
				lostNote := slices.ContainsFunc(r.Notes, func(n string) bool { return strings.Contains(n, "lost, not absent") })
				if len(r.Satellites) == 0 && !lostNote {
					if history || r.Mitigation.Interfered() {
						t.Errorf("%s at %.1f dB, %s: no satellite and no lost note: %q", cls.class, jn, rc.name, r.Notes)
					} else {
						t.Logf("%s at %.1f dB, %s, no site history, nothing mitigated: no satellite, no lost note", cls.class, jn, rc.name)
					}
				}
				cost := 0.0
				if em.Kind == synth.KindWidebandNoise {
					cost = em.FloorRiseDB
				}
				for _, sat := range truth.Satellites {
					if sat.CN0DBHz-cost < 38 {
						continue
					}
					left[rc.name]++
					if slices.ContainsFunc(r.Satellites, func(m Measured) bool { return m.PRN == sat.PRN }) {
						found[rc.name]++
					}
				}
			}
			var by []string
			for _, rc := range recorders {
				if left[rc.name] > 0 {
					by = append(by, fmt.Sprintf("%s %d of %d", rc.name, found[rc.name], left[rc.name]))
				}
			}
			t.Logf("%s: %d captures, J/N 10–%g dB: satellites left at ≥ 38 dB-Hz found: %s", cls.class, perClass, cls.maxJN, strings.Join(by, "; "))
		})
	}
	t.Logf("%d false PRNs in %d interfered captures", totalFalse, captures)
}

// TestIssue14NoiseOnlyRecorders: captures of noise alone through real
// front ends, written by synth and read through ingest: a 2-bit ci8
// front end (levels ±1, ±3) at 4 MS/s; a real-IF 2-bit recorder (ri8 at
// 2 × 6 MS/s, IF fs/4, as the real 12 MS/s recording, converted by
// ingest's half-band); and an 8-bit ci8 front end at 5 MS/s with a
// passband tilt and ripple, a DC offset and I/Q imbalance. With the
// pipeline's Pfa of 10⁻³ per capture the expected number of false PRNs
// over n captures is at most n·10⁻³ (union bound, REFERENCES §4): more
// than 2 in 210 (Poisson 0.1 %), or any in the 15 of the default run,
// fails. 12 ms each (the 10 ms snapshot and a little); 15 captures by
// default (6 with -short or the purego tag), 210 with QUIETBAND_LONG=1.
func TestIssue14NoiseOnlyRecorders(t *testing.T) {
	n := 15
	switch {
	case issue14Long():
		n = 210
	case testing.Short() || puregoBuild:
		n = 6
	}
	rng := rand.New(rand.NewPCG(1406, 1))
	fronts := []struct {
		name   string
		format string
		fs     float64
		fe     *synth.FrontEnd
		realIF *synth.RealIF
	}{
		{"2-bit ci8", "ci8", 4e6, &synth.FrontEnd{Quantization: &synth.Quantization{Bits: 2, ThresholdSigma: 1}}, nil},
		{"2-bit ri8 real IF", "ri8", 6e6, &synth.FrontEnd{Quantization: &synth.Quantization{Bits: 2, ThresholdSigma: 1}},
			&synth.RealIF{IFHz: 3e6, LOSide: "low"}},
		{"8-bit ci8, passband, DC, imbalance", "ci8", 5e6, &synth.FrontEnd{
			Quantization: &synth.Quantization{Bits: 8, SigmaLSB: 12},
			Passband:     &synth.Passband{TiltDB: 2, RippleDB: 0.8, RippleCycles: 3, RolloffDB: 6, RolloffFraction: 0.1},
			DCOffset:     &synth.IQValue{I: 0.01, Q: -0.005},
			IQImbalance:  &synth.IQImbalance{GainError: 0.02, PhaseDeg: 1.5}}, nil},
	}
	falsePRN := 0
	dir := t.TempDir()
	for k := range n {
		f := fronts[k%len(fronts)]
		s := &synth.Scenario{Name: "noise", Site: "issue14", Format: f.format, SampleRate: f.fs, NoiseDBFS: -20,
			Seed: rng.Uint64(), FrontEnd: f.fe, RealIF: f.realIF,
			Captures: []synth.Capture{{Name: fmt.Sprintf("n%03d", k), DurationS: 0.012}}}
		_, path := writeRecorder(t, s, 0, dir)
		r, _ := meterFile(t, NewMeter(MeterConfig{Acq: AcqConfig{Pfa: pipelinePfa}}), path)
		for _, sat := range r.Satellites {
			falsePRN++
			t.Logf("%s: false PRN %+v", f.name, sat)
		}
	}
	t.Logf("%d false PRNs in %d noise-only captures of real front ends (%d each)", falsePRN, n, n/len(fronts))
	if limit := map[bool]int{true: 2, false: 0}[issue14Long()]; falsePRN > limit {
		t.Errorf("%d false PRNs in %d noise-only captures, at most %d allowed", falsePRN, n, limit)
	}
}

// fastSweeps are in-band sawtooth sweeps faster than the bank's 100 µs
// one: the demo's 15 µs chirp over ±1.2 MHz, and 8 µs over ±1.6 MHz
// (civil jammers sweep in about 10 µs, REFERENCES §5, from memory).
var fastSweeps = []interferer{
	{"sweep-inband-15us", func(rng *rand.Rand, x []complex64, fs, s2, jn float64) {
		addSweep(x, fs, s2, -1.2e6, 1.2e6, 15e-6, jn)
	}},
	{"sweep-inband-8us", func(rng *rand.Rand, x []complex64, fs, s2, jn float64) {
		addSweep(x, fs, s2, -1.6e6, 1.6e6, 8e-6, jn)
	}},
}

// ranges38 is, per class of this package's interference bank (with
// fastSweeps), the J/N range (dB) over which satellites of 38 dB-Hz are
// still found at 4 MS/s on 0.25 s captures at least three quarters as
// often as without interference (see TestIssue14JNLimits38), as measured
// with QUIETBAND_LONG=1. Classes not listed lose them at some level of
// 10–40 dB; below 10 dB line interference is tracked on the raw samples
// (an ordinary receiver's effective C/N0, Betz 2001, REFERENCES §7),
// where it costs a 38 dB-Hz satellite its lock (TestIssue14LowJN).
var ranges38 = map[string][2]float64{
	"cw": {10, 40}, "tones": {10, 40}, "dme-pairs": {25, 40}, "rect-10us-5pct": {25, 40},
}

// TestIssue14JNLimits38 measures, per class of the interference bank
// (with fastSweeps), how often satellites of 38 dB-Hz (issue 14's Must
// show) are still found: eight captures of 0.25 s at 4 MS/s (each after
// a clean 30 ms capture of the site, as a monitor has) per level, 0 to
// 40 dB in 5 dB steps, each with three satellites at 38 dB-Hz and two
// at 44 and 50 dB-Hz. The reference is the same run without
// interference: a 10 ms snapshot at the pipeline's false-alarm rate
// (10⁻³ per capture) acquires about four in five satellites of 38 dB-Hz
// (computed for K = 10 blocks of 1 ms: the threshold for 1.25·10⁻¹⁰ per
// cell lies about 1.4 standard deviations below the mean of a 38 dB-Hz
// peak after the mean search losses, REFERENCES §4). Within each class's
// ranges38 every level must find at least three quarters of the
// reference's share; no PRN outside the capture may be reported at any
// level (issue 14: none under interference); the table is logged.
// Wideband noise takes every satellite's C/N0 down by 10·log10(1 + J/N)
// (REFERENCES §5, §9): it leaves a 50 dB-Hz satellite at ≥ 38 dB-Hz up
// to J/N 11.7 dB; at J/N 5 and 10 dB, the satellites it leaves at
// ≥ 38 dB-Hz must be found as often (three quarters of the reference).
// With QUIETBAND_LONG=1 only (about six minutes on two cores).
func TestIssue14JNLimits38(t *testing.T) {
	if !issue14Long() {
		t.Skip("long: QUIETBAND_LONG=1")
	}
	const fs, perLevel, dur = 4e6, 8, 0.25
	levels := []float64{0, 5, 10, 15, 20, 25, 30, 35, 40}
	run := func(in interferer, jn float64, sky []float64, seed uint64) (found, n int) {
		rng := rand.New(rand.NewPCG(1407, seed))
		for range perLevel {
			sats := skyWithClock(rng, sky, 0)
			m := NewMeter(MeterConfig{Acq: AcqConfig{Pfa: pipelinePfa}})
			clean := synthesize(rng, fs, gpsca.L1, 1, int(0.03*fs), sats)
			measure(t, m, fs, clean.x, 65536)
			c := synthesize(rng, fs, gpsca.L1, 1, int(dur*fs), sats)
			if in.add != nil {
				in.add(rng, c.x, fs, 1, jn)
			}
			r := measure(t, m, fs, c.x, 65536)
			for _, s := range sats {
				left := s.cn0
				if in.name == "wideband" {
					left -= 10 * math.Log10(1+math.Pow(10, jn/10))
				}
				if left >= 38 && (in.name == "wideband" || s.cn0 == 38) {
					n++
					if slices.ContainsFunc(r.Satellites, func(m Measured) bool { return m.PRN == s.prn }) {
						found++
					}
				}
			}
			for _, m := range r.Satellites {
				if !slices.ContainsFunc(sats, func(s satSpec) bool { return s.prn == m.PRN }) {
					t.Errorf("%s at %g dB: false PRN %+v", in.name, jn, m)
				}
			}
		}
		return
	}
	sky := []float64{38, 38, 38, 44, 50}
	f0, n0 := run(interferer{name: "none"}, 0, sky, 0)
	ref := float64(f0) / float64(n0)
	bar := 0.75 * ref
	var table strings.Builder
	fmt.Fprintf(&table, "no interference: %d of %d satellites of 38 dB-Hz found (%.0f %%); bar %.0f %%\n", f0, n0, 100*ref, 100*bar)
	for _, in := range append(slices.Clone(bank), fastSweeps...) {
		if in.name == "wideband" {
			for _, jn := range []float64{5, 10} {
				f, n := run(in, jn, []float64{44, 46, 48, 50, 50}, uint64(jn))
				fmt.Fprintf(&table, "%-20s %2.0f dB: %d of %d left at ≥ 38 dB-Hz found\n", "wideband", jn, f, n)
				if n == 0 || float64(f) < bar*float64(n) {
					t.Errorf("wideband noise at %g dB: found %d of the %d satellites it leaves at ≥ 38 dB-Hz", jn, f, n)
				}
			}
			continue
		}
		rg, stated := ranges38[in.name]
		var row []string
		for _, jn := range levels {
			f, n := run(in, jn, sky, uint64(jn)+uint64(len(in.name))<<8)
			mark := ""
			if float64(f) >= bar*float64(n) {
				mark = "+"
			}
			row = append(row, fmt.Sprintf("%g:%d/%d%s", jn, f, n, mark))
			if stated && jn >= rg[0] && jn <= rg[1] && float64(f) < bar*float64(n) {
				t.Errorf("%s at %g dB: %d of %d satellites of 38 dB-Hz found, below %.0f %% within the stated %g–%g dB", in.name, jn, f, n, 100*bar, rg[0], rg[1])
			}
		}
		fmt.Fprintf(&table, "%-20s %s\n", in.name, strings.Join(row, " "))
	}
	t.Logf("satellites of 38 dB-Hz found per J/N (+: at least three quarters as often as without interference):\n%s", table.String())
}

// TestIssue14LowJN runs the interference bank (with fastSweeps) below the
// 10 dB where TestInterferenceBank starts, at J/N −6, −3, 0, 2, 4, 6 and
// 8 dB (at −6 dB the in-band 100 µs sweep is too weak for mitigation to
// see and strong enough to correlate with the C/A codes into peaks at
// whole-kHz Dopplers, see standingChannels):
// eight captures of 0.25 s at 4 MS/s per level, each after a clean 30 ms
// capture of the site, with satellites at 38, 38, 42, 46 and 50 dB-Hz.
// Issue 14's Must show allows no PRN outside the capture under any
// interference of the bank; a weak interferer, below what mitigation
// removes, must not make one either. It logs, per class and level, how
// many satellites of 40 dB-Hz and more and of 38 dB-Hz were found. With
// QUIETBAND_LONG=1 only.
func TestIssue14LowJN(t *testing.T) {
	if !issue14Long() {
		t.Skip("long: QUIETBAND_LONG=1")
	}
	const fs, perLevel, dur = 4e6, 8, 0.25
	var table strings.Builder
	falsePRN := 0
	for _, in := range append(slices.Clone(bank), fastSweeps...) {
		var row []string
		for _, jn := range []float64{-6, -3, 0, 2, 4, 6, 8} {
			rng := rand.New(rand.NewPCG(1408, uint64(jn+10)+uint64(len(in.name))<<8))
			f40, n40, f38, n38, fp := 0, 0, 0, 0, 0
			for range perLevel {
				sats := skyWithClock(rng, []float64{38, 38, 42, 46, 50}, 0)
				m := NewMeter(MeterConfig{Acq: AcqConfig{Pfa: pipelinePfa}})
				clean := synthesize(rng, fs, gpsca.L1, 1, int(0.03*fs), sats)
				measure(t, m, fs, clean.x, 65536)
				c := synthesize(rng, fs, gpsca.L1, 1, int(dur*fs), sats)
				in.add(rng, c.x, fs, 1, jn)
				r := measure(t, m, fs, c.x, 65536)
				for _, s := range sats {
					hit := slices.ContainsFunc(r.Satellites, func(m Measured) bool { return m.PRN == s.prn })
					if s.cn0 >= 40 {
						n40++
						if hit {
							f40++
						}
					} else {
						n38++
						if hit {
							f38++
						}
					}
				}
				for _, m := range r.Satellites {
					if !slices.ContainsFunc(sats, func(s satSpec) bool { return s.prn == m.PRN }) {
						fp++
						t.Errorf("%s at %g dB: false PRN %+v (mitigation %+v)", in.name, jn, m, r.Mitigation)
					}
				}
			}
			falsePRN += fp
			row = append(row, fmt.Sprintf("%g:%d/%d,%d/%d,%d", jn, f40, n40, f38, n38, fp))
		}
		fmt.Fprintf(&table, "%-20s %s\n", in.name, strings.Join(row, "  "))
	}
	t.Logf("J/N: found ≥ 40 dB-Hz, found 38 dB-Hz, false PRNs (eight captures per level):\n%s%d false PRNs in all", table.String(), falsePRN)
}
