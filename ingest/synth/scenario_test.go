package synth

import (
	"bytes"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"

	"quietband/ingest"
)

// everyKind is a short scenario with a satellite and one emitter of every
// kind, all inside the band.
func everyKind(seed uint64) Scenario {
	return Scenario{Name: "every-kind", Site: "bench", Format: "ci16_le", SampleRate: 4e6, NoiseDBFS: -30,
		Start: testStart, Seed: seed, Captures: []Capture{
			{Name: "a", DurationS: 0.02, Satellites: []Satellite{{PRN: 12, CN0DBHz: 44, DopplerHz: -900, CodePhaseChips: 3.5}},
				Emitters: []Emitter{
					{Kind: KindCW, OffsetHz: 1e5, JNDB: 3},
					{Kind: KindSwept, JNDB: 6, LowHz: -1e6, HighHz: 1e6, PeriodS: 1e-5, StartS: 0.005},
					{Kind: KindPulsed, JNDB: 10, PRIS: 4e-4, OffsetHz: -3e5},
					{Kind: KindPulsed, Pulse: "rect", JNDB: 10, WidthS: 1e-5, PRIS: 1e-3},
					{Kind: KindWidebandNoise, FloorRiseDB: 1, EndS: 0.015},
					{Kind: KindNarrowbandNoise, JNDB: 0, OffsetHz: 6e5, BandwidthHz: 1e5},
				}},
			{Name: "b", OffsetS: 60, DurationS: 0.01, AttenuationDB: 4,
				Satellites: []Satellite{{PRN: 12, CN0DBHz: 44, DopplerHz: -900, CodePhaseChips: 3.5}}},
		}}
}

// dirFiles reads every file of dir, by name.
func dirFiles(t *testing.T, dir string) map[string][]byte {
	t.Helper()
	ents, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	out := map[string][]byte{}
	for _, e := range ents {
		b, err := os.ReadFile(filepath.Join(dir, e.Name()))
		if err != nil {
			t.Fatal(err)
		}
		out[e.Name()] = b
	}
	return out
}

// TestDeterminism: one scenario and seed give byte-identical files (data,
// SigMF metadata and truth) however often it is written; another seed gives
// other samples.
func TestDeterminism(t *testing.T) {
	t.Parallel()
	d1, t1 := writeScenario(t, everyKind(9))
	d2, t2 := writeScenario(t, everyKind(9))
	d3, _ := writeScenario(t, everyKind(10))
	if !reflect.DeepEqual(t1, t2) {
		t.Errorf("truths differ between two runs with the same seed")
	}
	f1, f2, f3 := dirFiles(t, d1), dirFiles(t, d2), dirFiles(t, d3)
	want := []string{"a.sigmf-data", "a.sigmf-meta", "a" + TruthExt, "b.sigmf-data", "b.sigmf-meta", "b" + TruthExt}
	if len(f1) != len(want) {
		names := make([]string, 0, len(f1))
		for k := range f1 {
			names = append(names, k)
		}
		t.Errorf("files written: %v, want %v", names, want)
	}
	for _, name := range want {
		if _, ok := f1[name]; !ok {
			t.Errorf("%s not written", name)
			continue
		}
		if !bytes.Equal(f1[name], f2[name]) {
			t.Errorf("%s differs between two runs with seed 9", name)
		}
		if strings.HasSuffix(name, ingest.DataExt) {
			if len(f3[name]) != len(f1[name]) {
				t.Errorf("%s: seed 10 wrote %d bytes, seed 9 %d", name, len(f3[name]), len(f1[name]))
			}
			if bytes.Equal(f1[name], f3[name]) {
				t.Errorf("%s is the same for seeds 9 and 10", name)
			}
		}
	}
	// The sidecar on disk is the truth Write returned.
	for _, tr := range t1 {
		var got Truth
		name := strings.TrimSuffix(tr.Capture, ingest.MetaExt) + TruthExt
		if err := json.Unmarshal(f1[name], &got); err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		if !reflect.DeepEqual(got, tr) {
			t.Errorf("%s on disk:\n%+v\nreturned:\n%+v", name, got, tr)
		}
	}
	// What the SigMF metadata says agrees with the truth.
	for _, tr := range t1 {
		c, err := ingest.Open(filepath.Join(d1, tr.Capture), ingest.RawSettings{})
		if err != nil {
			t.Fatal(err)
		}
		fc, ok := c.CenterHz()
		if c.Format.String() != tr.Format || c.SampleRate != tr.SampleRate || !ok || fc != tr.CenterHz ||
			!c.Start().Equal(tr.Start) || c.Samples != tr.Samples {
			t.Errorf("%s: metadata %s %g Hz centre %g (%v) start %v, %d samples; truth %s %g centre %g start %v, %d samples",
				tr.Capture, c.Format, c.SampleRate, fc, ok, c.Start(), c.Samples, tr.Format, tr.SampleRate, tr.CenterHz, tr.Start, tr.Samples)
		}
	}
	if got, want := t1[1].Start, testStart.Add(60*time.Second); !got.Equal(want) {
		t.Errorf("second capture starts %v, want scenario start + offset_s = %v", got, want)
	}
	if got, want := t1[1].Satellites[0].CN0DBHz, 40.0; got != want {
		t.Errorf("attenuated truth C/N0 %g, want %g", got, want)
	}
}

