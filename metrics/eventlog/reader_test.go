package eventlog

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// readAll drains a Reader, returning the records and, per record, the
// error text ("" for none).
func readAll(t *testing.T, r *Reader) ([]Record, []string) {
	t.Helper()
	var recs []Record
	var errs []string
	for range 1000 {
		rec, err := r.Next()
		if err == io.EOF {
			return recs, errs
		}
		var ve *VerifyError
		if err != nil && !errors.As(err, &ve) {
			t.Fatalf("Next: %v", err)
		}
		recs = append(recs, rec)
		if err != nil {
			errs = append(errs, err.Error())
		} else {
			errs = append(errs, "")
		}
	}
	t.Fatal("reader does not end")
	return nil, nil
}

func TestReaderLines(t *testing.T) {
	good := chain(
		[2]string{KindEvent, `"id":"a"`},
		[2]string{KindCapture, `"capture":"c"`},
		[2]string{KindEvent, `"id":"b"`},
	)
	gl := splitLines(good)
	tests := []struct {
		name string
		data string
		errs []string // per line: "" or a part of the error
	}{
		{"records", string(good), []string{"", "", ""}},
		{"empty file", "", nil},
		{"bad line in the middle does not stop reading",
			string(gl[0]) + "\nnope\n" + string(gl[1]) + "\n", []string{"", "f:2: not valid JSON", ""}},
		{"missing final newline", string(gl[0]) + "\n" + string(gl[1]), []string{"", "f:2: missing final newline"}},
		{"not an object", "[1]\n\"s\"\n3\nnull\ntrue\n", []string{
			"not a JSON object (it is an array)", "(it is a string)", "(it is a number)", "(it is null)", "(it is a boolean)"}},
		// The reader checks each line's header, but not the chain.
		{"chain not checked", string(gl[2]) + "\n" + string(gl[0]) + "\n", []string{"", ""}},
		{"CRLF line", string(gl[0]) + "\r\n", []string{""}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			path := filepath.Join(t.TempDir(), "f")
			writeFile(t, path, []byte(tt.data))
			recs, errs := readAll(t, NewReader(path))
			if len(errs) != len(tt.errs) {
				t.Fatalf("%d lines read (%q), want %d", len(errs), errs, len(tt.errs))
			}
			var rebuilt []byte
			for i, e := range errs {
				if (tt.errs[i] == "") != (e == "") || !strings.Contains(e, tt.errs[i]) {
					t.Errorf("line %d: error %q, want %q", i+1, e, tt.errs[i])
				}
				if recs[i].LineNo != i+1 || recs[i].File != path {
					t.Errorf("line %d: File %q LineNo %d", i+1, recs[i].File, recs[i].LineNo)
				}
				rebuilt = append(rebuilt, recs[i].Line...)
				if i < len(errs)-1 || strings.HasSuffix(tt.data, "\n") {
					rebuilt = append(rebuilt, '\n')
				}
			}
			if string(rebuilt) != tt.data {
				t.Errorf("lines do not add up to the file:\n%q\n%q", rebuilt, tt.data)
			}
		})
	}
}

func TestReaderFields(t *testing.T) {
	path := tempLog(t)
	l := openLog(t, path, Options{MaxBytes: 300})
	want := fill(t, l, 12)
	segs := segments(t, path)
	got, errs := readAll(t, NewReader(segs...))
	if len(got) != len(want) {
		t.Fatalf("read %d records, wrote %d", len(got), len(want))
	}
	for i := range got {
		w := want[i]
		w.File = got[i].File // Append names the active file; it has since been rotated
		if errs[i] != "" || fmt.Sprint(got[i]) != fmt.Sprint(w) {
			t.Errorf("record %d: %+v (%s), want %+v", i, got[i], errs[i], w)
		}
	}
	// Reading past the end keeps returning io.EOF.
	r := NewReader(path)
	readAll(t, r)
	if _, err := r.Next(); err != io.EOF {
		t.Errorf("Next after EOF: %v", err)
	}
}

func TestReaderLongLine(t *testing.T) {
	// A record of exactly MaxLine bytes is read; one byte more is refused
	// without being kept, and reading goes on at the next line.
	rec := func(seq uint64, total int) string {
		l := contractLine(KindEvent, seq, zeros64, `"pad":""`)
		return contractLine(KindEvent, seq, zeros64, `"pad":"`+strings.Repeat("p", total-len(l))+`"`)
	}
	small := contractLine(KindEvent, 3, zeros64, "")
	data := rec(1, MaxLine) + "\n" + rec(2, MaxLine+1) + "\n" + small + "\n"
	path := filepath.Join(t.TempDir(), "long.jsonl")
	writeFile(t, path, []byte(data))
	recs, errs := readAll(t, NewReader(path))
	if len(recs) != 3 {
		t.Fatalf("%d lines", len(recs))
	}
	if errs[0] != "" || len(recs[0].Line) != MaxLine || recs[0].Seq != 1 {
		t.Errorf("line of MaxLine bytes: %d bytes, %q", len(recs[0].Line), errs[0])
	}
	if want := fmt.Sprintf("%s:2: line longer than %d bytes", path, MaxLine); errs[1] != want || recs[1].Line != nil {
		t.Errorf("long line: %q, want %q", errs[1], want)
	}
	if errs[2] != "" || string(recs[2].Line) != small || recs[2].LineNo != 3 {
		t.Errorf("line after the long one: %+v %q", recs[2], errs[2])
	}
}

