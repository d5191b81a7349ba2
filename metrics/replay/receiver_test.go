package replay

import (
	"context"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"quietband/detect"
	"quietband/ingest"
	"quietband/ingest/synth"
	"quietband/metrics/eventlog"
)

// receiverSite synthesizes n captures of one site at 4 MS/s with the
// demo's sky, a receiver clock offset clockHz (REFERENCES §12.5) and,
// when inverted, I and Q swapped (REFERENCES §12.2); with cw, each with a
// CW at +312.5 kHz (upright, J/N 20 dB), which the clock offset moves to
// cwAt(clockHz).
func receiverSite(t *testing.T, dir string, clockHz float64, inverted, cw bool, n int) {
	t.Helper()
	sc := synth.Demo()
	sc.Name, sc.Seed, sc.SampleRate = "mast", 91, 4e6
	ppm := -clockHz / 1575.42
	sc.FrontEnd = &synth.FrontEnd{ClockPPM: &ppm, SpectrumInverted: &inverted}
	sky := sc.Captures[0].Satellites
	sc.Captures = nil
	for i := range n {
		c := synth.Capture{Name: fmt.Sprintf("mast-%d", i), DurationS: 0.15, OffsetS: float64(60 * i), Satellites: sky}
		if cw {
			c.Emitters = []synth.Emitter{{Kind: "cw", JNDB: 20, OffsetHz: 312.5e3, StartS: 0, EndS: 0.15}}
		}
		sc.Captures = append(sc.Captures, c)
	}
	if _, err := synth.Write(&sc, dir); err != nil {
		t.Fatal(err)
	}
}

// cwAt is where a CW at +312.5 kHz from the centre shows with the
// receiver clock offset clockHz, in kHz: the synthesizer's
// (L1 + f)/(1 + ε) − L1 with ε = −clockHz/L1 (its clock offset convention,
// checkSiteSatellites), about 312.5 kHz + clockHz.
func cwAt(clockHz float64) float64 {
	eps := -clockHz / 1575.42e6
	return ((1575.42e6+312.5e3)/(1+eps) - 1575.42e6) / 1e3
}

// siteTruth reads the synthesizer's truth of capture name in dir.
func siteTruth(t *testing.T, dir, name string) synth.Truth {
	t.Helper()
	var truth synth.Truth
	b, err := os.ReadFile(filepath.Join(dir, strings.TrimSuffix(name, ".sigmf-meta")+".truth.json"))
	if err == nil {
		err = json.Unmarshal(b, &truth)
	}
	if err != nil {
		t.Fatal(err)
	}
	return truth
}