// TestRaw: raw: true writes bare sample files named by format, with the
// samples a SigMF run of the same seed writes, and a modification time at
// the end of the capture, so that a reader taking start = mtime − duration
// (the ingest convention for raw files) recovers the truth's start.
func TestRaw(t *testing.T) {
	t.Parallel()
	for _, tc := range []struct{ format, ext string }{{"ci16_le", ".ci16"}, {"cf32_le", ".cf32"}, {"ci8", ".ci8"}} {
		t.Run(tc.format, func(t *testing.T) {
			t.Parallel()
			s := everyKind(4)
			s.Format = tc.format
			sigmfDir, _ := writeScenario(t, s)
			s.Raw = true
			dir, truths := writeScenario(t, s)
			for _, tr := range truths {
				if ext := filepath.Ext(tr.Capture); ext != tc.ext {
					t.Errorf("raw %s capture %q, want extension %s", tc.format, tr.Capture, tc.ext)
				}
				path := filepath.Join(dir, tr.Capture)
				st, err := os.Stat(path)
				if err != nil {
					t.Fatal(err)
				}
				end := tr.Start.Add(time.Duration(float64(tr.Samples) / tr.SampleRate * float64(time.Second)))
				if d := st.ModTime().Sub(end); d < -time.Millisecond || d > time.Millisecond {
					t.Errorf("%s: mtime %v, want start + duration = %v", tr.Capture, st.ModTime().UTC(), end)
				}
				c, err := ingest.Open(path, ingest.RawSettings{SampleRate: tr.SampleRate})
				if err != nil {
					t.Fatal(err)
				}
				if d := c.Start().Sub(tr.Start); d < -time.Millisecond || d > time.Millisecond {
					t.Errorf("%s: reader start %v, truth %v", tr.Capture, c.Start(), tr.Start)
				}
				raw, _ := os.ReadFile(path)
				base := strings.TrimSuffix(tr.Capture, tc.ext)
				sig, _ := os.ReadFile(filepath.Join(sigmfDir, base+ingest.DataExt))
				if !bytes.Equal(raw, sig) || len(raw) == 0 {
					t.Errorf("%s: raw samples differ from the SigMF data of the same seed", tr.Capture)
				}
				if _, err := os.Stat(filepath.Join(dir, base+ingest.MetaExt)); err == nil {
					t.Errorf("raw run wrote SigMF metadata for %s", base)
				}
				if _, err := os.Stat(filepath.Join(dir, base+TruthExt)); err != nil {
					t.Errorf("raw run wrote no truth for %s: %v", base, err)
				}
			}
		})
	}
}

const yamlAllKinds = `
name: yaml-test
description: every emitter kind
site: test-bench
format: cf32_le
sample_rate: 2.0e6
center_hz: 1575.42e6
noise_dbfs: -35
seed: 42
start: 2026-01-02T03:04:05Z
captures:
  - name: all-kinds
    duration_s: 0.01
    attenuation_db: 2
    satellites:
      - {prn: 5, cn0_dbhz: 45, doppler_hz: -1200, code_phase_chips: 17.5}
    emitters:
      - {kind: cw, tones: [{offset_hz: 1.0e5, jn_db: 3}, {offset_hz: -2.0e5, jn_db: 0}]}
      - {kind: cw, label: spur, offset_hz: 3.0e5, jn_db: -2}
      - {kind: swept, jn_db: 10, low_hz: -5.0e5, high_hz: 5.0e5, period_s: 2.0e-5, shape: triangle, start_s: 0.002, end_s: 0.008}
      - {kind: pulsed, jn_db: 15, pri_s: 4.0e-4, offset_hz: 1.0e5}
      - {kind: pulsed, pulse: rect, width_s: 1.0e-5, pri_s: 1.0e-3, jn_db: 12}
      - {kind: wideband_noise, floor_rise_db: 3}
      - {kind: narrowband_noise, jn_db: 0, offset_hz: 4.0e5, bandwidth_hz: 1.0e5}
  - duration_s: 0.005
`

