package replay

import (
	"bytes"
	"context"
	"errors"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"quietband/detect"
	"quietband/ingest"
	"quietband/ingest/synth"
	"quietband/metrics/eventlog"
)

// writeScenario synthesizes a short scenario into dir: clean captures to
// learn the baseline from, then a CW and a pulse train, a minute apart
// (no satellites: quick).
func writeScenario(t *testing.T, dir string) {
	t.Helper()
	s := synth.Demo()
	s.Captures = []synth.Capture{
		{Name: "a-clean"}, {Name: "b-clean"},
		{Name: "c-cw", Emitters: []synth.Emitter{{Kind: synth.KindCW, Tones: []synth.Tone{{OffsetHz: 500e3, JNDB: 0}}}}},
		{Name: "d-clean"},
		{Name: "e-pulses", Emitters: []synth.Emitter{{Kind: synth.KindPulsed, Pulse: "rect", WidthS: 5e-6, PRIS: 200e-6, JNDB: 15}}},
	}
	for i := range s.Captures {
		s.Captures[i].DurationS = 0.12
		s.Captures[i].OffsetS = float64(i) * 60
		s.Captures[i].Satellites = nil
	}
	if _, err := synth.Write(&s, dir); err != nil {
		t.Fatal(err)
	}
}

// runLog replays paths with the given number of workers into the event
// log at path and returns the summary.
func runLog(t *testing.T, path string, workers int, paths ...string) *Summary {
	t.Helper()
	l, err := eventlog.Open(path, eventlog.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	sum, err := Run(context.Background(), Options{Paths: paths, Workers: workers, Log: l})
	if err != nil {
		t.Fatal(err)
	}
	return sum
}

// TestCollectOrder: captures are ordered by start time, then name,
// whatever their folder or the order of the paths; a capture that does
// not open has no start time and comes first, with its problem; names are
// relative to the folder given (a named file's folder).
func TestCollectOrder(t *testing.T) {
	dir := t.TempDir()
	s := synth.Demo()
	s.Captures = []synth.Capture{{Name: "z-first", OffsetS: 0}, {Name: "a-second", OffsetS: 60}, {Name: "m-third", OffsetS: 60}}
	for i := range s.Captures {
		s.Captures[i].DurationS = 0.01
		s.Captures[i].Satellites = nil
	}
	if _, err := synth.Write(&s, filepath.Join(dir, "x")); err != nil {
		t.Fatal(err)
	}
	os.MkdirAll(filepath.Join(dir, "y"), 0o755)
	os.Rename(filepath.Join(dir, "x", "a-second.sigmf-meta"), filepath.Join(dir, "y", "a-second.sigmf-meta"))
	os.Rename(filepath.Join(dir, "x", "a-second.sigmf-data"), filepath.Join(dir, "y", "a-second.sigmf-data"))
	os.WriteFile(filepath.Join(dir, "x", "odd.ci8"), []byte{1, 2, 3}, 0o644)
	found, err := Collect([]string{filepath.Join(dir, "y"), filepath.Join(dir, "x")}, ingest.RawSettings{SampleRate: 1e6})
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, f := range found {
		names = append(names, f.Name)
		if (f.Capture == nil) != (f.Problem != nil) {
			t.Errorf("%s: capture %v, problem %v", f.Name, f.Capture != nil, f.Problem)
		}
	}
	if want := []string{"odd.ci8", "z-first.sigmf-meta", "a-second.sigmf-meta", "m-third.sigmf-meta"}; !slices.Equal(names, want) {
		t.Errorf("order %v, want %v", names, want)
	}
	one, err := Collect([]string{filepath.Join(dir, "x", "m-third.sigmf-data")}, ingest.RawSettings{})
	if err != nil || len(one) != 1 || one[0].Name != "m-third.sigmf-meta" {
		t.Errorf("a named data file: %+v %v", one, err)
	}
}

// TestAnalyseQuarantines: a capture with a problem, or whose analysis
// fails, gives one capture record, quarantined, whose reason is the
// ingest.CaptureError's own message (the file and the problem); a
// cancelled context gives its error and no record.
func TestAnalyseQuarantines(t *testing.T) {
	pipe := detect.NewPipeline(detect.Config{}, nil)
	ce := &ingest.CaptureError{File: "caps/x.ci8", Problem: errors.New("zero length")}
	out, err := Analyse(context.Background(), pipe, ingest.Found{Name: "x.ci8", Problem: ce})
	if err != nil || out.Err != ce || out.Result != nil || len(out.Items()) != 1 {
		t.Fatalf("Analyse = %+v, %v", out, err)
	}
	if r := out.Record; r.Capture != "x.ci8" || r.Status != detect.StatusQuarantined || r.Error != "caps/x.ci8: zero length" {
		t.Errorf("record %+v", r)
	}
	if r := Quarantined("y", errors.Join(errors.New("reading"), ce)); r.Error != "caps/x.ci8: zero length" {
		t.Errorf("a wrapped CaptureError gives %q, want its own message", r.Error)
	}

	dir := t.TempDir()
	writeScenario(t, dir)
	found, err := Collect([]string{dir}, ingest.RawSettings{})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := Analyse(ctx, pipe, found[0]); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled: %v", err)
	}
	out, err = Analyse(context.Background(), pipe, found[0])
	if err != nil || out.Err != nil || out.Result == nil || out.Record.Status != detect.StatusOK || len(out.Items()) != len(out.Events)+1 {
		t.Errorf("a clean capture: %+v, %v", out.Record, err)
	}
}

