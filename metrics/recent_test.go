package metrics

import (
	"bytes"
	"fmt"
	"path/filepath"
	"testing"

	"quietband/detect"
	"quietband/metrics/eventlog"
)

// writeRecentLog appends n captures' records (an event before every third
// capture record) to the log at path, rotated at maxBytes.
func writeRecentLog(t *testing.T, path string, n int, maxBytes int64) {
	t.Helper()
	l, err := eventlog.Open(path, eventlog.Options{MaxBytes: maxBytes})
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	var items []eventlog.Item
	for i := range n {
		name := fmt.Sprintf("c%05d.ci8", i)
		events := 0
		if i%3 == 0 {
			items = append(items, eventlog.Item{Kind: eventlog.KindEvent, Body: detect.Event{ID: fmt.Sprintf("%024x", i), Class: detect.ClassCW, Capture: name}})
			events = 1
		}
		items = append(items, eventlog.Item{Kind: eventlog.KindCapture, Body: detect.CaptureRecord{Capture: name, Status: detect.StatusOK, Events: events}})
		if i%40 == 39 || i == n-1 {
			if _, err := l.AppendBatch(items); err != nil {
				t.Fatal(err)
			}
			items = items[:0]
		}
	}
}

// TestFillRecent: the ring for /api/events gets the newest records of each
// kind, as a full scan would give it, reading only the newest segments.
func TestFillRecent(t *testing.T) {
	dir := t.TempDir()
	logPath := filepath.Join(dir, "events.jsonl")
	writeRecentLog(t, logPath, 3000, 16<<10)
	segs, _ := eventlog.Segments(logPath)
	for _, n := range []int{1, 5, 200, 5000} {
		t.Run(fmt.Sprint(n), func(t *testing.T) {
			want := NewRecent(n)
			if err := eventlog.Scan(logPath, func(r eventlog.Record) error { want.Add(r); return nil }); err != nil {
				t.Fatal(err)
			}
			got := NewRecent(n)
			files, err := FillRecent(logPath, got, n)
			if err != nil {
				t.Fatal(err)
			}
			w, g := want.Since(0, 4*n, true, true), got.Since(0, 4*n, true, true)
			if len(g) != len(w) {
				t.Fatalf("%d records, want %d", len(g), len(w))
			}
			for i := range w {
				if g[i].Seq != w[i].Seq || !bytes.Equal(g[i].Line, w[i].Line) {
					t.Fatalf("record %d: seq %d, want %d", i, g[i].Seq, w[i].Seq)
				}
			}
			if n <= 200 && files >= len(segs)/2 {
				t.Errorf("read %d of %d files for %d records of each kind", files, len(segs), n)
			}
			t.Logf("n %d: %d of %d files read", n, files, len(segs))
		})
	}
}