// TestParseScenario: a YAML scenario with every emitter kind parses, gets
// its defaults, and writes.
func TestParseScenario(t *testing.T) {
	t.Parallel()
	s, err := ParseScenario(strings.NewReader(yamlAllKinds), "all.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if s.Name != "yaml-test" || s.Site != "test-bench" || s.Format != "cf32_le" || s.SampleRate != 2e6 ||
		s.NoiseDBFS != -35 || s.Seed != 42 || !s.Start.Equal(time.Date(2026, 1, 2, 3, 4, 5, 0, time.UTC)) {
		t.Errorf("scenario header %+v", s)
	}
	if len(s.Captures) != 2 || s.Captures[1].Name != "yaml-test-002" {
		t.Fatalf("captures %+v (the unnamed one should be yaml-test-002)", s.Captures)
	}
	c := s.Captures[0]
	if c.DurationS != 0.01 || c.AttenuationDB != 2 || len(c.Satellites) != 1 || c.Satellites[0] != (Satellite{PRN: 5, CN0DBHz: 45, DopplerHz: -1200, CodePhaseChips: 17.5}) {
		t.Errorf("capture %+v", c)
	}
	em := c.Emitters
	if len(em) != 7 {
		t.Fatalf("%d emitters, want 7", len(em))
	}
	if len(em[0].Tones) != 2 || em[0].Tones[1] != (Tone{OffsetHz: -2e5, JNDB: 0}) {
		t.Errorf("cw tones %+v", em[0].Tones)
	}
	if len(em[1].Tones) != 1 || em[1].Tones[0] != (Tone{OffsetHz: 3e5, JNDB: -2}) || em[1].Label != "spur" {
		t.Errorf("cw offset_hz/jn_db should become one tone: %+v", em[1])
	}
	if em[2].Shape != "triangle" || em[2].StartS != 0.002 || em[2].EndS != 0.008 {
		t.Errorf("swept %+v", em[2])
	}
	// Defaults: the DME-like pair, 12 µs apart (ICAO Annex 10, X channel),
	// 3.51 µs wide at half amplitude (REFERENCES §6 [C]).
	if em[3].Pulse != "gaussian_pair" || em[3].PairSpacingS != 12e-6 || math.Abs(em[3].WidthS-3.51e-6) > 0.005e-6 {
		t.Errorf("pulsed defaults %+v", em[3])
	}
	if em[4].Pulse != "rect" || em[4].WidthS != 1e-5 {
		t.Errorf("rect %+v", em[4])
	}
	// 3 dB rise is J/N = 10·log10(10^0.3 − 1) = −0.0207 dB (REFERENCES §9).
	if math.Abs(em[5].JNDB-(-0.0207)) > 1e-3 || em[5].EndS != 0.01 {
		t.Errorf("wideband %+v", em[5])
	}
	if em[6].BandwidthHz != 1e5 || em[6].OffsetHz != 4e5 {
		t.Errorf("narrowband %+v", em[6])
	}
	truths, err := Write(s, t.TempDir())
	if err != nil {
		t.Fatal(err)
	}
	if truths[0].Samples != 20000 || truths[1].Samples != 10000 || len(truths[0].Emitters) != 7 {
		t.Errorf("truths %+v", truths)
	}
	if got, want := truths[0].Satellites[0].CN0DBHz, 43.0; got != want {
		t.Errorf("C/N0 after attenuation %g, want %g", got, want)
	}
}

// TestParseScenarioErrors: unknown keys and bad values are rejected with a
// message that names the file, the key or value, and what is wrong.
func TestParseScenarioErrors(t *testing.T) {
	t.Parallel()
	const head = "sample_rate: 4.0e6\ncaptures:\n  - name: c1\n    duration_s: 0.1\n"
	cases := []struct {
		name, yaml string
		want       []string
	}{
		{"unknown top-level key", "sample_rat: 4.0e6\ncaptures: [{name: c1}]\n", []string{"bad.yaml", "sample_rat"}},
		{"unknown emitter key", head + "    emitters: [{kind: narrowband_noise, jn_db: 3, bandwith_hz: 1.0e5}]\n", []string{"bad.yaml", "bandwith_hz"}},
		{"unknown satellite key", head + "    satellites: [{prn: 3, cno_dbhz: 40}]\n", []string{"cno_dbhz"}},
		{"shape sideways", head + "    emitters: [{kind: swept, jn_db: 3, low_hz: -1.0e5, high_hz: 1.0e5, period_s: 1.0e-4, shape: sideways}]\n",
			[]string{"bad.yaml", "c1", "emitters[0]", `"sideways"`, "up, down or triangle"}},
		{"tone beyond fs/2", head + "    emitters: [{kind: cw, offset_hz: 2.5e6, jn_db: 0}]\n", []string{"c1", "2.5e+06", "outside ±fs/2"}},
		{"one of several tones beyond fs/2", head + "    emitters: [{kind: cw, tones: [{offset_hz: 0, jn_db: 0}, {offset_hz: -2.0e6, jn_db: 0}]}]\n",
			[]string{"-2e+06", "outside ±fs/2"}},
		{"start after end", head + "    emitters: [{kind: cw, offset_hz: 1000, jn_db: 0, start_s: 0.06, end_s: 0.05}]\n", []string{"c1", "start_s 0.06", "end_s 0.05"}},
		{"start at end", head + "    emitters: [{kind: cw, offset_hz: 1000, jn_db: 0, start_s: 0.05, end_s: 0.05}]\n", []string{"start_s 0.05", "start < end"}},
		{"end beyond the capture", head + "    emitters: [{kind: cw, offset_hz: 1000, jn_db: 0, end_s: 0.2}]\n", []string{"end_s 0.2", "0.1"}},
		{"prn 40", head + "    satellites: [{prn: 40, cn0_dbhz: 40}]\n", []string{"c1", "satellites[0]", "prn 40", "1..32"}},
		{"tone J/N out of range", head + "    emitters: [{kind: cw, tones: [{offset_hz: 1000, jn_db: 90}]}]\n", []string{"jn_db 90", "out of range"}},
		// Not-a-number and infinite values: each would write NaN samples or
		// index the C/A code out of range.
		{"noise NaN", "noise_dbfs: .nan\n" + head, []string{"noise_dbfs NaN"}},
		{"Doppler NaN", head + "    satellites: [{prn: 3, cn0_dbhz: 40, doppler_hz: .nan}]\n", []string{"satellites[0]", "finite"}},
		{"code phase infinite", head + "    satellites: [{prn: 3, cn0_dbhz: 40, code_phase_chips: .inf}]\n", []string{"satellites[0]", "finite"}},
		{"emitter start NaN", head + "    emitters: [{kind: wideband_noise, floor_rise_db: 3, start_s: .nan}]\n", []string{"emitters[0]", "finite"}},
		{"tone offset NaN", head + "    emitters: [{kind: cw, tones: [{offset_hz: .nan, jn_db: 0}]}]\n", []string{"emitters[0]", "offset_hz NaN", "finite"}},
		{"attenuation infinite", head + "    attenuation_db: -.inf\n", []string{"attenuation_db", "finite"}},
		{"satellite outside the band", "center_hz: 1176.45e6\n" + head + "    satellites: [{prn: 3, cn0_dbhz: 40}]\n",
			[]string{"satellites[0]", "outside ±fs/2"}},
		{"narrow band beyond fs/2", head + "    emitters: [{kind: narrowband_noise, jn_db: 0, offset_hz: 1.95e6, bandwidth_hz: 2.0e5}]\n", []string{"within ±fs/2"}},
		{"no captures", "name: empty\n", []string{"no captures"}},
		// Keyed, wide-swept and hopping emitters, Doppler rates, skies.
		{"on intervals overlap", head + "    emitters: [{kind: cw, offset_hz: 1000, jn_db: 0, on: [[0.01, 0.05], [0.04, 0.06]]}]\n",
			[]string{"c1", "emitters[0]", "on[1] starts at 0.04 s", "not overlap"}},
		{"on interval of three values", head + "    emitters: [{kind: cw, offset_hz: 1000, jn_db: 0, on: [[0.01, 0.05, 0.07]]}]\n",
			[]string{"on[0] must be [start_s, end_s]"}},
		{"on beyond the capture", head + "    emitters: [{kind: cw, offset_hz: 1000, jn_db: 0, on: [[0.05, 0.2]]}]\n", []string{"on[0] [0.05, 0.2]", "≤ 0.1"}},
		{"on and end_s disagree", head + "    emitters: [{kind: cw, offset_hz: 1000, jn_db: 0, end_s: 0.08, on: [[0.01, 0.05]]}]\n",
			[]string{"end_s 0.08", "disagree with the on intervals"}},
		{"sweep all outside the band", head + "    emitters: [{kind: swept, jn_db: 3, low_hz: 3.0e6, high_hz: 9.0e6, period_s: 1.0e-4}]\n",
			[]string{"emitters[0] (swept)", "entirely outside ±fs/2"}},
		{"sweep crossing too fast", head + "    emitters: [{kind: swept, jn_db: 3, low_hz: -4.0e7, high_hz: 4.0e7, period_s: 1.0e-5}]\n",
			[]string{"crosses the ±2e+06 Hz band in", "at least 8"}},
		{"sweep beyond 100 MHz", head + "    emitters: [{kind: swept, jn_db: 3, low_hz: -2.0e8, high_hz: 1.0e6, period_s: 1.0e-3}]\n",
			[]string{"low_hz -2e+08", "±1e+08"}},
		{"hopping with an offset", head + "    emitters: [{kind: pulsed, jn_db: 10, pri_s: 1.0e-3, offset_hz: 5000, channels_hz: [0, 1.0e6]}]\n",
			[]string{"offset_hz 5000 and channels_hz both"}},
		{"hop channel outside the band", head + "    emitters: [{kind: pulsed, jn_db: 10, pri_s: 1.0e-3, channels_hz: [0, 3.0e6]}]\n",
			[]string{"channels_hz[1] 3e+06", "outside ±fs/2"}},
		{"channels on a CW", head + "    emitters: [{kind: cw, offset_hz: 0, jn_db: 0, channels_hz: [0]}]\n", []string{"channels_hz is for pulsed emitters"}},
		{"Doppler rate 20 Hz/s", head + "    satellites: [{prn: 3, cn0_dbhz: 40, doppler_rate_hz_s: 20}]\n", []string{"satellites[0]", "doppler_rate_hz_s 20"}},
		{"rate drives the carrier out", "sample_rate: 4.0e3\ncaptures: [{name: c1, duration_s: 2000, satellites: [{prn: 3, cn0_dbhz: 40, doppler_hz: 1000, doppler_rate_hz_s: 1}]}]\n",
			[]string{"satellites[0]", "2000 s into the capture", "outside ±fs/2"}},
		{"sky and random sky", "sky: [{prn: 3, cn0_dbhz: 40}]\nrandom_sky: {satellites: 8, seed: 1}\n" + head, []string{"sky or random_sky, not both"}},
		{"random sky of 40", "random_sky: {satellites: 40, seed: 1}\n" + head, []string{"random_sky.satellites 40", "1..32"}},
		{"sky satellite bad", "sky: [{prn: 33, cn0_dbhz: 40}]\n" + head, []string{"sky[0]", "prn 33"}},
		{"bad format", "format: ci12\n" + head, []string{"format", "ci12"}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			_, err := ParseScenario(strings.NewReader(tc.yaml), "bad.yaml")
			if err == nil {
				t.Fatalf("accepted:\n%s", tc.yaml)
			}
			t.Log(err)
			for _, w := range tc.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q does not mention %q", err, w)
				}
			}
		})
	}
}

