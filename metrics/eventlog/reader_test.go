package eventlog

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
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
