package eventlog

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"testing"
)

// TestSHA256KnownAnswers anchors crypto/sha256, which the tests use to
// compute expected prev values, to the published SHA-256.
func TestSHA256KnownAnswers(t *testing.T) {
	tests := []struct {
		msg, want string
	}{
		// FIPS 180-2 Appendix B.1 (one-block message), as also given in
		// NIST's SHA-256 example document; value from memory, it matches.
		{"abc", "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"},
		// FIPS 180-2 Appendix B.2 (two-block message); from memory.
		{"abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq",
			"248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1"},
		// SHA-256 of the empty message, widely published; from memory.
		{"", "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855"},
	}
	for _, tt := range tests {
		if got := sha([]byte(tt.msg)); got != tt.want {
			t.Errorf("SHA-256(%q) = %s, want %s", tt.msg, got, tt.want)
		}
	}
}

// TestAppendContractBytes checks the exact bytes of each record against the
// record contract of DESIGN.md ("Event log"), spelled out independently in
// contractLine, with prev computed by crypto/sha256 (FIPS 180-4).
func TestAppendContractBytes(t *testing.T) {
	tests := []struct {
		name    string
		kind    string
		body    any
		members string // the body's members as they must appear
	}{
		{"struct event", KindEvent, struct {
			ID string `json:"id"`
		}{"x"}, `"id":"x"`},
		{"empty map gives no trailing comma", KindCapture, map[string]any{}, ``},
		{"empty struct", KindEvent, struct{}{}, ``},
		{"raw message is compacted", KindEvent, json.RawMessage(`{ "a" : [1, {"b":"}"}] ,
			"Seq": 2 }`), `"a":[1,{"b":"}"}],"Seq":2`},
		{"newline and markup escaped", KindCapture, map[string]string{"error": "a\nb <x>"},
			`"error":"a\nb \u003cx\u003e"`},
		{"numbers", KindEvent, map[string]any{"jn_db": 12.5, "sample_start": int64(1)<<53 + 1},
			`"jn_db":12.5,"sample_start":9007199254740993`},
		{"non-ASCII kept as UTF-8", KindEvent, map[string]string{"site": "Zürich ☂"}, `"site":"Zürich ☂"`},
	}
	path := tempLog(t)
	l := openLog(t, path, Options{})
	var want bytes.Buffer
	prev := zeros64 // DESIGN.md: 64 zeros for the first record
	for i, tt := range tests {
		seq := uint64(i + 1)
		line := contractLine(tt.kind, seq, prev, tt.members)
		rec, err := l.Append(tt.kind, tt.body)
		if err != nil {
			t.Fatalf("%s: %v", tt.name, err)
		}
		if string(rec.Line) != line {
			t.Errorf("%s:\n got %s\nwant %s", tt.name, rec.Line, line)
		}
		wantRec := Record{Seq: seq, Kind: tt.kind, Prev: prev, File: path, LineNo: i + 1}
		rec.Line = nil
		if fmt.Sprint(rec) != fmt.Sprint(wantRec) {
			t.Errorf("%s: record %+v, want %+v", tt.name, rec, wantRec)
		}
		want.WriteString(line + "\n")
		prev = sha([]byte(line))
		if l.LastSeq() != seq || l.Head() != prev {
			t.Errorf("%s: LastSeq, Head = %d, %s; want %d, %s", tt.name, l.LastSeq(), l.Head(), seq, prev)
		}
	}
	if got := readFile(t, path); !bytes.Equal(got, want.Bytes()) {
		t.Errorf("file content:\n%s\nwant:\n%s", got, want.Bytes())
	}
	// The first line byte for byte, as in the task statement.
	first := `{"v":1,"kind":"event","seq":1,"prev":"0000000000000000000000000000000000000000000000000000000000000000","id":"x"}`
	if got := splitLines(readFile(t, path))[0]; string(got) != first {
		t.Errorf("line 1 = %s, want %s", got, first)
	}
	// Line 2's prev is the SHA-256 of line 1's bytes.
	var r2 struct{ Prev string }
	json.Unmarshal(splitLines(readFile(t, path))[1], &r2)
	if h := sha256.Sum256([]byte(first)); r2.Prev != hex.EncodeToString(h[:]) {
		t.Errorf("line 2 prev %s, want SHA-256 of line 1", r2.Prev)
	}
}

