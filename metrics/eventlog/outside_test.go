package eventlog

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestChangedOutside (issue 17, item 5): the active file moved away (mv, as
// logrotate does, with or without a new empty file in its place), or
// deleted, under an open Log. Reattach (and Reopen, on SIGHUP) keeps its
// records as a rotated segment copied from the open file, continues the
// seqs in a new active file, and the whole log verifies. A truncated
// active file is reported with the seqs lost.
func TestChangedOutside(t *testing.T) {
	for _, c := range []struct {
		name   string
		change func(path string)
		reopen bool // Reopen (SIGHUP) instead of Reattach
	}{
		{"moved", func(p string) { os.Rename(p, p+".1") }, false},
		{"moved, SIGHUP", func(p string) { os.Rename(p, p+".1") }, true},
		{"moved, new file created", func(p string) { os.Rename(p, p+".1"); os.WriteFile(p, nil, 0o640) }, true},
		{"deleted", func(p string) { os.Remove(p) }, false},
		{"deleted, SIGHUP", func(p string) { os.Remove(p) }, true},
	} {
		t.Run(c.name, func(t *testing.T) {
			path := filepath.Join(t.TempDir(), "events.jsonl")
			l, err := Open(path, Options{})
			if err != nil {
				t.Fatal(err)
			}
			defer l.Close()
			for i := range 4 {
				if _, err := l.Append(KindCapture, map[string]any{"capture": i}); err != nil {
					t.Fatal(err)
				}
			}
			c.change(path)
			if c.reopen {
				err = l.Reopen()
			} else {
				_, err = l.Reattach()
			}
			if err != nil {
				t.Fatalf("after the change: %v", err)
			}
			if l.LastSeq() != 4 {
				t.Errorf("LastSeq %d after the change, want 4", l.LastSeq())
			}
			rec, err := l.Append(KindCapture, map[string]any{"capture": "after"})
			if err != nil || rec.Seq != 5 {
				t.Fatalf("append after the change: seq %d, %v; want seq 5", rec.Seq, err)
			}
			segs, _ := Segments(path)
			sum, err := Verify(segs...)
			if err != nil || sum.Records != 5 {
				t.Errorf("verify after the change: %+v, %v; want 5 records verified", sum, err)
			}
			// A second Open (a restart) finds the same state.
			l.Close()
			l2, err := Open(path, Options{})
			if err != nil {
				t.Fatal(err)
			}
			if l2.LastSeq() != 5 {
				t.Errorf("LastSeq %d after reopening, want 5", l2.LastSeq())
			}
			l2.Close()
		})
	}
	t.Run("truncated", func(t *testing.T) {
		path := filepath.Join(t.TempDir(), "events.jsonl")
		l, err := Open(path, Options{})
		if err != nil {
			t.Fatal(err)
		}
		defer l.Close()
		for i := range 4 {
			l.Append(KindCapture, map[string]any{"capture": i})
		}
		os.Truncate(path, 0)
		what, err := l.Reattach()
		if err != nil || !strings.Contains(what, "records 1–4 are lost") {
			t.Errorf("truncated: %q, %v; want a report naming the records lost (1–4)", what, err)
		}
		if rec, err := l.Append(KindCapture, map[string]any{"capture": "after"}); err != nil || rec.Seq != 5 {
			t.Errorf("append after the cut: seq %d, %v; want 5", rec.Seq, err)
		}
		segs, _ := Segments(path)
		if _, err := Verify(segs...); err == nil {
			t.Error("verify passed over the lost records")
		} else {
			t.Logf("truncated: %s; verify: %v", what, err)
		}
	})
}
