package metrics

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/prometheus/client_golang/prometheus/testutil"

	"quietband/detect"
	"quietband/ingest"
)

// TestAnalysisProgress (issue 17, item 16): the capture in progress and
// its progress, per input, as the pipeline's blocks are analysed; all 0
// before and after. The series pass promlint (the linter of `promtool
// check metrics`), with the other collectors of their own files
// (eventlog_damaged_files, ledger_writable, capture_retries_total,
// eventlog_outside_changes_total).
func TestAnalysisProgress(t *testing.T) {
	s := New(Options{Inputs: []string{"roof", "mast"}, Sources: Sources{
		EventLogDamaged:        func() int { return 1 },
		LedgerWritable:         func() bool { return false },
		CaptureRetries:         func() uint64 { return 2 },
		EventLogOutsideChanges: func() uint64 { return 1 },
	}})
	expose := func() string {
		var b strings.Builder
		for _, name := range []string{"in_progress", "capture_samples", "samples_done", "progress_ratio"} {
			n := "quietband_analysis_" + name
			for _, in := range []string{"roof", "mast"} {
				v := value(t, s, n, in)
				b.WriteString(n + "{" + in + "}=" + strconv.FormatFloat(v, 'g', -1, 64) + " ")
			}
		}
		return b.String()
	}
	idle := "quietband_analysis_in_progress{roof}=0 quietband_analysis_in_progress{mast}=0 quietband_analysis_capture_samples{roof}=0 quietband_analysis_capture_samples{mast}=0 quietband_analysis_samples_done{roof}=0 quietband_analysis_samples_done{mast}=0 quietband_analysis_progress_ratio{roof}=0 quietband_analysis_progress_ratio{mast}=0 "
	if got := expose(); got != idle {
		t.Errorf("before:\n got %s\nwant %s", got, idle)
	}
	a := s.AnalysisStarted("mast")
	a.Begin(&ingest.Capture{Samples: 1000}, 256, 64)
	for range 2 {
		a.Block(&detect.BlockInput{Samples: make([]complex64, 250)}, nil)
	}
	want := "quietband_analysis_in_progress{roof}=0 quietband_analysis_in_progress{mast}=1 quietband_analysis_capture_samples{roof}=0 quietband_analysis_capture_samples{mast}=1000 quietband_analysis_samples_done{roof}=0 quietband_analysis_samples_done{mast}=500 quietband_analysis_progress_ratio{roof}=0 quietband_analysis_progress_ratio{mast}=0.5 "
	if got := expose(); got != want {
		t.Errorf("half way:\n got %s\nwant %s", got, want)
	}
	if v := value(t, s, "quietband_analysis_started_timestamp_seconds", "mast"); v < 1.7e9 {
		t.Errorf("started_timestamp_seconds %g, want the time the analysis began", v)
	}
	a.Done()
	if got := expose(); got != idle {
		t.Errorf("after:\n got %s\nwant %s", got, idle)
	}
	problems, err := testutil.GatherAndLint(s.Registry())
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range problems {
		t.Errorf("lint: %s: %s", p.Metric, p.Text)
	}
	for name, want := range map[string]float64{"quietband_eventlog_damaged_files": 1, "quietband_ledger_writable": 0} {
		mfs, _ := s.Registry().Gather()
		found := false
		for _, mf := range mfs {
			if mf.GetName() == name {
				found = mf.GetMetric()[0].GetGauge().GetValue() == want
			}
		}
		if !found {
			t.Errorf("%s is not %g", name, want)
		}
	}
}

// value is the value of the one series of name with input in.
func value(t *testing.T, s *Set, name, in string) float64 {
	t.Helper()
	mfs, err := s.Registry().Gather()
	if err != nil {
		t.Fatal(err)
	}
	for _, mf := range mfs {
		if mf.GetName() != name {
			continue
		}
		for _, m := range mf.GetMetric() {
			for _, l := range m.GetLabel() {
				if l.GetName() == "input" && l.GetValue() == in {
					return m.GetGauge().GetValue()
				}
			}
		}
	}
	t.Fatalf("no series %s{input=%q}", name, in)
	return 0
}

// BenchmarkAnalysisProgress: the daemon's progress observer costs the
// pipeline one interface call and one atomic add a block. A 4 M-sample ci8
// noise capture at 4 MS/s through detect.Pipeline.Process, without and with
// the observer (no satellites).
func BenchmarkAnalysisProgress(b *testing.B) {
	path := filepath.Join(b.TempDir(), "noise.ci8")
	rng := rand.New(rand.NewPCG(1, 2))
	buf := make([]byte, 2*4<<20)
	for i := range buf {
		buf[i] = byte(int8(max(-127, min(127, math.Round(12*rng.NormFloat64())))))
	}
	if err := os.WriteFile(path, buf, 0o644); err != nil {
		b.Fatal(err)
	}
	s := New(Options{Inputs: []string{"roof"}})
	for _, observed := range []bool{false, true} {
		b.Run(fmt.Sprintf("observed=%v", observed), func(b *testing.B) {
			p := detect.NewPipeline(detect.Config{}, nil)
			for b.Loop() {
				c, err := ingest.Open(path, ingest.RawSettings{Format: ingest.CI8, SampleRate: 4e6})
				if err != nil {
					b.Fatal(err)
				}
				var opts []detect.Option
				var a *Analysis
				if observed {
					a = s.AnalysisStarted("roof")
					opts = append(opts, detect.WithObserver(a))
				}
				if _, err := p.Process(context.Background(), c, "noise.ci8", opts...); err != nil {
					b.Fatal(err)
				}
				if a != nil {
					a.Done()
				}
			}
			b.SetBytes(int64(len(buf)))
		})
	}
}