func TestAppendRejects(t *testing.T) {
	tests := []struct {
		name string
		kind string
		body any
		want string // part of the error
	}{
		{"unknown kind", "alarm", testEvent{}, `kind "alarm"`},
		{"empty kind", "", testEvent{}, `kind ""`},
		{"kind is case sensitive", "Event", testEvent{}, `kind "Event"`},
		{"nil body", KindEvent, nil, "not a JSON object"},
		{"nil map", KindEvent, map[string]any(nil), "not a JSON object"},
		{"array body", KindEvent, []int{1}, "not a JSON object"},
		{"string body", KindCapture, "x", "not a JSON object"},
		{"number body", KindCapture, 42, "not a JSON object"},
		{"seq member", KindEvent, map[string]int{"seq": 1}, `"seq"`},
		{"v member", KindEvent, struct {
			V int `json:"v"`
		}{2}, `"v"`},
		{"kind member", KindCapture, map[string]string{"kind": "x"}, `"kind"`},
		{"prev member", KindEvent, map[string]string{"id": "a", "prev": ""}, `"prev"`},
		{"escaped header key", KindEvent, json.RawMessage(`{"\u0073eq":1}`), `"\u0073eq"`},
		{"unmarshalable", KindEvent, map[string]any{"c": make(chan int)}, "unsupported type"},
		{"invalid raw JSON", KindEvent, json.RawMessage(`{bad`), "invalid character"},
	}
	path := tempLog(t)
	l := openLog(t, path, Options{})
	fill(t, l, 2)
	before := readFile(t, path)
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := l.Append(tt.kind, tt.body)
			if err == nil || !strings.Contains(err.Error(), tt.want) {
				t.Fatalf("error %v, want one containing %s", err, tt.want)
			}
			if errors.Is(err, ErrFailed) {
				t.Errorf("a bad body must not fail the log: %v", err)
			}
			// A valid item in the same batch is not written either.
			_, err = l.AppendBatch([]Item{{KindEvent, testEvent{ID: "ok"}}, {tt.kind, tt.body}})
			if err == nil {
				t.Errorf("batch with a bad item accepted")
			}
			if got := readFile(t, path); !bytes.Equal(got, before) || l.LastSeq() != 2 {
				t.Errorf("log changed by a rejected append (LastSeq %d)", l.LastSeq())
			}
		})
	}
	if err := l.Err(); err != nil {
		t.Errorf("Err() = %v after rejected appends", err)
	}
	if _, err := l.Append(KindEvent, testEvent{ID: "next"}); err != nil {
		t.Errorf("append after rejections: %v", err)
	}
}

func TestAppendTooLong(t *testing.T) {
	header := len(contractLine(KindEvent, 1, zeros64, `"pad":""`))
	tests := []struct {
		pad int
		ok  bool
	}{
		{MaxLine - header, true},       // exactly MaxLine bytes
		{MaxLine - header + 10, false}, // longer than MaxLine
	}
	for _, tt := range tests {
		// A fresh log each time, so the record has seq 1 and the header
		// length is known.
		l2 := openLog(t, tempLog(t), Options{})
		rec, err := l2.Append(KindEvent, map[string]string{"pad": strings.Repeat("a", tt.pad)})
		if tt.ok != (err == nil) {
			t.Errorf("pad %d: error %v, want ok=%v", tt.pad, err, tt.ok)
		}
		if tt.ok && len(rec.Line) != MaxLine {
			t.Errorf("line length %d, want %d", len(rec.Line), MaxLine)
		}
		if !tt.ok && l2.LastSeq() != 0 {
			t.Errorf("too long record written")
		}
	}
}