// TestRunDeterministicAcrossWorkers: any number of workers gives the same
// log, byte for byte: 1 (satellites inside the spectral pass), 2 and 3
// (on a read of their own beside it); the summary counts what the log
// holds.
func TestRunDeterministicAcrossWorkers(t *testing.T) {
	dir := t.TempDir()
	caps := filepath.Join(dir, "caps")
	writeScenario(t, caps)
	// Satellites too, so that the parallel measurement is exercised.
	s := synth.Demo()
	s.Captures = s.Captures[:2]
	for i := range s.Captures {
		s.Captures[i].DurationS = 0.12
	}
	if _, err := synth.Write(&s, filepath.Join(caps, "sky")); err != nil {
		t.Fatal(err)
	}
	var logs [][]byte
	for _, w := range []int{1, 2, 3} {
		log := filepath.Join(dir, "w.jsonl")
		os.Remove(log)
		sum := runLog(t, log, w, caps)
		b, _ := os.ReadFile(log)
		logs = append(logs, b)
		if sum.Captures != 7 || sum.Bad != 0 || sum.ByClass[detect.ClassCW] != 1 || sum.ByClass[detect.ClassPulsed] != 1 ||
			sum.Samples != 7*480000 || sum.Signal != 7*120*time.Millisecond {
			t.Errorf("%d workers: summary %+v", w, sum)
		}
	}
	if !bytes.Contains(logs[0], []byte(`"prn":`)) {
		t.Fatalf("no satellite in the log of 1 worker:\n%s", logs[0])
	}
	for i := range logs[1:] {
		if !bytes.Equal(logs[0], logs[i+1]) {
			t.Errorf("logs differ between 1 and %d workers (%d and %d bytes)", i+2, len(logs[0]), len(logs[i+1]))
		}
	}
}

// TestRunQuarantinesAndGoesOn: a corrupt capture in the middle of a
// folder is recorded as quarantined with its reason (ingest's: not a
// whole number of samples, at which byte), every other one is analysed;
// the baseline file is saved at the end and loaded by the next replay;
// Done sees every capture in order, Progress before each.
func TestRunQuarantinesAndGoesOn(t *testing.T) {
	dir := t.TempDir()
	caps := filepath.Join(dir, "caps")
	writeScenario(t, caps)
	data := filepath.Join(caps, "c-cw.sigmf-data")
	b, _ := os.ReadFile(data)
	if err := os.WriteFile(data, b[:len(b)-1], 0o644); err != nil {
		t.Fatal(err)
	}
	base := filepath.Join(dir, "baseline.json")
	var done, progress []string
	sum, err := Run(context.Background(), Options{Paths: []string{caps}, Workers: 1, Baseline: base,
		Progress: func(i, n int, f ingest.Found) { progress = append(progress, f.Name) },
		Done: func(f ingest.Found, o Outcome) error {
			done = append(done, f.Name)
			if f.Name == "c-cw.sigmf-meta" {
				if o.Err == nil || o.Record.Status != detect.StatusQuarantined || !strings.Contains(o.Record.Error, "not a whole number") ||
					!strings.Contains(o.Record.Error, "byte offset") {
					t.Errorf("quarantine record %+v", o.Record)
				}
			} else if o.Err != nil || o.Record.Status != detect.StatusOK {
				t.Errorf("%s: %+v", f.Name, o.Record)
			}
			return nil
		}})
	if err != nil {
		t.Fatal(err)
	}
	want := []string{"c-cw.sigmf-meta", "a-clean.sigmf-meta", "b-clean.sigmf-meta", "d-clean.sigmf-meta", "e-pulses.sigmf-meta"}
	if !slices.Equal(done, want) || !slices.Equal(progress, want) {
		t.Errorf("done %v, progress %v; want %v", done, progress, want)
	}
	if sum.Captures != 5 || sum.Bad != 1 {
		t.Errorf("summary %d captures, %d bad; want 5 and 1", sum.Captures, sum.Bad)
	}
	if _, err := os.Stat(base); err != nil {
		t.Fatalf("baseline not saved: %v", err)
	}
	// Loaded by the next replay: its first capture's record says so.
	var first detect.CaptureRecord
	if _, err := Run(context.Background(), Options{Paths: []string{filepath.Join(caps, "a-clean.sigmf-data")}, Baseline: base,
		Done: func(_ ingest.Found, o Outcome) error { first = o.Record; return nil }}); err != nil {
		t.Fatal(err)
	}
	if first.Stats == nil || first.Stats.Baseline != "loaded" {
		t.Errorf("second replay's baseline: %+v (record %+v)", first.Stats, first)
	}
}