// replayRecords replays dir with o (Paths and Log set here) and returns
// its capture records and events by capture name, in order.
func replayRecords(t *testing.T, dir string, o Options) ([]detect.CaptureRecord, map[string][]detect.Event) {
	t.Helper()
	l, err := eventlog.Open(filepath.Join(t.TempDir(), "log.jsonl"), eventlog.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	o.Paths, o.Log = []string{dir}, l
	if _, err := Run(context.Background(), o); err != nil {
		t.Fatal(err)
	}
	var recs []detect.CaptureRecord
	events := map[string][]detect.Event{}
	if err := eventlog.Scan(l.Path(), func(r eventlog.Record) error {
		switch r.Kind {
		case eventlog.KindCapture:
			var c detect.CaptureRecord
			if err := r.Decode(&c); err != nil {
				return err
			}
			recs = append(recs, c)
		case eventlog.KindEvent:
			var e detect.Event
			if err := r.Decode(&e); err != nil {
				return err
			}
			events[e.Capture] = append(events[e.Capture], e)
		}
		return nil
	}); err != nil {
		t.Fatal(err)
	}
	return recs, events
}

// TestReplaySpectrumSetting: an input whose recorder swaps I and Q, set
// to spectrum inverted (ingest.Orientation), is analysed upright from its
// first capture: the CW reported at its true offset (+312.5 kHz, not the
// mirrored −312.5 kHz that auto reports on the first capture), the
// satellites with their upright Dopplers (the clock offset within 20 Hz of
// the truth's), the record saying inverted with the configuration's note,
// and no orientation test (issue 14, Build 3: "a config/flag forces it per
// folder"). Set to upright on the same captures, the satellites' carrier
// Doppler has the wrong sign and none survives the code-Doppler check
// (REFERENCES §12.2: code Doppler has the sign of carrier Doppler / 1540),
// or whatever is found is recorded as upright: the setting is obeyed, and
// the record says so.
func TestReplaySpectrumSetting(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "mast")
	receiverSite(t, dir, 6000, true, true, 2)
	offsets := func(evs []detect.Event) []float64 {
		var out []float64
		for _, e := range evs {
			if e.Class == "cw" {
				out = append(out, e.OffsetHz/1e3)
			}
		}
		return out
	}
	auto, autoEv := replayRecords(t, dir, Options{Workers: 1})
	forced, forcedEv := replayRecords(t, dir, Options{Workers: 1, Raw: ingest.RawSettings{Spectrum: ingest.OrientationInverted}})
	if len(auto) != 2 || len(forced) != 2 {
		t.Fatalf("%d and %d capture records, want 2 each", len(auto), len(forced))
	}
	first := auto[0].Capture
	want := cwAt(6000)
	if got := offsets(autoEv[first]); len(got) != 1 || math.Abs(got[0]+want) > 1 {
		t.Errorf("auto, first capture: cw at %v kHz, want the mirrored %.1f", got, -want)
	}
	for i, r := range forced {
		if got := offsets(forcedEv[r.Capture]); len(got) != 1 || math.Abs(got[0]-want) > 1 {
			t.Errorf("inverted by the setting, capture %d: cw at %v kHz, want %+.1f", i, got, want)
		}
		st := r.Stats
		if st.SpectrumInverted == nil || !*st.SpectrumInverted {
			t.Errorf("capture %d: spectrum_inverted %v, want true", i, st.SpectrumInverted)
		}
		if !slices.ContainsFunc(r.Notes, func(n string) bool { return strings.Contains(n, "spectrum: inverted") }) || r.Spectrum != "inverted" {
			t.Errorf("capture %d: spectrum %q, no note of the setting: %q", i, r.Spectrum, r.Notes)
		}
		if len(st.Satellites) != len(auto[i].Stats.Satellites) || len(st.Satellites) < 4 {
			t.Errorf("capture %d: %d satellites set inverted, %d auto", i, len(st.Satellites), len(auto[i].Stats.Satellites))
		}
		for _, s := range st.Satellites {
			j := slices.IndexFunc(auto[i].Stats.Satellites, func(a detect.Satellite) bool { return a.PRN == s.PRN })
			if j < 0 || math.Abs(s.DopplerHz-auto[i].Stats.Satellites[j].DopplerHz) > 20 {
				t.Errorf("capture %d PRN %d: Doppler %.1f Hz set inverted, auto %+v", i, s.PRN, s.DopplerHz, auto[i].Stats.Satellites)
			}
		}
		checkSiteSatellites(t, fmt.Sprintf("inverted by the setting, capture %d", i), r, siteTruth(t, dir, r.Capture))
	}
	upright, _ := replayRecords(t, dir, Options{Workers: 1, Raw: ingest.RawSettings{Spectrum: ingest.OrientationUpright}})
	for i, r := range upright {
		if r.Stats.SpectrumInverted == nil || *r.Stats.SpectrumInverted {
			t.Errorf("set upright, capture %d: spectrum_inverted %v, want false", i, r.Stats.SpectrumInverted)
		}
		if !slices.ContainsFunc(r.Notes, func(n string) bool { return strings.Contains(n, "spectrum: upright") }) {
			t.Errorf("set upright, capture %d: no note of the setting: %q", i, r.Notes)
		}
	}
}

// TestReplayClockRange: a recorder whose clock is 22 kHz off (14 ppm at
// L1, a receiver without a TCXO; REFERENCES §12.5), which puts every
// satellite of the sky (geometric Dopplers −3.8 … +4.1 kHz) beyond the
// default search of ±(5 + 10) kHz, has none found by default and all of
// them with ClockRangeHz 25 kHz (issue 14, Build 4: "a configurable
// Doppler search range"), the clock offset then within 20 Hz of the
// truth's; the range is part of the configuration fingerprint.
func TestReplayClockRange(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "mast")
	receiverSite(t, dir, 22000, false, false, 1)
	def, _ := replayRecords(t, dir, Options{Workers: 1})
	wide, _ := replayRecords(t, dir, Options{Workers: 1, ClockRangeHz: 25000})
	if len(def) != 1 || len(wide) != 1 {
		t.Fatalf("%d and %d capture records, want 1 each", len(def), len(wide))
	}
	if n := len(def[0].Stats.Satellites); n != 0 {
		t.Errorf("default range: %d satellites at a 22 kHz clock offset, want none", n)
	}
	if n := len(wide[0].Stats.Satellites); n < 4 {
		t.Fatalf("25 kHz range: %d satellites, want the sky's", n)
	}
	checkSiteSatellites(t, "25 kHz range", wide[0], siteTruth(t, dir, wide[0].Capture))
	if def[0].Config == wide[0].Config {
		t.Error("the clock range is not in the configuration fingerprint")
	}
}
