package replay

import (
	"bytes"
	"os"
	"path/filepath"
	"testing"

	"quietband/metrics/eventlog"
)

// Issue 18 item 5: replay --log over the same captures twice (or demo
// --out into the same folder twice) wrote every capture again; verify said
// OK and the report counted double. A capture the log already holds with
// the same name, data SHA-256 and configuration fingerprint (a quarantined
// one: the same reason) records nothing new, and the summary says how many;
// a capture whose data changed is recorded.
func TestReplayTwiceRecordsNothingNew(t *testing.T) {
	dir := t.TempDir()
	caps := filepath.Join(dir, "caps")
	writeScenario(t, caps)
	// One capture that cannot be read: quarantined once, not twice.
	if err := os.WriteFile(filepath.Join(caps, "odd.ci8"), []byte{1, 2, 3}, 0o644); err != nil {
		t.Fatal(err)
	}
	log := filepath.Join(dir, "events.jsonl")
	first := runLog(t, log, 1, caps)
	s1, err := eventlog.Verify(log)
	if err != nil {
		t.Fatal(err)
	}
	if first.AlreadyRecorded != 0 || s1.Captures != 6 {
		t.Fatalf("first replay: %d already recorded, %d capture records; want 0 and 6", first.AlreadyRecorded, s1.Captures)
	}
	second := runLog(t, log, 2, caps)
	s2, err := eventlog.Verify(log)
	if err != nil {
		t.Fatal(err)
	}
	if second.AlreadyRecorded != 6 || s2.Records != s1.Records {
		t.Errorf("second replay: %d already recorded (want 6), the log went from %d to %d records", second.AlreadyRecorded, s1.Records, s2.Records)
	}
	// Changed data under the same name is a new capture.
	data := filepath.Join(caps, "d-clean.sigmf-data")
	b, _ := os.ReadFile(data)
	b[100] ^= 1
	if err := os.WriteFile(data, b, 0o644); err != nil {
		t.Fatal(err)
	}
	third := runLog(t, log, 1, caps)
	s3, err := eventlog.Verify(log)
	if err != nil {
		t.Fatal(err)
	}
	if third.AlreadyRecorded != 5 || s3.Captures != 7 {
		t.Errorf("after d-clean changed: %d already recorded (want 5), %d capture records (want 7)", third.AlreadyRecorded, s3.Captures)
	}
	// Corrected metadata (issue 17, item 7: here another core:datetime,
	// which leaves the configuration fingerprint alone) is a new capture
	// content too.
	meta := filepath.Join(caps, "b-clean.sigmf-meta")
	m, _ := os.ReadFile(meta)
	fixed := bytes.Replace(m, []byte(`"core:datetime": "2026-`), []byte(`"core:datetime": "2025-`), 1)
	if bytes.Equal(fixed, m) {
		t.Fatalf("no core:datetime in %s", m)
	}
	if err := os.WriteFile(meta, fixed, 0o644); err != nil {
		t.Fatal(err)
	}
	fourth := runLog(t, log, 1, caps)
	s4, err := eventlog.Verify(log)
	if err != nil {
		t.Fatal(err)
	}
	if fourth.AlreadyRecorded != 5 || s4.Captures != 8 {
		t.Errorf("after b-clean's metadata changed: %d already recorded (want 5), %d capture records (want 8)", fourth.AlreadyRecorded, s4.Captures)
	}
}
