package report

import (
	"math"
	"testing"
	"time"

	"quietband/detect"
)

// Issue 18 item 7: one capture dated by its file's modification time a
// month away squeezed a day of captures into one line of the timeline.
// Captures far from the largest group of capture times are drawn in order
// instead of at their time; the time axis spans the group.
func TestOneMisdatedCaptureDoesNotSqueezeTheTimeline(t *testing.T) {
	t0 := time.Date(2026, 3, 14, 0, 0, 0, 0, time.UTC)
	var tl timeline
	add := func(at time.Time, src string) {
		start := detect.Time{Time: at}
		tl.add(detect.CaptureRecord{Capture: at.String(), Status: detect.StatusOK, Start: &start, TimeSource: src,
			Samples: 1e6, SampleRate: 4e6}, []detect.Event{{Class: detect.ClassCW, Start: start, End: detect.Time{Time: at.Add(time.Second)}, JNDB: 5}})
	}
	for h := range 24 {
		add(t0.Add(time.Duration(h)*time.Hour), "core:datetime")
		if h == 11 {
			add(t0.Add(31*24*time.Hour), "file modification time")
		}
	}
	xs, lo, hi := tl.ranges()
	if tl.offAxis != 1 {
		t.Fatalf("%d captures off the axis, want 1", tl.offAxis)
	}
	if span := hi - lo; span > 26*3600 || span < 23*3600 {
		t.Errorf("the axis spans %.1f h, want about the day's 23 h", span/3600)
	}
	// The misdated capture sits right after the capture before it.
	if d := xs[12] - xs[11]; d < 0 || d > 1 {
		t.Errorf("the misdated capture is drawn %.0f s after the one before it", d)
	}
	if !math.IsNaN(tl.events[12].t0) {
		t.Error("its event keeps its time")
	}
	// A steady series keeps every time.
	var steady timeline
	for d := range 30 {
		start := detect.Time{Time: t0.Add(time.Duration(d) * 24 * time.Hour)}
		steady.add(detect.CaptureRecord{Status: detect.StatusOK, Start: &start, Samples: 1e6, SampleRate: 4e6}, nil)
	}
	steady.ranges()
	if steady.offAxis != 0 {
		t.Errorf("a month of daily captures: %d off the axis", steady.offAxis)
	}
}