func TestReaderMissingFile(t *testing.T) {
	dir := t.TempDir()
	a := filepath.Join(dir, "a.jsonl")
	writeFile(t, a, chain([2]string{KindEvent, ""}))
	r := NewReader(a, filepath.Join(dir, "missing.jsonl"))
	if _, err := r.Next(); err != nil {
		t.Fatal(err)
	}
	_, err := r.Next()
	if !errors.Is(err, os.ErrNotExist) || !strings.Contains(err.Error(), "missing.jsonl") {
		t.Errorf("missing file: %v", err)
	}
	if _, err2 := r.Next(); err2 == nil || err2 == io.EOF {
		t.Errorf("the error is not sticky: %v", err2)
	}
}

func TestReaderClose(t *testing.T) {
	path := tempLog(t)
	l := openLog(t, path, Options{})
	fill(t, l, 3)
	r := NewReader(path)
	if _, err := r.Next(); err != nil {
		t.Fatal(err)
	}
	if err := r.Close(); err != nil {
		t.Fatal(err)
	}
	if _, err := r.Next(); err == nil || err == io.EOF {
		t.Errorf("Next after Close: %v", err)
	}
}

func TestDecode(t *testing.T) {
	path := tempLog(t)
	l := openLog(t, path, Options{})
	rec, err := l.Append(KindCapture, testCapture{Capture: "a/b.sigmf-meta", Status: "quarantined", Events: 0})
	if err != nil {
		t.Fatal(err)
	}
	var got struct {
		V       int    `json:"v"`
		Kind    string `json:"kind"`
		Seq     uint64 `json:"seq"`
		Prev    string `json:"prev"`
		Capture string `json:"capture"`
		Status  string `json:"status"`
	}
	if err := rec.Decode(&got); err != nil {
		t.Fatal(err)
	}
	if got.V != 1 || got.Kind != KindCapture || got.Seq != 1 || got.Prev != zeros64 || got.Capture != "a/b.sigmf-meta" || got.Status != "quarantined" {
		t.Errorf("decoded %+v", got)
	}
	bad := Record{Line: []byte("{"), File: "f", LineNo: 9}
	if err := bad.Decode(&got); err == nil || !strings.HasPrefix(err.Error(), "eventlog: f:9: ") {
		t.Errorf("Decode of a bad line: %v", err)
	}
}

func TestScan(t *testing.T) {
	path := tempLog(t)
	l := openLog(t, path, Options{MaxBytes: 250})
	want := fill(t, l, 10)
	var seqs []uint64
	err := Scan(path, func(r Record) error {
		seqs = append(seqs, r.Seq)
		if !bytes.Equal(r.Line, want[len(seqs)-1].Line) {
			t.Errorf("record %d differs", r.Seq)
		}
		return nil
	})
	if err != nil || len(seqs) != len(want) {
		t.Fatalf("Scan: %d records, %v", len(seqs), err)
	}
	stop := errors.New("stop")
	n := 0
	err = Scan(path, func(Record) error {
		if n++; n == 4 {
			return stop
		}
		return nil
	})
	if err != stop || n != 4 {
		t.Errorf("Scan did not stop on the callback's error: %v after %d", err, n)
	}
}

