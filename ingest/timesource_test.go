package ingest

import (
	"os"
	"path/filepath"
	"testing"
	"time"
)

// Issue 18 item 7: a capture's record says where its time came from. A
// SigMF core:datetime is the metadata's; a raw file's time is its
// modification time less its duration (a guess, said so); a SigMF
// recording without core:datetime has none (and is not given the file's).
func TestCaptureSaysWhereItsTimeCameFrom(t *testing.T) {
	dir := t.TempDir()
	data := make([]byte, 2000) // 1000 ci8 samples
	mtime := time.Date(2026, 3, 14, 6, 0, 1, 0, time.UTC)
	write := func(name string, b []byte) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, b, 0o644); err != nil {
			t.Fatal(err)
		}
		os.Chtimes(p, mtime, mtime)
		return p
	}
	meta := func(dt string) []byte {
		capt := `{"core:sample_start": 0` + dt + `}`
		return []byte(`{"global": {"core:datatype": "ci8", "core:sample_rate": 1000, "core:version": "1.0.0"}, "captures": [` + capt + `], "annotations": []}`)
	}
	write("dated.sigmf-data", data)
	write("undated.sigmf-data", data)
	for _, tc := range []struct {
		path  string
		raw   RawSettings
		src   string
		start time.Time
	}{
		{write("dated.sigmf-meta", meta(`, "core:datetime": "2026-03-14T05:00:00Z"`)), RawSettings{}, TimeFromMetadata, time.Date(2026, 3, 14, 5, 0, 0, 0, time.UTC)},
		{write("undated.sigmf-meta", meta("")), RawSettings{}, "", time.Time{}},
		{write("raw.ci8", data), RawSettings{SampleRate: 1000}, TimeFromFileMtime, mtime.Add(-time.Second)},
	} {
		c, err := Open(tc.path, tc.raw)
		if err != nil {
			t.Fatalf("%s: %v", tc.path, err)
		}
		if c.TimeSource != tc.src || !c.Start().Equal(tc.start) {
			t.Errorf("%s: time %v from %q; want %v from %q", filepath.Base(tc.path), c.Start(), c.TimeSource, tc.start, tc.src)
		}
	}
}