func TestAppendBatch(t *testing.T) {
	path := tempLog(t)
	l := openLog(t, path, Options{})
	if recs, err := l.AppendBatch(nil); err != nil || recs != nil {
		t.Fatalf("empty batch: %v, %v", recs, err)
	}
	items := []Item{
		{KindEvent, testEvent{ID: "a", N: 1}},
		{KindEvent, testEvent{ID: "b", N: 2}},
		{KindEvent, testEvent{ID: "c", N: 3}},
		{KindCapture, testCapture{Capture: "x.sigmf-meta", Status: "ok", Events: 3}},
	}
	recs, err := l.AppendBatch(items)
	if err != nil {
		t.Fatal(err)
	}
	// DESIGN.md record contract, chained with crypto/sha256 (FIPS 180-4).
	want := chain(
		[2]string{KindEvent, `"id":"a","n":1`},
		[2]string{KindEvent, `"id":"b","n":2`},
		[2]string{KindEvent, `"id":"c","n":3`},
		[2]string{KindCapture, `"capture":"x.sigmf-meta","status":"ok","events":3`},
	)
	if got := readFile(t, path); !bytes.Equal(got, want) {
		t.Fatalf("batch bytes:\n%s\nwant:\n%s", got, want)
	}
	lines := splitLines(want)
	for i, r := range recs {
		if r.Seq != uint64(i+1) || r.LineNo != i+1 || r.Kind != items[i].Kind || !bytes.Equal(r.Line, lines[i]) {
			t.Errorf("record %d = %+v", i, r)
		}
	}
	// Returned lines must not share spare capacity: appending to one must
	// not overwrite the next.
	_ = append(recs[0].Line, 'X')
	if !bytes.Equal(recs[1].Line, lines[1]) {
		t.Errorf("record lines alias each other")
	}
	r, err := l.Append(KindEvent, testEvent{ID: "d"})
	if err != nil || r.Seq != 5 || r.Prev != sha(lines[3]) {
		t.Errorf("append after batch: %+v, %v", r, err)
	}
}

// faultMode selects what faultyFile does on the next call.
const (
	faultNone        = iota
	faultWriteHalf   // write half of the bytes, then report ENOSPC
	faultShortWrite  // write half of the bytes and report no error
	faultSync        // write everything, fail the sync with EIO
	faultWriteNoData // report ENOSPC without writing
)

// faultyFile stands between the Log and its file (Options.wrap) to make
// writes and syncs fail the way a full or failing disk does.
type faultyFile struct {
	f    *os.File
	mode *atomic.Int32
}

func (ff *faultyFile) Write(b []byte) (int, error) {
	switch ff.mode.Load() {
	case faultWriteHalf:
		n, _ := ff.f.Write(b[:len(b)/2])
		return n, syscall.ENOSPC
	case faultShortWrite:
		return ff.f.Write(b[:len(b)/2])
	case faultWriteNoData:
		return 0, syscall.ENOSPC
	}
	return ff.f.Write(b)
}

func (ff *faultyFile) Sync() error {
	if ff.mode.Load() == faultSync {
		return syscall.EIO
	}
	return ff.f.Sync()
}

