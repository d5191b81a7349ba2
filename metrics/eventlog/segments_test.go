package eventlog

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

func TestSegmentName(t *testing.T) {
	tests := []struct {
		path  string
		first uint64
		want  string
	}{
		{"/var/lib/quietband/events.jsonl", 1, "/var/lib/quietband/events.000000000001.jsonl"},
		{"events.jsonl", 123456789012, "events.123456789012.jsonl"},
		{"events.jsonl", 1234567890123, "events.1234567890123.jsonl"},
		{"/x/log", 7, "/x/log.000000000007"},
		{"/x/a.b.jsonl", 42, "/x/a.b.000000000042.jsonl"},
	}
	for _, tt := range tests {
		if got := SegmentName(tt.path, tt.first); got != tt.want {
			t.Errorf("SegmentName(%q, %d) = %q, want %q", tt.path, tt.first, got, tt.want)
		}
	}
}

func TestSegmentsOrder(t *testing.T) {
	tests := []struct {
		name   string
		active string
		files  []string // created in the directory
		dirs   []string
		want   []string
	}{
		{
			name:   "numeric order, active last, others ignored",
			active: "events.jsonl",
			files: []string{
				"events.000000000010.jsonl", "events.000000000002.jsonl", "events.1000000000000.jsonl",
				"events.jsonl", "events.00000000001.jsonl", "events.0000000000010.jsonl",
				"events.000000000003.jsonl.tmp", "other.000000000001.jsonl", "events.00000000000a.jsonl",
				"events.000000000000.jsonl", "events.jsonl.000000000004",
			},
			dirs: []string{"events.000000000005.jsonl"},
			want: []string{"events.000000000002.jsonl", "events.000000000010.jsonl", "events.1000000000000.jsonl", "events.jsonl"},
		},
		{
			name:   "active file missing",
			active: "events.jsonl",
			files:  []string{"events.000000000001.jsonl"},
			want:   []string{"events.000000000001.jsonl"},
		},
		{
			name:   "no extension",
			active: "log",
			files:  []string{"log.000000000031", "log.000000000001", "log", "log.000000000002.jsonl"},
			want:   []string{"log.000000000001", "log.000000000031", "log"},
		},
		{name: "nothing", active: "events.jsonl"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			dir := t.TempDir()
			for _, f := range tt.files {
				writeFile(t, filepath.Join(dir, f), nil)
			}
			for _, d := range tt.dirs {
				os.Mkdir(filepath.Join(dir, d), 0o755)
			}
			got := segments(t, filepath.Join(dir, tt.active))
			var want []string
			for _, w := range tt.want {
				want = append(want, filepath.Join(dir, w))
			}
			if !slices.Equal(got, want) {
				t.Errorf("Segments = %q\nwant %q", got, want)
			}
		})
	}
	if _, err := Segments(filepath.Join(t.TempDir(), "missing", "events.jsonl")); err == nil {
		t.Error("Segments in a missing directory: no error")
	}
}

// writeCalls appends records singly and in batches of 3 and returns the
// byte length of every call, and whether the call began a new file.
func writeCalls(t *testing.T, l *Log, calls int) (sizes []int64, fresh []bool, recs []Record) {
	t.Helper()
	for c := range calls {
		var rs []Record
		var err error
		if c%4 == 3 {
			rs, err = l.AppendBatch([]Item{
				{KindEvent, testEvent{ID: fmt.Sprint("b", c, "a"), N: c}},
				{KindEvent, testEvent{ID: fmt.Sprint("b", c, "b"), Class: strings.Repeat("y", c%5)}},
				{KindCapture, testCapture{Capture: fmt.Sprint("cap", c), Status: "ok", Events: 2}},
			})
		} else {
			var r Record
			r, err = l.Append(KindEvent, testEvent{ID: fmt.Sprint("s", c), Class: strings.Repeat("z", c%9), N: c})
			rs = []Record{r}
		}
		if err != nil {
			t.Fatalf("call %d: %v", c, err)
		}
		var n int64
		for _, r := range rs {
			n += int64(len(r.Line)) + 1
		}
		sizes = append(sizes, n)
		fresh = append(fresh, rs[0].LineNo == 1)
		recs = append(recs, rs...)
	}
	return sizes, fresh, recs
}