// builtinFrontEndCheck checks what a built-in capture's front end makes
// of the samples and reports whether its mean power can be predicted from
// the truth: not for quantized captures (checked here: only the levels
// the quantizer has), nor for dead or stuck ones (checked here against
// their definition).
func builtinFrontEndCheck(t *testing.T, tr Truth, x []complex64) bool {
	t.Helper()
	fe := tr.FrontEnd
	if fe == nil {
		return true
	}
	for _, f := range tr.Faults {
		switch f.Kind {
		case FaultDead:
			for _, v := range x {
				if v != 0 {
					t.Fatalf("%s: dead capture holds %v", tr.Capture, v)
				}
			}
			return false
		case FaultStuck:
			for _, v := range x {
				if v != x[0] || v == 0 {
					t.Fatalf("%s: stuck capture holds %v and %v", tr.Capture, x[0], v)
				}
			}
			return false
		}
	}
	if q := fe.Quantizer; q != nil {
		if q.Levels != nil {
			allowed := map[float64]bool{}
			for _, l := range q.Levels {
				allowed[float64(l)] = true
			}
			for _, v := range x[:1000] {
				if c := float64(real(v)) * 128; tr.Format == "ci8" && !allowed[c] {
					t.Fatalf("%s: code %g outside the levels %v", tr.Capture, c, q.Levels)
				}
			}
		}
		return false
	}
	return true
}