func TestFailedState(t *testing.T) {
	const n = 4
	batch := []Item{
		{KindEvent, testEvent{ID: "b1"}},
		{KindEvent, testEvent{ID: "b2"}},
		{KindCapture, testCapture{Capture: "b", Status: "ok", Events: 2}},
	}
	tests := []struct {
		name      string
		mode      int32
		items     []Item
		cause     error
		recovered bool   // a torn tail is left for Reopen to cut
		lastSeq   uint64 // after Reopen
	}{
		{"write fails half way", faultWriteHalf, batch[:1], syscall.ENOSPC, true, n},
		{"short write", faultShortWrite, batch[:1], io.ErrShortWrite, true, n},
		{"write fails before any byte", faultWriteNoData, batch[:1], syscall.ENOSPC, false, n},
		// The line reached the file; only its durability is unknown.
		{"sync fails", faultSync, batch[:1], syscall.EIO, false, n + 1},
		// Half of the batch's bytes hold the first whole line: it stays.
		{"batch torn after its first line", faultWriteHalf, batch, syscall.ENOSPC, true, n + 1},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			var mode atomic.Int32
			var logs bytes.Buffer
			path := tempLog(t)
			l := openLog(t, path, Options{Logger: logBuffer(&logs), wrap: func(f *os.File) writeSyncer {
				return &faultyFile{f: f, mode: &mode}
			}})
			fill(t, l, n)
			good := readFile(t, path)
			mode.Store(tt.mode)
			_, err := l.AppendBatch(tt.items)
			if !errors.Is(err, ErrFailed) || !errors.Is(err, tt.cause) {
				t.Fatalf("append error %v, want ErrFailed and %v", err, tt.cause)
			}
			mode.Store(faultNone) // the disk is fine again, but the log stays failed
			if _, err := l.Append(KindEvent, testEvent{ID: "after"}); !errors.Is(err, ErrFailed) {
				t.Fatalf("append in failed state: %v, want ErrFailed", err)
			}
			if _, err := l.AppendBatch(batch); !errors.Is(err, ErrFailed) {
				t.Fatalf("batch in failed state: %v, want ErrFailed", err)
			}
			if err := l.Err(); !errors.Is(err, ErrFailed) {
				t.Errorf("Err() = %v", err)
			}
			if !strings.Contains(logs.String(), `"level":"ERROR"`) {
				t.Errorf("failure not logged: %s", logs.String())
			}
			if err := l.Reopen(); err != nil {
				t.Fatalf("Reopen: %v", err)
			}
			if err := l.Err(); err != nil {
				t.Errorf("Err() after Reopen = %v", err)
			}
			if got := l.Recovered() > 0; got != tt.recovered {
				t.Errorf("Recovered() = %d, want cut=%v", l.Recovered(), tt.recovered)
			}
			if l.LastSeq() != tt.lastSeq {
				t.Errorf("LastSeq() = %d, want %d", l.LastSeq(), tt.lastSeq)
			}
			r, err := l.Append(KindEvent, testEvent{ID: "resumed"})
			if err != nil || r.Seq != tt.lastSeq+1 {
				t.Fatalf("append after Reopen: %+v, %v", r, err)
			}
			after := readFile(t, path)
			if !bytes.HasPrefix(after, good) {
				t.Errorf("records before the failure were changed")
			}
			if _, err := Verify(path); err != nil {
				t.Errorf("Verify after recovery: %v", err)
			}
		})
	}
}

