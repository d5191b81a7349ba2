package eventlog

import (
	"bytes"
	"errors"
	"io"
	"os"
	"path/filepath"
	"testing"
)

// fuzzSeeds are byte strings that reach the interesting paths: a valid
// chain, a torn tail, a break in the chain, odd JSON.
func fuzzSeeds() [][]byte {
	ok := chain([2]string{KindEvent, `"id":"a","start":"2026-01-02T03:04:05.5Z"`}, [2]string{KindCapture, `"capture":"c","end":"x"`})
	return [][]byte{
		nil,
		ok,
		ok[:len(ok)-7],
		append(bytes.Clone(ok), "garbage\n"...),
		append(append([]byte("x\n"), ok...), '\n'),
		[]byte("\n\n\n"),
		[]byte(`{"v":1,"kind":"event","seq":1,"prev":"` + zeros64 + `","seq":1}` + "\n"),
		[]byte(`{"\u0076":1,"kind":"capture","seq":1,"prev":"` + zeros64 + `"}` + "\n"),
		[]byte("{\"v\":1,\"kind\":\"ev\xffent\"}\n[]\n\"\"\n"),
	}
}

// FuzzReader reads arbitrary bytes as a log file: the reader must not
// panic, and the lines it returns must add up to the input.
func FuzzReader(f *testing.F) {
	for _, s := range fuzzSeeds() {
		f.Add(s)
	}
	// One file per fuzzing process, rewritten for every input: calls of
	// the fuzz function within a process run one after the other.
	path := filepath.Join(f.TempDir(), "f.jsonl")
	f.Fuzz(func(t *testing.T, data []byte) {
		writeFile(t, path, data)
		r := NewReader(path)
		defer r.Close()
		var rebuilt []byte
		for want := 1; ; want++ {
			rec, err := r.Next()
			if err == io.EOF {
				break
			}
			var ve *VerifyError
			if err != nil && !errors.As(err, &ve) {
				t.Fatalf("Next: %v", err)
			}
			if want > len(data)+1 {
				t.Fatalf("more lines than bytes")
			}
			if rec.LineNo != want || rec.File != path || bytes.IndexByte(rec.Line, '\n') >= 0 {
				t.Fatalf("record %+v at line %d", rec, want)
			}
			rebuilt = append(rebuilt, rec.Line...)
			if len(rebuilt) < len(data) {
				rebuilt = append(rebuilt, '\n')
			}
			if err == nil {
				if rec.Seq == 0 || (rec.Kind != KindEvent && rec.Kind != KindCapture) || !isHash(rec.Prev) {
					t.Fatalf("accepted record with a bad header: %+v", rec)
				}
				var m map[string]any
				if err := rec.Decode(&m); err != nil {
					t.Fatalf("accepted line does not decode: %v", err)
				}
			}
		}
		if !bytes.Equal(rebuilt, data) {
			t.Fatalf("lines do not add up to the input:\n%q\n%q", rebuilt, data)
		}
	})
}

// FuzzVerify verifies arbitrary bytes as a log: no panic, and whatever
// verifies is also what Open recovers, with nothing to cut.
func FuzzVerify(f *testing.F) {
	for _, s := range fuzzSeeds() {
		f.Add(s)
	}
	path := filepath.Join(f.TempDir(), "events.jsonl")
	f.Fuzz(func(t *testing.T, data []byte) {
		writeFile(t, path, data)
		sum, err := Verify(path)
		if err != nil {
			var ve *VerifyError
			if !errors.As(err, &ve) {
				t.Fatalf("Verify: %v", err)
			}
			if ve.Line < 1 || ve.Line > bytes.Count(data, []byte("\n"))+1 || ve.Seq != sum.Records+1 {
				t.Fatalf("error at line %d, seq %d, after %d records", ve.Line, ve.Seq, sum.Records)
			}
			return
		}
		if sum.Records != uint64(bytes.Count(data, []byte("\n"))) || sum.Events+sum.Captures != sum.Records {
			t.Fatalf("summary %+v for %d lines", sum, bytes.Count(data, []byte("\n")))
		}
		l, err := Open(path, Options{})
		if err != nil {
			t.Fatalf("Open of a verified log: %v", err)
		}
		defer l.Close()
		if l.LastSeq() != sum.Records || l.Head() != sum.Head || l.Recovered() != 0 {
			t.Fatalf("Open: LastSeq %d Head %s Recovered %d; Verify: %+v", l.LastSeq(), l.Head(), l.Recovered(), sum)
		}
	})
}

// FuzzOpen opens arbitrary bytes as the active file: no panic; a refused
// open leaves the file alone, an accepted one only cuts a tail.
func FuzzOpen(f *testing.F) {
	for _, s := range fuzzSeeds() {
		f.Add(s)
	}
	path := filepath.Join(f.TempDir(), "events.jsonl")
	f.Fuzz(func(t *testing.T, data []byte) {
		writeFile(t, path, data)
		l, err := Open(path, Options{})
		after, rerr := os.ReadFile(path)
		if rerr != nil {
			t.Fatal(rerr)
		}
		if err != nil {
			if !bytes.Equal(after, data) {
				t.Fatalf("refused Open changed the file")
			}
			return
		}
		defer l.Close()
		if !bytes.HasPrefix(data, after) || int64(len(data)-len(after)) != l.Recovered() {
			t.Fatalf("Open kept %d of %d bytes, Recovered %d", len(after), len(data), l.Recovered())
		}
		if r, err := l.Append(KindEvent, testEvent{ID: "fuzz"}); err != nil || r.Seq != l.LastSeq() {
			t.Fatalf("append after Open: %+v, %v", r, err)
		}
	})
}