func TestRotation(t *testing.T) {
	tests := []struct {
		maxBytes int64
		calls    int
	}{
		{400, 30},
		{1000, 40},
		{50, 8}, // every record is longer than MaxBytes: one call per file
	}
	for _, tt := range tests {
		t.Run(fmt.Sprint(tt.maxBytes), func(t *testing.T) {
			path := tempLog(t)
			var logs bytes.Buffer
			l := openLog(t, path, Options{MaxBytes: tt.maxBytes, Logger: logBuffer(&logs)})
			sizes, fresh, recs := writeCalls(t, l, tt.calls)

			// The rotation rule: a call starts a new file exactly when
			// adding it would push a non-empty file over MaxBytes.
			var cur int64
			files := 1
			for i, n := range sizes {
				over := cur > 0 && cur+n > tt.maxBytes
				if over != (fresh[i] && i > 0) {
					t.Errorf("call %d (%d bytes onto %d): new file %v, want %v", i, n, cur, fresh[i], over)
				}
				if over {
					cur = 0
					files++
				}
				cur += n
			}
			segs := segments(t, path)
			if len(segs) != files || files < 3 {
				t.Fatalf("%d files, want %d (at least 3): %q", len(segs), files, segs)
			}
			if got := strings.Count(logs.String(), "eventlog: rotated"); got != files-1 {
				t.Errorf("%d rotations logged, want %d", got, files-1)
			}
			if !slices.IsSorted(segs[:len(segs)-1]) || segs[len(segs)-1] != path {
				t.Errorf("segment names do not sort in seq order: %q", segs)
			}
			// Every segment is named after the seq of its first record,
			// and the records read back are the ones written.
			r := NewReader(segs...)
			var got []Record
			for {
				rec, err := r.Next()
				if err == io.EOF {
					break
				}
				if err != nil {
					t.Fatal(err)
				}
				if rec.LineNo == 1 && rec.File != path && rec.File != SegmentName(path, rec.Seq) {
					t.Errorf("segment %s starts with seq %d", rec.File, rec.Seq)
				}
				got = append(got, rec)
			}
			if len(got) != len(recs) {
				t.Fatalf("read %d records, wrote %d", len(got), len(recs))
			}
			for i := range got {
				if got[i].Seq != uint64(i+1) || !bytes.Equal(got[i].Line, recs[i].Line) || got[i].LineNo != recs[i].LineNo {
					t.Errorf("record %d read back as %+v, written %+v", i, got[i], recs[i])
				}
			}
			sum, err := Verify(segs...)
			if err != nil || sum.Records != uint64(len(recs)) || sum.Files != files || sum.Head != l.Head() {
				t.Fatalf("Verify: %+v, %v", sum, err)
			}

			// Reopening continues the chain, both via Reopen and a new Open.
			if err := l.Reopen(); err != nil {
				t.Fatal(err)
			}
			head := l.Head()
			l.Close()
			l = openLog(t, path, Options{MaxBytes: tt.maxBytes})
			if l.LastSeq() != uint64(len(recs)) || l.Head() != head {
				t.Fatalf("after reopen: LastSeq %d, Head %s", l.LastSeq(), l.Head())
			}
			_, _, more := writeCalls(t, l, 6)
			if more[0].Seq != uint64(len(recs))+1 || more[0].Prev != head {
				t.Errorf("first record after reopen: %+v", more[0])
			}
			if sum, err := Verify(segments(t, path)...); err != nil || sum.Records != l.LastSeq() {
				t.Errorf("Verify after reopen: %+v, %v", sum, err)
			}
		})
	}
}

// TestReopenAfterRotation covers the states a crash during rotation can
// leave: the active file empty, missing, or holding only a torn line.
func TestReopenAfterRotation(t *testing.T) {
	tests := []struct {
		name   string
		active func(path string) error // what is left at the active path
		cut    int64
	}{
		{"active file empty", func(p string) error { return os.WriteFile(p, nil, 0o640) }, 0},
		{"active file missing", func(string) error { return nil }, 0},
		{"active file holds a torn line", func(p string) error { return os.WriteFile(p, []byte(`{"v":1,"ki`), 0o640) }, 10},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			path := tempLog(t)
			l := openLog(t, path, Options{MaxBytes: 600})
			recs := fill(t, l, 20)
			l.Close()
			// Rotate the active file by hand, as rotate() would have.
			if err := os.Rename(path, SegmentName(path, lastFirstSeq(t, path))); err != nil {
				t.Fatal(err)
			}
			if err := tt.active(path); err != nil {
				t.Fatal(err)
			}
			l = openLog(t, path, Options{MaxBytes: 600})
			last := recs[len(recs)-1]
			if l.LastSeq() != last.Seq || l.Head() != sha(last.Line) || l.Recovered() != tt.cut {
				t.Fatalf("LastSeq %d, Head %s, Recovered %d; want %d, hash of the last line, %d",
					l.LastSeq(), l.Head(), l.Recovered(), last.Seq, tt.cut)
			}
			r, err := l.Append(KindEvent, testEvent{ID: "after"})
			if err != nil || r.Seq != last.Seq+1 || r.Prev != sha(last.Line) || r.LineNo != 1 {
				t.Fatalf("append: %+v, %v", r, err)
			}
			if sum, err := Verify(segments(t, path)...); err != nil || sum.Records != last.Seq+1 {
				t.Errorf("Verify: %+v, %v", sum, err)
			}
		})
	}
}

