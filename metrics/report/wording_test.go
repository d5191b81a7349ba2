package report

import (
	"html"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"quietband/detect"
)

// Issue 18 item 3: "deviation" meant three things (the report's "floor
// dev." beside an unchanged floor, the timeline's "noise-floor
// deviation", the dashboard's "AGC deviation") for one quantity, the
// total in-band power over the baseline's. The report and the dashboard
// say it one way, and a capture whose baseline was still being learned
// shows none (its agc_deviation_db read 0).
func TestDeviationSaidOneWay(t *testing.T) {
	dir := t.TempDir()
	rep, err := New(dir, Options{Source: "test"})
	if err != nil {
		t.Fatal(err)
	}
	t0 := time.Date(2026, 3, 14, 6, 0, 0, 0, time.UTC)
	over := 3.25
	for i, st := range []detect.Stats{
		{PowerDBFS: -30, NoiseFloorDBFS: -33, Baseline: "learning"},
		{PowerDBFS: -26.75, NoiseFloorDBFS: -33, AGCDeviationDB: over, PowerOverBaselineDB: &over, Baseline: "loaded"},
		// A record from a log written before power_over_baseline_db.
		{PowerDBFS: -31, NoiseFloorDBFS: -33, AGCDeviationDB: -1.5, Baseline: "learned"},
	} {
		st := st
		start := detect.Time{Time: t0.Add(time.Duration(i) * time.Minute)}
		if err := rep.Add(Capture{Record: detect.CaptureRecord{Capture: "c" + string(rune('0'+i)), Status: detect.StatusOK,
			Start: &start, Samples: 1000, SampleRate: 4e6, Stats: &st}}); err != nil {
			t.Fatal(err)
		}
	}
	if err := rep.Close(); err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile(filepath.Join(dir, "index.html"))
	if err != nil {
		t.Fatal(err)
	}
	dash, err := os.ReadFile("../../deploy/grafana/quietband-dashboard.json")
	if err != nil {
		t.Fatal(err)
	}
	for name, text := range map[string]string{"report": string(b), "dashboard": string(dash)} {
		low := strings.ToLower(text)
		for _, bad := range []string{"floor dev", "deviation"} {
			if strings.Contains(low, bad) {
				t.Errorf("%s says %q", name, bad)
			}
		}
		if !strings.Contains(low, PowerOverBaselineWords) {
			t.Errorf("%s lacks %q", name, PowerOverBaselineWords)
		}
	}
	page := html.UnescapeString(string(b))
	for _, want := range []string{`<td class="num">+3.25</td>`, `<td class="num">−1.50</td>`} {
		if !strings.Contains(page, want) && !strings.Contains(page, strings.Replace(want, "−", "-", 1)) {
			t.Errorf("report lacks %s", want)
		}
	}
	if strings.Contains(page, `<td class="num">+0.00</td>`) || strings.Contains(page, `<td class="num">0.00</td>`) {
		t.Error("the learning capture shows a power over baseline of 0")
	}
}