func TestTornTail(t *testing.T) {
	const n = 5
	next := contractLine(KindEvent, n+1, zeros64, `"id":"next"`) // prev is irrelevant: it is cut
	tests := []struct {
		name string
		tail string
	}{
		{"half a line", next[:len(next)/2]},
		{"whole record without newline", next},
		{"garbage line with newline", "#### not a record ####\n"},
		{"empty line", "\n"},
		{"NUL bytes of an unwritten page", strings.Repeat("\x00", 4096)},
		{"JSON object without header", `{"id":"x","class":"cw"}` + "\n"},
		{"header with a bad seq", `{"v":1,"kind":"event","seq":"6","prev":"` + zeros64 + `"}` + "\n"},
		{"invalid UTF-8", "{\"v\":1,\"kind\":\"event\xff\"}\n"},
		{"JSON array", "[1,2]\n"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			path := tempLog(t)
			l := openLog(t, path, Options{})
			recs := fill(t, l, n)
			l.Close()
			good := readFile(t, path)
			writeFile(t, path, append(bytes.Clone(good), tt.tail...))

			var logs bytes.Buffer
			l = openLog(t, path, Options{Logger: logBuffer(&logs)})
			if got := l.Recovered(); got != int64(len(tt.tail)) {
				t.Errorf("Recovered() = %d, want %d", got, len(tt.tail))
			}
			if l.LastSeq() != n || l.Head() != sha(recs[n-1].Line) {
				t.Errorf("LastSeq, Head = %d, %s; want %d, hash of line %d", l.LastSeq(), l.Head(), n, n)
			}
			if got := readFile(t, path); !bytes.Equal(got, good) {
				t.Errorf("after recovery the file is not the records before the tear")
			}
			var entry struct {
				Level, Msg, File string
				Offset           int64
				Dropped          int64 `json:"dropped_bytes"`
			}
			if err := json.Unmarshal(logs.Bytes(), &entry); err != nil {
				t.Fatalf("log output %q: %v", logs.String(), err)
			}
			if entry.Level != "WARN" || entry.File != path || entry.Offset != int64(len(good)) || entry.Dropped != int64(len(tt.tail)) {
				t.Errorf("warning %+v, want WARN, file %s, offset %d, dropped %d", entry, path, len(good), len(tt.tail))
			}
			r, err := l.Append(KindEvent, testEvent{ID: "next"})
			if err != nil || r.Seq != n+1 || r.Prev != sha(recs[n-1].Line) {
				t.Fatalf("append after recovery: %+v, %v", r, err)
			}
			sum, err := Verify(path)
			if err != nil || sum.Records != n+1 {
				t.Errorf("Verify: %+v, %v", sum, err)
			}
			// A second open finds nothing to cut.
			l.Close()
			l = openLog(t, path, Options{})
			if l.Recovered() != 0 || l.LastSeq() != n+1 {
				t.Errorf("reopen: Recovered %d, LastSeq %d", l.Recovered(), l.LastSeq())
			}
		})
	}
}

func TestTornTailOnlyLine(t *testing.T) {
	path := tempLog(t)
	half := `{"v":1,"kind":"ev`
	writeFile(t, path, []byte(half))
	l := openLog(t, path, Options{})
	if l.Recovered() != int64(len(half)) || l.LastSeq() != 0 || l.Head() != zeros64 {
		t.Fatalf("Recovered %d, LastSeq %d, Head %s", l.Recovered(), l.LastSeq(), l.Head())
	}
	r, err := l.Append(KindEvent, testEvent{ID: "first"})
	if err != nil || r.Seq != 1 || r.Prev != zeros64 || r.LineNo != 1 {
		t.Fatalf("first append: %+v, %v", r, err)
	}
}

func TestOpenRefusesCorruption(t *testing.T) {
	const n = 6
	tests := []struct {
		name string
		edit func(ls [][]byte) [][]byte
		line int    // the line the error must name
		want string // part of the message
	}{
		{"garbage line in the middle", func(ls [][]byte) [][]byte {
			ls[2] = []byte("garbage")
			return ls
		}, 3, "not valid JSON"},
		{"half line followed by whole ones", func(ls [][]byte) [][]byte {
			ls[2] = ls[2][:len(ls[2])/2]
			return ls
		}, 3, "not valid JSON"},
		{"empty line in the middle", func(ls [][]byte) [][]byte {
			return append(ls[:2:2], append([][]byte{{}}, ls[2:]...)...)
		}, 3, "empty line"},
		{"header missing in the middle", func(ls [][]byte) [][]byte {
			ls[3] = []byte(`{"id":"x"}`)
			return ls
		}, 4, `missing header field "v"`},
		{"two bad lines at the end", func(ls [][]byte) [][]byte {
			return append(ls, []byte("bad"), []byte("bad"))
		}, n + 1, "not valid JSON"},
		{"record deleted", func(ls [][]byte) [][]byte {
			return append(ls[:2:2], ls[3:]...)
		}, 3, "seq gap: expected seq 3, got 4"},
		{"record altered", func(ls [][]byte) [][]byte {
			ls[1] = bytes.Replace(ls[1], []byte(`"id":"e1"`), []byte(`"id":"e9"`), 1)
			return ls
		}, 3, "prev does not match the SHA-256 of line 2"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			path := tempLog(t)
			l := openLog(t, path, Options{})
			fill(t, l, n)
			l.Close()
			bad := joinLines(tt.edit(splitLines(readFile(t, path))))
			writeFile(t, path, bad)
			_, err := Open(path, Options{})
			if err == nil {
				t.Fatal("Open accepted a corrupt log")
			}
			loc := fmt.Sprintf("%s:%d: ", path, tt.line)
			if !strings.Contains(err.Error(), loc) || !strings.Contains(err.Error(), tt.want) {
				t.Errorf("error %q, want %q and %q", err, loc, tt.want)
			}
			var ve *VerifyError
			if !errors.As(err, &ve) || ve.Line != tt.line || ve.File != path {
				t.Errorf("error does not wrap a *VerifyError at line %d: %#v", tt.line, ve)
			}
			if got := readFile(t, path); !bytes.Equal(got, bad) {
				t.Errorf("a refused Open changed the file")
			}
		})
	}
}