func TestScanFrom(t *testing.T) {
	// 40 records over 250-byte files: about a dozen rotated segments.
	path := tempLog(t)
	l := openLog(t, path, Options{MaxBytes: 250})
	want := fill(t, l, 40)
	segs := segments(t, path)
	if len(segs) < 6 {
		t.Fatalf("%d files, want at least 6", len(segs))
	}
	// firsts[i] is the seq of the first record of segs[i], read from the
	// files themselves (the contract: a segment is named after it).
	firsts := make([]uint64, len(segs))
	for i, s := range segs {
		var r Record
		if err := json.Unmarshal(splitLines(readFile(t, s))[0], &r); err != nil {
			t.Fatal(err)
		}
		firsts[i] = r.Seq
	}
	scan := func(from uint64) ([]uint64, error) {
		var got []uint64
		err := ScanFrom(path, from, func(r Record) error {
			if !bytes.Equal(r.Line, want[r.Seq-1].Line) {
				t.Errorf("record %d differs from the one written", r.Seq)
			}
			got = append(got, r.Seq)
			return nil
		})
		return got, err
	}
	seqs := func(from uint64) []uint64 {
		var s []uint64
		for q := max(from, 1); q <= uint64(len(want)); q++ {
			s = append(s, q)
		}
		return s
	}
	k := len(segs) / 2
	tests := []struct {
		name string
		from uint64
	}{
		{"zero", 0},
		{"first", 1},
		{"inside the first segment", 2},
		{"first of a middle segment", firsts[k]},
		{"last of a middle segment", firsts[k+1] - 1},
		{"first of the active file", firsts[len(firsts)-1]},
		{"last record", uint64(len(want))},
		{"past the end", uint64(len(want)) + 1},
		{"far past the end", 1 << 40},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := scan(tt.from)
			if err != nil {
				t.Fatal(err)
			}
			if !slices.Equal(got, seqs(tt.from)) {
				t.Errorf("ScanFrom(%d): seqs %v, want %v", tt.from, got, seqs(tt.from))
			}
		})
	}

	// The older files are not read: spoil every segment before segs[k]
	// (and segs[k+1] … but the active file, keeping their names), then the
	// reading from a seq in segs[k] must not notice, while Scan does.
	garbage := []byte("not a record\n")
	for _, s := range segs[:k] {
		writeFile(t, s, garbage)
	}
	if got, err := scan(firsts[k] + 1); err != nil || !slices.Equal(got, seqs(firsts[k]+1)) {
		t.Errorf("ScanFrom after the spoiled segments: %v, %v", got, err)
	}
	if err := Scan(path, func(Record) error { return nil }); err == nil {
		t.Error("Scan over the spoiled segments reports nothing: the check above proves nothing")
	}
	if _, err := scan(firsts[k-1]); err == nil {
		t.Error("ScanFrom starting in a spoiled segment reports nothing")
	}
	for _, s := range segs[k : len(segs)-1] {
		writeFile(t, s, garbage)
	}
	// The active file's first seq comes from its first line, so the
	// newest rotated segment is not needed either.
	last := firsts[len(firsts)-1]
	if got, err := scan(last); err != nil || !slices.Equal(got, seqs(last)) {
		t.Errorf("ScanFrom the active file's first seq: %v, %v", got, err)
	}

	stop := errors.New("stop")
	n := 0
	if err := ScanFrom(path, last, func(Record) error { n++; return stop }); err != stop || n != 1 {
		t.Errorf("ScanFrom did not stop on the callback's error: %v after %d", err, n)
	}
}

func TestScanFromEdges(t *testing.T) {
	tests := []struct {
		name  string
		setup func(t *testing.T, path string) // makes the log
		from  uint64
		want  []uint64
		err   string // part of the error, "" for none
	}{
		{"no log at all", func(t *testing.T, path string) {}, 1, nil, ""},
		{"empty active file", func(t *testing.T, path string) { writeFile(t, path, nil) }, 1, nil, ""},
		{"oldest segments archived", func(t *testing.T, path string) {
			// Segments starting at seq 4 and 6 only: from 1 gives what is left.
			ls := splitLines(chain([2]string{KindEvent, `"id":"a"`}, [2]string{KindEvent, `"id":"b"`},
				[2]string{KindEvent, `"id":"c"`}, [2]string{KindEvent, `"id":"d"`}, [2]string{KindCapture, `"capture":"x"`},
				[2]string{KindEvent, `"id":"e"`}, [2]string{KindCapture, `"capture":"y"`}))
			writeFile(t, SegmentName(path, 4), joinLines(ls[3:5]))
			writeFile(t, path, joinLines(ls[5:]))
		}, 1, []uint64{4, 5, 6, 7}, ""},
		{"active file empty after a segment", func(t *testing.T, path string) {
			writeFile(t, SegmentName(path, 1), chain([2]string{KindEvent, `"id":"a"`}, [2]string{KindCapture, `"capture":"x"`}))
			writeFile(t, path, nil)
		}, 2, []uint64{2}, ""},
		{"malformed first line of the active file", func(t *testing.T, path string) {
			writeFile(t, SegmentName(path, 1), chain([2]string{KindEvent, `"id":"a"`}, [2]string{KindCapture, `"capture":"x"`}))
			writeFile(t, path, []byte("{\"v\":1}\n"))
		}, 2, []uint64{2}, "events.jsonl:1"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			path := tempLog(t)
			tt.setup(t, path)
			var got []uint64
			err := ScanFrom(path, tt.from, func(r Record) error { got = append(got, r.Seq); return nil })
			if tt.err == "" && err != nil || tt.err != "" && (err == nil || !strings.Contains(err.Error(), tt.err)) {
				t.Errorf("error %v, want %q", err, tt.err)
			}
			if !slices.Equal(got, tt.want) {
				t.Errorf("seqs %v, want %v", got, tt.want)
			}
		})
	}
}