// TestBuiltins: every built-in scenario normalizes and writes. The
// captures are cut to 0.02 s (ScaleDuration scales the times within them)
// to stay fast.
func TestBuiltins(t *testing.T) {
	t.Parallel()
	names := BuiltinNames()
	if len(names) == 0 {
		t.Fatal("no built-in scenarios")
	}
	if _, err := Builtin("no-such-scenario"); err == nil || !strings.Contains(err.Error(), "demo") {
		t.Errorf("unknown built-in: error %v should list the known ones", err)
	}
	for _, name := range names {
		t.Run(name, func(t *testing.T) {
			t.Parallel()
			s, err := Builtin(name)
			if err != nil {
				t.Fatal(err)
			}
			const dur = 0.02
			s.ScaleDuration(dur)
			dir, truths := writeScenario(t, s)
			for i, tr := range truths {
				if tr.Samples != int64(math.Round(dur*s.SampleRate)) {
					t.Errorf("%s: %d samples", tr.Capture, tr.Samples)
				}
				if tr.Clipped != 0 && (tr.FrontEnd == nil || tr.FrontEnd.Quantizer == nil || tr.FrontEnd.Quantizer.Bits < 8) {
					t.Errorf("%s: %d samples clipped", tr.Capture, tr.Clipped)
				}
				if len(tr.Satellites) != len(s.Captures[i].Satellites) || len(tr.Emitters) != len(s.Captures[i].Emitters) {
					t.Errorf("%s: truth has %d satellites and %d emitters, scenario %d and %d", tr.Capture,
						len(tr.Satellites), len(tr.Emitters), len(s.Captures[i].Satellites), len(s.Captures[i].Emitters))
				}
				x := readCapture(t, dir, tr)
				if !builtinFrontEndCheck(t, tr, x) {
					continue
				}
				// The floor plus what the truth says is there: every
				// satellite adds C = C/N0·σ²/fs, emitters their J (time
				// averaged). 0.2 dB: 8·10⁴ samples give 0.015 dB for the
				// floor, the 200 kHz band (B·T = 4000) ~0.05 dB, and a pulse
				// pair more or less in 0.02 s ~0.03 dB; a silent, doubled
				// or misplaced source is far outside. With a front end, the
				// floor is the truth's noise after it and every emitter's
				// J/N its apparent one (passband, anti-alias), spurs at
				// their J/N; the gain and I/Q imbalance scale all alike.
				sigma2 := undb(tr.NoiseDBFS)
				floor := sigma2
				if tr.FrontEnd != nil {
					floor = undb(*tr.FrontEnd.NoiseDBFS)
				}
				want := floor
				for _, sat := range tr.Satellites {
					want += undb(sat.CN0DBHz) * sigma2 / tr.SampleRate * floor / sigma2
				}
				for _, sp := range tr.FrontEndSpurs {
					want += undb(sp.JNDB) * floor
				}
				if fe := tr.FrontEnd; fe != nil && fe.DCOffset != nil {
					want += fe.DCOffset.I*fe.DCOffset.I + fe.DCOffset.Q*fe.DCOffset.Q
				}
				for _, e := range tr.Emitters {
					frac := float64(e.EndSample-e.StartSample) / float64(tr.Samples)
					if len(e.Intervals) > 0 {
						frac = 0
						for _, iv := range e.Intervals {
							frac += float64(iv.EndSample-iv.StartSample) / float64(tr.Samples)
						}
					}
					jn := e.JNDB
					if e.ApparentJNDB != nil {
						jn = *e.ApparentJNDB
					}
					switch e.Kind {
					case KindCW:
						for _, tone := range e.Tones {
							tj := tone.JNDB
							if tone.ApparentJNDB != nil {
								tj = *tone.ApparentJNDB
							}
							want += frac * undb(tj) * floor
						}
					case KindPulsed:
						// A Gaussian pair carries 2·√(π/α) seconds of peak
						// power; a rect pulse width_s.
						on := e.WidthS
						if e.Pulse == "gaussian_pair" {
							on = 2 * math.Sqrt(math.Pi/DMEAlpha)
						}
						want += frac * on / e.PRIS * undb(jn) * floor
					default:
						want += frac * undb(jn) * floor
					}
				}
				// Spoofers' signals and a meacon's re-radiated noise
				// while on, multipath copies throughout.
				for _, sp := range tr.Spoofers {
					frac := float64(sp.EndSample-sp.StartSample) / float64(tr.Samples)
					for _, sig := range sp.Signals {
						want += frac * undb(sig.CN0DBHz) * sigma2 / tr.SampleRate * floor / sigma2
					}
					if sp.NoiseRiseDB > 0 {
						want += frac * (undb(sp.NoiseRiseDB) - 1) * floor
					}
				}
				for _, mp := range tr.Multipath {
					for _, sat := range tr.Satellites {
						if sat.PRN == mp.PRN {
							want += undb(sat.CN0DBHz-mp.WeakerDB) * sigma2 / tr.SampleRate * floor / sigma2
						}
					}
				}
				for _, f := range tr.Faults {
					switch f.Kind {
					case FaultGap:
						want *= 1 - float64(f.Samples)/float64(tr.Samples)
					case FaultUnnormalised:
						want *= *tr.FrontEnd.UnnormalisedScale * *tr.FrontEnd.UnnormalisedScale
					}
				}
				got := meanPower(x)
				t.Logf("%s: mean power %.3f dB re the truth's sum", tr.Capture, db(got/want))
				if math.Abs(db(got/want)) > 0.2 {
					t.Errorf("%s: mean power %.4g, truth implies %.4g (%.2f dB off)", tr.Capture, got, want, db(got/want))
				}
			}
		})
	}
}

