package ingest

import (
	"strings"
	"testing"
	"time"
)

// TestTrustTime (issue 17, item 13): a start time from which the capture
// would end after 9999-12-31T23:59:59.999999999Z (the last instant RFC 3339's
// four-digit years can write) is dropped with a reason; one that ends
// inside the range is kept.
func TestTrustTime(t *testing.T) {
	for _, c := range []struct {
		start string
		keep  bool
	}{
		{"9999-12-31T23:59:59.9Z", false},      // 0.1 s before the end, 1 s long
		{"9999-12-31T23:59:58.5Z", true},       // ends 0.5 s before
		{"2026-12-05T08:00:00Z", true},         // an ordinary day
		{"0000-01-01T00:00:00Z", true},         // the first writable instant
		{"9999-12-31T23:59:59.999999Z", false}, // the last microsecond
	} {
		start, _ := time.Parse(time.RFC3339Nano, c.start)
		cp := &Capture{SampleRate: 1e6, Samples: 1e6, Segments: []Segment{{Start: start}}, TimeSource: TimeFromMetadata}
		cp.trustTime()
		kept := !cp.Start().IsZero()
		if kept != c.keep || (kept == (cp.TimeProblem != "")) || (!kept && !strings.Contains(cp.TimeProblem, "RFC 3339")) {
			t.Errorf("start %s: kept %v, problem %q; want kept %v", c.start, kept, cp.TimeProblem, c.keep)
		}
	}
}
