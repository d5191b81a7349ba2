package replay

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"quietband/detect"
	"quietband/ingest/synth"
	"quietband/metrics/eventlog"
)

// writeSites synthesizes two sites' captures, interleaved in time, into
// root/north and root/south: north at 4 MS/s with its receiver clock at
// +9 kHz and its spectrum inverted, south at 5 MS/s with its clock at
// −7 kHz, upright (REFERENCES §12.5, §12.2; within the ±15 kHz default
// search). Each has the demo's sky.
func writeSites(t *testing.T, root string) {
	t.Helper()
	for k, s := range []struct {
		name     string
		fs       float64
		clockHz  float64
		inverted bool
	}{{"north", 4e6, 9000, true}, {"south", 5e6, -7000, false}} {
		sc := synth.Demo()
		sc.Name, sc.Seed, sc.SampleRate = s.name, uint64(70+k), s.fs
		ppm := -s.clockHz / 1575.42
		inv := s.inverted
		sc.FrontEnd = &synth.FrontEnd{ClockPPM: &ppm, SpectrumInverted: &inv}
		sky := sc.Captures[0].Satellites
		sc.Captures = nil
		for i := range 3 {
			sc.Captures = append(sc.Captures, synth.Capture{Name: fmt.Sprintf("%s-%d", s.name, i), DurationS: 0.15,
				OffsetS: float64(120*i + 60*k), Satellites: sky})
		}
		if _, err := synth.Write(&sc, filepath.Join(root, s.name)); err != nil {
			t.Fatal(err)
		}
	}
}

// recordsByFile reads the capture records of an event log by capture
// file name (the base name: the same capture replayed from another root).
func recordsByFile(t *testing.T, log string) map[string]detect.CaptureRecord {
	t.Helper()
	out := map[string]detect.CaptureRecord{}
	if err := eventlog.Scan(log, func(r eventlog.Record) error {
		if r.Kind != eventlog.KindCapture {
			return nil
		}
		var c detect.CaptureRecord
		if err := r.Decode(&c); err != nil {
			return err
		}
		out[filepath.Base(c.Capture)] = c
		return nil
	}); err != nil {
		t.Fatal(err)
	}
	return out
}

// TestReplaySitesApart: replay over two sites whose captures alternate
// (one GNSS meter for both) gives every capture the satellite record it
// gets when its site is replayed alone: satellites, clock offset and
// orientation learned from a site's own earlier captures only. Each
// capture has the demo sky's satellites, its site's clock offset (within
// 20 Hz of the truth's median apparent Doppler; computed: the
// synthesizer's (L1 + f_D)/(1 + ε) − L1) and orientation; the log is the
// same byte for byte with the satellites in the spectral pass (one
// worker) and on their own read (two).
func TestReplaySitesApart(t *testing.T) {
	dir := t.TempDir()
	caps := filepath.Join(dir, "caps")
	writeSites(t, caps)
	var logs [][]byte
	for _, w := range []int{1, 2} {
		log := filepath.Join(dir, fmt.Sprintf("both-w%d.jsonl", w))
		runLog(t, log, w, caps)
		b, _ := os.ReadFile(log)
		logs = append(logs, b)
	}
	if !bytes.Equal(logs[0], logs[1]) {
		t.Errorf("logs differ between 1 and 2 workers (%d and %d bytes)", len(logs[0]), len(logs[1]))
	}
	both := recordsByFile(t, filepath.Join(dir, "both-w1.jsonl"))
	if len(both) != 6 {
		t.Fatalf("%d capture records, want 6", len(both))
	}
	for _, site := range []string{"north", "south"} {
		log := filepath.Join(dir, site+".jsonl")
		runLog(t, log, 2, filepath.Join(caps, site))
		for name, alone := range recordsByFile(t, log) {
			got := both[name]
			if got.Stats == nil || alone.Stats == nil {
				t.Fatalf("%s: no stats", name)
			}
			g, _ := json.Marshal(got.Stats)
			a, _ := json.Marshal(alone.Stats)
			if !bytes.Equal(g, a) || strings.Join(got.Notes, "|") != strings.Join(alone.Notes, "|") {
				t.Errorf("%s: replayed with the other site\n %s\nalone\n %s", name, g, a)
			}
			var truth synth.Truth
			tb, err := os.ReadFile(filepath.Join(caps, site, strings.TrimSuffix(name, ".sigmf-meta")+".truth.json"))
			if err != nil {
				t.Fatal(err)
			}
			if err := json.Unmarshal(tb, &truth); err != nil {
				t.Fatal(err)
			}
			checkSiteSatellites(t, name, got, truth)
		}
	}
}

// checkSiteSatellites checks a capture record's satellites against the
// synthesizer's truth: the same PRNs, the clock offset within 20 Hz of
// the median upright apparent Doppler, the orientation.
func checkSiteSatellites(t *testing.T, name string, rec detect.CaptureRecord, truth synth.Truth) {
	t.Helper()
	st := rec.Stats
	var want, got []int
	var dop []float64
	eps := *truth.FrontEnd.ClockPPM * 1e-6
	for _, s := range truth.Satellites {
		want = append(want, s.PRN)
		dop = append(dop, (1575.42e6+s.DopplerHz)/(1+eps)-1575.42e6)
	}
	for _, s := range st.Satellites {
		got = append(got, s.PRN)
	}
	slices.Sort(got)
	slices.Sort(want)
	if !slices.Equal(got, want) {
		t.Errorf("%s: satellites %v, truth %v", name, got, want)
	}
	slices.Sort(dop)
	median := dop[len(dop)/2]
	if len(dop)%2 == 0 {
		median = (dop[len(dop)/2-1] + dop[len(dop)/2]) / 2
	}
	if st.ClockOffsetHz == nil || math.Abs(*st.ClockOffsetHz-median) > 20 {
		t.Errorf("%s: clock offset %v, truth median %.1f Hz", name, st.ClockOffsetHz, median)
	}
	inv := truth.FrontEnd.SpectrumInverted != nil && *truth.FrontEnd.SpectrumInverted
	if st.SpectrumInverted == nil || *st.SpectrumInverted != inv {
		t.Errorf("%s: spectrum inverted %v, truth %v", name, st.SpectrumInverted, inv)
	}
}