// TestExampleYAML: the example scenario in testdata parses, and writes
// (cut to 0.05 s) with what it asks for in the truth: 12 drawn
// satellites in every capture, the front end with its spur, the keyed
// intervals, the wide sweep's in-band part, the hop channels, the 2-bit
// quantizer and the drop and gap of the last capture.
func TestExampleYAML(t *testing.T) {
	t.Parallel()
	s, err := LoadScenario("testdata/example-site.yaml")
	if err != nil {
		t.Fatal(err)
	}
	s.ScaleDuration(0.05)
	truths, err := Write(s, t.TempDir())
	if err != nil {
		t.Fatal(err)
	}
	for _, tr := range truths {
		if len(tr.Satellites) != 12 || tr.FrontEnd == nil || len(tr.FrontEndSpurs) != 1 || tr.FrontEnd.ClockShiftL1Hz == nil {
			t.Errorf("%s: %d satellites, front end %v, spurs %v", tr.Capture, len(tr.Satellites), tr.FrontEnd != nil, tr.FrontEndSpurs)
		}
	}
	sweep, keyed := truths[1].Emitters[0], truths[1].Emitters[1]
	if len(sweep.Intervals) != 3 || len(keyed.Intervals) != 2 || *sweep.InBandLowHz != -2e6 || *sweep.InBandHighHz != 2e6 {
		t.Errorf("capture 2: sweep %+v, keyed tone %+v", sweep, keyed)
	}
	if hop := truths[2].Emitters[0]; len(hop.ApparentChannelsHz) != 3 {
		t.Errorf("capture 3: hopping link %+v", hop)
	}
	last := truths[3]
	if last.FrontEnd.Quantizer == nil || last.FrontEnd.Quantizer.Bits != 2 || len(last.Faults) != 2 || math.Abs(last.FrontEnd.CaptureGainDB-0.6) > 1e-12 {
		t.Errorf("capture 4: quantizer %+v, faults %+v, gain %g", last.FrontEnd.Quantizer, last.Faults, last.FrontEnd.CaptureGainDB)
	}
}
