package eventlog

import (
	"errors"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// TestOneWriter (issue 17, item 1): while a Log holds a log, a second Open
// of it fails with ErrLocked naming the holder and changes nothing; after
// Close, or after the active file was renamed away, the lock is the log's,
// not the file's. The lock file is no segment of the log.
func TestOneWriter(t *testing.T) {
	path := filepath.Join(t.TempDir(), "events.jsonl")
	a, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := a.Append(KindCapture, map[string]any{"capture": "x"}); err != nil {
		t.Fatal(err)
	}
	// Another writer: refused, naming this process as the holder.
	_, err = Open(path, Options{})
	if !errors.Is(err, ErrLocked) || !strings.Contains(err.Error(), "pid "+strconv.Itoa(os.Getpid())) || !strings.Contains(err.Error(), path) {
		t.Fatalf("second Open: %v; want ErrLocked naming %s and pid %d", err, path, os.Getpid())
	}
	// The active file renamed away (an outside rotation): still the same log.
	if err := os.Rename(path, path+".1"); err != nil {
		t.Fatal(err)
	}
	if _, err := Open(path, Options{}); !errors.Is(err, ErrLocked) {
		t.Fatalf("Open after the active file was renamed: %v; want ErrLocked", err)
	}
	os.Rename(path+".1", path)
	if err := a.Reopen(); err != nil {
		t.Fatalf("Reopen by the holder: %v", err)
	}
	segs, _ := Segments(path)
	if len(segs) != 1 || segs[0] != path {
		t.Errorf("Segments = %v, want only the active file (the lock is not a segment)", segs)
	}
	if err := a.Close(); err != nil {
		t.Fatal(err)
	}
	b, err := Open(path, Options{})
	if err != nil {
		t.Fatalf("Open after Close: %v", err)
	}
	defer b.Close()
	if b.LastSeq() != 1 {
		t.Errorf("LastSeq %d after reopening, want 1", b.LastSeq())
	}
}
