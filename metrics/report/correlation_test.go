package report

import (
	"context"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"quietband/detect"
	"quietband/ingest"
	"quietband/ingest/synth"
)

// spoofingEvents measures the built-in spoofing scenario's counterfeit
// (harrowmere-4) and meacon (harrowmere-6) captures with a GNSSMeter and
// returns their spoofing events (detect.Spoofing, no site history).
func spoofingEvents(t *testing.T) map[string]detect.Event {
	t.Helper()
	s, err := synth.Builtin("spoofing")
	if err != nil {
		t.Fatal(err)
	}
	keep := s.Captures[:0]
	for _, c := range s.Captures {
		if c.Name == "harrowmere-4" || c.Name == "harrowmere-6" {
			keep = append(keep, c)
		}
	}
	s.Captures = keep
	dir := t.TempDir()
	truths, err := synth.Write(&s, dir)
	if err != nil {
		t.Fatal(err)
	}
	out := map[string]detect.Event{}
	for _, tr := range truths {
		c, err := ingest.Open(filepath.Join(dir, tr.Capture), ingest.RawSettings{})
		if err != nil {
			t.Fatal(err)
		}
		r, err := detect.MeasureSatellites(context.Background(), c, &detect.GNSSMeter{}, 65536)
		if err != nil {
			t.Fatal(err)
		}
		ev, ok := detect.Spoofing(r, nil, detect.NewPowerStats(nil, r, c.SampleRate), c.Start(), detect.Config{})
		if !ok {
			t.Fatalf("%s: no spoofing event (%d second peaks)", tr.Capture, len(r.Correlations))
		}
		out[ev.Params.Kind] = ev
	}
	return out
}

// TestCorrelationPicture: for every PRN of a meaconing and a counterfeit
// event (measured on synthesized captures), the picture is a PNG of its
// stated size and both peaks are marked in the spoofing colour where the
// Layout puts them: at 0 and at the meacon's delay on one axis, or, for
// a counterfeit's far peak drawn shifted onto the first's axis, at 0;
// and the profile reaches the top of its range at the strongest peak (its
// trace passes within a few pixels of (0, peak dB)).
func TestCorrelationPicture(t *testing.T) {
	evs := spoofingEvents(t)
	dir := t.TempDir()
	mark := ClassColor(detect.ClassSpoofing)
	for kind, ev := range evs {
		if len(ev.Params.Peaks) < 3 {
			t.Fatalf("%s: %d PRNs with peaks", kind, len(ev.Params.Peaks))
		}
		for _, pp := range ev.Params.Peaks {
			path := filepath.Join(dir, kind+".png")
			f, err := os.Create(path)
			if err != nil {
				t.Fatal(err)
			}
			l, err := WriteCorrelation(f, pp, "t")
			f.Close()
			if err != nil {
				t.Fatal(err)
			}
			img := decodePNG(t, path)
			if b := img.Bounds(); b.Dx() != CorrelationWidth || b.Dy() != CorrelationHeight {
				t.Fatalf("%s PRN %d: %v", kind, pp.PRN, b)
			}
			marks := []float64{0}
			if len(pp.Profile) == 1 {
				marks = append(marks, pp.DelayChips)
			} else if kind == "meaconing" {
				t.Errorf("meaconing PRN %d: the peaks %.2f chips apart on two segments", pp.PRN, pp.DelayChips)
			}
			mid := (l.Top + l.Bottom) / 2
			for _, x := range marks {
				if !near(img, l.XPixel(x), mid, 2, mark, 40) {
					t.Errorf("%s PRN %d: no peak mark at %.2f chips (pixel %.0f)", kind, pp.PRN, x, l.XPixel(x))
				}
			}
			// The first segment's largest value lies at the strongest
			// peak, within a sample (⅛ chip) of 0.
			seg := pp.Profile[0]
			best, at := math.Inf(-1), 0.0
			for i, v := range seg.PowerDB {
				if float64(v) > best {
					best, at = float64(v), seg.StartChips+float64(i)*seg.StepChips
				}
			}
			if math.Abs(at) > seg.StepChips+1e-9 {
				t.Errorf("%s PRN %d: the profile peaks at %.3f chips, not at the strongest peak", kind, pp.PRN, at)
			}
		}
	}
}

// TestReportSpoofing: a capture with a spoofing event gets one
// correlation picture per PRN in its section, with a caption naming the
// PRN, and the event row's detail names the kind.
func TestReportSpoofing(t *testing.T) {
	evs := spoofingEvents(t)
	ev := evs["meaconing"]
	ev.ID, ev.Capture = "m1", "harrowmere-6.sigmf-meta"
	ob := runScenario(t, t.TempDir(), scenario(4e6, synth.Capture{Name: "bare", DurationS: 0.05}))[0]
	dir := t.TempDir()
	r, err := New(dir, Options{})
	if err != nil {
		t.Fatal(err)
	}
	rec := ob.result.Record
	if err := r.Add(Capture{Record: rec, Events: []detect.Event{ev}, Summary: ob.summary}); err != nil {
		t.Fatal(err)
	}
	if err := r.Close(); err != nil {
		t.Fatal(err)
	}
	page, err := os.ReadFile(filepath.Join(dir, "index.html"))
	if err != nil {
		t.Fatal(err)
	}
	for _, pp := range ev.Params.Peaks {
		name := filepathGlob(t, dir, "*-correlation-prn"+two(pp.PRN)+".png")
		if name == "" || !strings.Contains(string(page), name) {
			t.Errorf("PRN %d: no correlation picture on the page", pp.PRN)
		}
	}
	if !strings.Contains(string(page), "meaconing, PRNs") {
		t.Error("the event's detail does not name the kind")
	}
}

func two(n int) string { return string(rune('0'+n/10)) + string(rune('0'+n%10)) }

func filepathGlob(t *testing.T, dir, pat string) string {
	m, err := filepath.Glob(filepath.Join(dir, pat))
	if err != nil || len(m) != 1 {
		return ""
	}
	return filepath.Base(m[0])
}