func TestOpenErrors(t *testing.T) {
	dir := t.TempDir()
	tests := []struct {
		name string
		path string
		opt  Options
	}{
		{"missing directory", filepath.Join(dir, "nope", "events.jsonl"), Options{}},
		{"path is a directory", dir, Options{}},
		{"negative MaxBytes", filepath.Join(dir, "events.jsonl"), Options{MaxBytes: -1}},
	}
	for _, tt := range tests {
		if l, err := Open(tt.path, tt.opt); err == nil {
			l.Close()
			t.Errorf("%s: Open succeeded", tt.name)
		}
	}
}

func TestOpenCreates(t *testing.T) {
	path := tempLog(t)
	l := openLog(t, path, Options{})
	st, err := os.Stat(path)
	if err != nil {
		t.Fatal(err)
	}
	if st.Size() != 0 || st.Mode().Perm()&^0o640 != 0 {
		t.Errorf("new active file: size %d, mode %v", st.Size(), st.Mode())
	}
	if l.LastSeq() != 0 || l.Head() != zeros64 || l.Recovered() != 0 || l.Path() != path {
		t.Errorf("fresh log: %d %s %d %s", l.LastSeq(), l.Head(), l.Recovered(), l.Path())
	}
}

func TestClose(t *testing.T) {
	path := tempLog(t)
	l := openLog(t, path, Options{})
	fill(t, l, 1)
	if err := l.Close(); err != nil {
		t.Fatal(err)
	}
	if err := l.Close(); err != nil {
		t.Errorf("second Close: %v", err)
	}
	if _, err := l.Append(KindEvent, testEvent{}); !errors.Is(err, ErrClosed) {
		t.Errorf("append after Close: %v", err)
	}
	if err := l.Reopen(); !errors.Is(err, ErrClosed) {
		t.Errorf("Reopen after Close: %v", err)
	}
}

// TestConcurrentAppends runs appends from several goroutines (run with
// -race): every record lands once, with consecutive seqs and a whole chain.
func TestConcurrentAppends(t *testing.T) {
	path := tempLog(t)
	l := openLog(t, path, Options{MaxBytes: 2000})
	const workers, each = 4, 15
	var wg sync.WaitGroup
	for w := range workers {
		wg.Go(func() {
			for i := range each {
				if i%5 == 4 {
					if _, err := l.AppendBatch([]Item{{KindEvent, testEvent{ID: fmt.Sprint(w, i)}}, {KindCapture, testCapture{}}}); err != nil {
						t.Error(err)
					}
					continue
				}
				if _, err := l.Append(KindEvent, testEvent{ID: fmt.Sprint(w, i)}); err != nil {
					t.Error(err)
				}
				_ = l.LastSeq()
				_ = l.Head()
			}
		})
	}
	wg.Wait()
	want := uint64(workers * (each + each/5))
	sum, err := Verify(segments(t, path)...)
	if err != nil || sum.Records != want || l.LastSeq() != want || sum.Head != l.Head() {
		t.Errorf("Verify: %+v, %v; LastSeq %d, want %d", sum, err, l.LastSeq(), want)
	}
}