// lastFirstSeq returns the seq of the first record of the active file.
func lastFirstSeq(t *testing.T, path string) uint64 {
	t.Helper()
	rec, err := NewReader(path).Next()
	if err != nil {
		t.Fatal(err)
	}
	return rec.Seq
}

func TestOpenRefusesBadSegment(t *testing.T) {
	tests := []struct {
		name string
		edit func(t *testing.T, path string) // leaves the active file empty
		want string
	}{
		{"segment misnamed", func(t *testing.T, path string) {
			os.Rename(path, SegmentName(path, lastFirstSeq(t, path)+1))
		}, "segment name says"},
		{"newest segment has a torn tail", func(t *testing.T, path string) {
			seg := SegmentName(path, lastFirstSeq(t, path))
			os.Rename(path, seg)
			f, _ := os.OpenFile(seg, os.O_WRONLY|os.O_APPEND, 0)
			f.WriteString(`{"v":1`)
			f.Close()
		}, "missing final newline"},
		{"newest segment empty", func(t *testing.T, path string) {
			seg := SegmentName(path, 1000)
			writeFile(t, seg, nil)
			os.Remove(path)
		}, "is empty"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			path := tempLog(t)
			l := openLog(t, path, Options{MaxBytes: 500})
			fill(t, l, 12)
			l.Close()
			tt.edit(t, path)
			if _, err := Open(path, Options{}); err == nil || !strings.Contains(err.Error(), tt.want) {
				t.Errorf("Open: %v, want an error containing %q", err, tt.want)
			}
		})
	}
}

// TestRotationFailure: a rotation that cannot rename (the segment name is
// taken) fails the log; once the obstacle is gone, Reopen resumes it and
// the next append rotates as it should have.
func TestRotationFailure(t *testing.T) {
	path := tempLog(t)
	l := openLog(t, path, Options{MaxBytes: 300})
	fill(t, l, 2)
	blocker := SegmentName(path, 1)
	writeFile(t, blocker, []byte("not a segment\n"))
	var err error
	for i := 0; err == nil && i < 10; i++ {
		_, err = l.Append(KindEvent, testEvent{ID: fmt.Sprint("r", i)})
	}
	if !errors.Is(err, ErrFailed) || !strings.Contains(err.Error(), "already exists") {
		t.Fatalf("append needing rotation: %v, want ErrFailed (segment exists)", err)
	}
	if _, err := l.Append(KindEvent, testEvent{}); !errors.Is(err, ErrFailed) {
		t.Fatalf("append in failed state: %v", err)
	}
	os.Remove(blocker)
	if err := l.Reopen(); err != nil {
		t.Fatal(err)
	}
	before := l.LastSeq()
	r, err := l.Append(KindEvent, testEvent{ID: "after"})
	if err != nil || r.Seq != before+1 || r.LineNo != 1 {
		t.Fatalf("append after Reopen: %+v, %v", r, err)
	}
	segs := segments(t, path)
	if len(segs) != 2 || segs[0] != blocker {
		t.Errorf("segments %q", segs)
	}
	if sum, err := Verify(segs...); err != nil || sum.Records != before+1 || sum.Head != sha(r.Line) {
		t.Errorf("Verify: %+v, %v", sum, err)
	}
}

// TestReopenFailure: Reopen of a file that was corrupted while open fails
// and leaves the log failed; after repair, Reopen clears the failed state.
func TestReopenFailure(t *testing.T) {
	path := tempLog(t)
	l := openLog(t, path, Options{})
	fill(t, l, 5)
	good := readFile(t, path)
	ls := splitLines(good)
	ls[1] = []byte("scribble")
	writeFile(t, path, joinLines(ls))
	err := l.Reopen()
	if err == nil || !strings.Contains(err.Error(), path+":2: not valid JSON") {
		t.Fatalf("Reopen of a corrupt file: %v", err)
	}
	if _, err := l.Append(KindEvent, testEvent{}); !errors.Is(err, ErrFailed) {
		t.Fatalf("append after failed Reopen: %v, want ErrFailed", err)
	}
	writeFile(t, path, good)
	if err := l.Reopen(); err != nil {
		t.Fatal(err)
	}
	if r, err := l.Append(KindEvent, testEvent{}); err != nil || r.Seq != 6 {
		t.Fatalf("append after repair: %+v, %v", r, err)
	}
}
