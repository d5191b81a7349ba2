package eventlog

import (
	"bytes"
	"errors"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// contractEvent and contractCapture are full records of DESIGN.md's
// "Event log" contract, so that the log a test keeps (see
// QUIETBAND_EVENTLOG_KEEP) passes the shared contract checker as a whole.
func contractEvent(i int, start time.Time) map[string]any {
	return map[string]any{
		"id": fmt.Sprintf("ev-%04d", i), "episode": "ep-1", "class": "cw",
		"capture": "site/cap-0001.sigmf-meta", "sample_start": 1000 * i, "sample_count": 4096,
		"start": start.Format(time.RFC3339Nano), "end": start.Add(2 * time.Millisecond).Format(time.RFC3339Nano),
		"offset_hz": 125000.5, "center_hz": 1575545000.5, "bandwidth_hz": 10.0,
		"jn_db": 21.5, "power_dbfs": -31.25,
		"params":    map[string]any{"tones": []any{map[string]any{"offset_hz": 125000.5, "jn_db": 21.5}}},
		"impact":    map[string]any{"cn0_degradation_db": 3.5},
		"detectors": []string{"psd_peak", "spectral_kurtosis"},
	}
}

func contractCapture(events int, start time.Time) map[string]any {
	return map[string]any{
		"capture": "site/cap-0001.sigmf-meta", "status": "ok",
		"sha256": sha([]byte("capture data")), "format": "ci16_le", "sample_rate_hz": 4.092e6,
		"center_hz": 1575.42e6, "start": start.Format(time.RFC3339Nano), "samples": 409200, "events": events,
		"stats": map[string]any{"power_dbfs": -40.5, "noise_floor_dbfs": -62.5, "agc_deviation_db": 0.25,
			"sk_max": 1.5, "clip_fraction": 0.0,
			"satellites": []any{map[string]any{"system": "GPS", "prn": 7, "cn0_dbhz": 44.5, "doppler_hz": -1250.0, "code_phase_chips": 511.5}}},
	}
}

func TestVerifySummary(t *testing.T) {
	dir := t.TempDir()
	if keep := os.Getenv("QUIETBAND_EVENTLOG_KEEP"); keep != "" {
		dir = keep // keep the log for a look with other tools
		os.MkdirAll(dir, 0o755)
		for _, old := range segments(t, filepath.Join(dir, "events.jsonl")) {
			os.Remove(old)
		}
	}
	path := filepath.Join(dir, "events.jsonl")
	l := openLog(t, path, Options{MaxBytes: 2000})
	t0 := time.Date(2026, 3, 1, 12, 0, 0, 123456789, time.UTC)
	var events, captures uint64
	for c := range 4 {
		start := t0.Add(time.Duration(c) * time.Minute)
		var items []Item
		for e := range c {
			items = append(items, Item{KindEvent, contractEvent(10*c+e, start.Add(time.Duration(e)*time.Second))})
		}
		items = append(items, Item{KindCapture, contractCapture(c, start)})
		if _, err := l.AppendBatch(items); err != nil {
			t.Fatal(err)
		}
		events += uint64(c)
		captures++
	}
	segs := segments(t, path)
	sum, err := Verify(segs...)
	if err != nil {
		t.Fatal(err)
	}
	// The last event starts 2 s after the last capture's start and ends 2 ms later.
	wantLast := t0.Add(3*time.Minute + 2*time.Second + 2*time.Millisecond)
	want := Summary{Records: events + captures, Events: events, Captures: captures,
		First: t0, Last: wantLast, Files: len(segs), Head: l.Head()}
	if sum != want {
		t.Errorf("Summary\n %+v\nwant\n %+v", sum, want)
	}
	if len(segs) < 2 {
		t.Errorf("expected rotation into several files, got %q", segs)
	}
	empty := filepath.Join(t.TempDir(), "empty.jsonl")
	writeFile(t, empty, nil)
	if sum, err := Verify(empty); err != nil || sum != (Summary{Files: 1, Head: zeros64}) {
		t.Errorf("empty log: %+v, %v", sum, err)
	}
	if _, err := Verify(); err == nil {
		t.Errorf("Verify() with no files: no error")
	}
	if _, err := Verify(filepath.Join(dir, "missing.jsonl")); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("missing file: %v", err)
	}
}

// TestVerifyMessages checks the exact wording for each kind of problem, on
// logs built by the test from the contract (contractLine, chain).
func TestVerifyMessages(t *testing.T) {
	ok := chain([2]string{KindEvent, `"id":"a"`}, [2]string{KindCapture, `"capture":"c"`}, [2]string{KindEvent, `"id":"b"`})
	ls := splitLines(ok)
	h1, h2 := sha(ls[0]), sha(ls[1])
	line3 := func(members string) string { return contractLine(KindEvent, 3, h2, members) }
	head2 := string(ls[0]) + "\n" + string(ls[1]) + "\n"
	tests := []struct {
		name  string
		files []string // contents of f1, f2, ...
		want  string   // Error()
		seq   uint64
	}{
		{"not JSON", []string{head2 + "{\"v\":1,\n"}, "f1:3: not valid JSON: unexpected end of JSON input", 3},
		{"bad JSON token", []string{"{\"v\":1,}\n"}, "f1:1: not valid JSON: invalid character '}' looking for beginning of object key string", 1},
		{"not an object", []string{head2 + "[1,2]\n"}, "f1:3: not a JSON object (it is an array)", 3},
		{"empty line", []string{head2 + "\n"}, "f1:3: empty line", 3},
		{"invalid UTF-8", []string{head2 + "{\"id\":\"\xc3\x28\"}\n"}, "f1:3: not valid UTF-8 (byte 8)", 3},
		{"missing v", []string{`{"kind":"event","seq":1,"prev":"` + zeros64 + `"}` + "\n"}, `f1:1: missing header field "v"`, 1},
		{"missing prev", []string{head2 + `{"v":1,"kind":"event","seq":3}` + "\n"}, `f1:3: missing header field "prev"`, 3},
		{"v is 2", []string{head2 + strings.Replace(line3(""), `"v":1`, `"v":2`, 1) + "\n"},
			`f1:3: header field "v" is 2: schema version 2 is not supported (want 1)`, 3},
		{"v is a string", []string{head2 + strings.Replace(line3(""), `"v":1`, `"v":"1"`, 1) + "\n"},
			`f1:3: header field "v" is "1", want the integer 1`, 3},
		{"kind unknown", []string{head2 + strings.Replace(line3(""), `"event"`, `"alarm"`, 1) + "\n"},
			`f1:3: header field "kind" is "alarm", want "event" or "capture"`, 3},
		{"seq not an integer", []string{head2 + strings.Replace(line3(""), `"seq":3`, `"seq":3.0`, 1) + "\n"},
			`f1:3: header field "seq" is 3.0, want a positive integer`, 3},
		{"seq zero", []string{strings.Replace(string(ls[0]), `"seq":1`, `"seq":0`, 1) + "\n"},
			`f1:1: header field "seq" is 0, want a positive integer`, 1},
		{"prev upper case", []string{head2 + contractLine(KindEvent, 3, strings.ToUpper(h2), "") + "\n"},
			`f1:3: header field "prev" is "` + strings.ToUpper(h2) + `", want 64 lowercase hex digits`, 3},
		{"duplicate header field", []string{head2 + line3(`"seq":3`) + "\n"}, `f1:3: duplicate header field "seq"`, 3},
		{"seq gap", []string{string(ls[0]) + "\n" + contractLine(KindEvent, 4, h1, "") + "\n"},
			"f1:2: seq gap: expected seq 2, got 4 (2 records missing: deleted, or the log cut)", 2},
		{"seq gap of one", []string{string(ls[0]) + "\n" + contractLine(KindEvent, 3, h1, "") + "\n"},
			"f1:2: seq gap: expected seq 2, got 3 (1 record missing: deleted, or the log cut)", 2},
		{"seq repeat", []string{head2 + string(ls[1]) + "\n"},
			"f1:3: seq repeat: expected seq 3, got 2 (record duplicated, inserted or out of order)", 3},
		{"log starts late", []string{string(ls[1]) + "\n"},
			"f1:1: seq gap: expected seq 1, got 2 (1 record missing: deleted, or the log cut)", 1},
		{"hash mismatch", []string{head2 + contractLine(KindEvent, 3, h1, "") + "\n"},
			"f1:3: prev does not match the SHA-256 of line 2 (record altered, deleted, inserted or reordered)", 3},
		{"hash mismatch across files", []string{head2, contractLine(KindEvent, 3, h1, "") + "\n"},
			"f2:1: prev does not match the SHA-256 of f1:2, the last line of the previous file (record altered, deleted, inserted or reordered)", 3},
		{"first prev not zeros", []string{contractLine(KindEvent, 1, h1, "") + "\n"},
			"f1:1: prev of the first record is not 64 zeros (log cut at the start, or record altered)", 1},
		{"missing final newline", []string{head2 + line3("")}, "f1:3: missing final newline (torn write?)", 3},
		{"missing final newline in an earlier file", []string{string(ok[:len(ok)-1]), ""}, "f1:3: missing final newline (torn write?)", 3},
		{"valid across files", []string{string(ls[0]) + "\n", "", string(ls[1]) + "\n" + string(ls[2]) + "\n"}, "", 0},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			dir := t.TempDir()
			var paths []string
			for i, c := range tt.files {
				p := filepath.Join(dir, fmt.Sprintf("f%d", i+1))
				writeFile(t, p, []byte(c))
				paths = append(paths, p)
			}
			_, err := Verify(paths...)
			if tt.want == "" {
				if err != nil {
					t.Fatalf("Verify: %v", err)
				}
				return
			}
			var ve *VerifyError
			if !errors.As(err, &ve) {
				t.Fatalf("error %v is not a *VerifyError", err)
			}
			got := strings.ReplaceAll(ve.Error(), dir+string(filepath.Separator), "")
			if got != tt.want || ve.Seq != tt.seq {
				t.Errorf("got  %s (seq %d)\nwant %s (seq %d)", got, ve.Seq, tt.want, tt.seq)
			}
		})
	}
}

// TestVerifyDetectsEdits edits every line of a written log in the ways of
// the task (flip a byte at several positions, delete, swap with the next,
// insert a copy) and checks the line Verify names. Only the last record is
// not covered by a later prev; for it the anchored Head and record count
// (Log.Head, Log.LastSeq) must differ from the Summary instead.
func TestVerifyDetectsEdits(t *testing.T) {
	path := tempLog(t)
	l := openLog(t, path, Options{})
	fill(t, l, 8)
	orig := readFile(t, path)
	head, n := l.Head(), int(l.LastSeq())
	lines := splitLines(orig)

	type flip struct {
		name string
		pos  func(line []byte) int // byte to flip (XOR 0x01); len(line) is the newline
		next bool                  // the line stays well-formed: the next line's prev breaks
	}
	// The byte positions are chosen so the effect is known: a '{' turns
	// into 'z' (not JSON), a seq digit into another digit (wrong seq), a
	// prev hex letter or digit into a non-hex character, a body letter
	// into another letter (valid JSON, different bytes), the newline into
	// a vertical tab (two lines fused: not JSON).
	flips := []flip{
		{"opening brace", func([]byte) int { return 0 }, false},
		{"seq digit", func(b []byte) int { return bytes.Index(b, []byte(`,"prev"`)) - 1 }, false},
		{"prev hex", func(b []byte) int { return bytes.Index(b, []byte(`"prev":"`)) + 8 + 5 }, false},
		{"body letter", func(b []byte) int { return bytes.LastIndexByte(b, '"') - 1 }, true},
		{"newline", func(b []byte) int { return len(b) }, false},
	}
	check := func(t *testing.T, data []byte, wantLine int) {
		t.Helper()
		writeFile(t, path, data)
		sum, err := Verify(path)
		if wantLine > 0 {
			var ve *VerifyError
			if !errors.As(err, &ve) || ve.File != path || ve.Line != wantLine {
				t.Errorf("error %v, want one at %s:%d", err, path, wantLine)
			}
			return
		}
		if err != nil {
			t.Errorf("edit of the last record: unexpected error %v", err)
		}
		if sum.Head == head && sum.Records == uint64(n) {
			t.Errorf("edit of the last record not caught by the anchored head")
		}
	}
	for i := 1; i <= n; i++ {
		line := lines[i-1]
		for _, f := range flips {
			t.Run(fmt.Sprintf("line %d flip %s", i, f.name), func(t *testing.T) {
				p := f.pos(line)
				off := len(joinLines(lines[:i-1])) + p
				data := bytes.Clone(orig)
				data[off] ^= 0x01
				want := i
				if f.next {
					want = i + 1
				}
				if want > n {
					want = 0 // last record: only the anchor tells
				}
				check(t, data, want)
			})
		}
		t.Run(fmt.Sprintf("line %d deleted", i), func(t *testing.T) {
			ls := append(append([][]byte{}, lines[:i-1]...), lines[i:]...)
			want := i // the next record now sits at line i: seq gap
			if i == n {
				want = 0
			}
			check(t, joinLines(ls), want)
		})
		if i < n {
			t.Run(fmt.Sprintf("lines %d and %d swapped", i, i+1), func(t *testing.T) {
				ls := append([][]byte{}, lines...)
				ls[i-1], ls[i] = ls[i], ls[i-1]
				check(t, joinLines(ls), i)
			})
		}
		t.Run(fmt.Sprintf("copy of line %d inserted after it", i), func(t *testing.T) {
			ls := append(append(append([][]byte{}, lines[:i]...), lines[i-1]), lines[i:]...)
			check(t, joinLines(ls), i+1) // seq repeat
		})
		t.Run(fmt.Sprintf("copy of line %d inserted at the start", i), func(t *testing.T) {
			ls := append([][]byte{lines[i-1]}, lines...)
			want := 1 // seq i at line 1
			if i == 1 {
				want = 2 // line 1 is record 1 again; line 2 repeats seq 1
			}
			check(t, joinLines(ls), want)
		})
	}
}

// logFiles is a multi-file log held in memory for editing.
type logFiles struct {
	names []string
	lines [][][]byte
}

func (lf logFiles) clone() logFiles {
	c := logFiles{names: lf.names, lines: make([][][]byte, len(lf.lines))}
	for i, ls := range lf.lines {
		c.lines[i] = make([][]byte, len(ls))
		for j, l := range ls {
			c.lines[i][j] = bytes.Clone(l)
		}
	}
	return c
}

// pos is a line position: file index and 0-based line index.
type pos struct{ f, l int }

// next returns the position after p, moving into the following non-empty
// file; ok is false past the last line.
func (lf logFiles) next(p pos) (pos, bool) {
	p.l++
	for p.f < len(lf.lines) && p.l >= len(lf.lines[p.f]) {
		p.f, p.l = p.f+1, 0
	}
	return p, p.f < len(lf.lines)
}

// TestVerifyRandomEdits applies hundreds of random edits (change a byte,
// delete a line, insert a line, swap two lines), one at a time, to a log
// rotated into several files, and checks that every one is detected at the
// place where the bytes first differ, or, where that is only the final
// record, through the anchored head.
func TestVerifyRandomEdits(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "events.jsonl")
	l := openLog(t, path, Options{MaxBytes: 700})
	fill(t, l, 40)
	head, n := l.Head(), l.LastSeq()
	segs := segments(t, path)
	if len(segs) < 4 {
		t.Fatalf("want a log of several files, got %q", segs)
	}
	var orig logFiles
	for _, s := range segs {
		orig.names = append(orig.names, s)
		orig.lines = append(orig.lines, splitLines(readFile(t, s)))
	}
	rng := rand.New(rand.NewPCG(2026, 180))
	edits := 400
	if testing.Short() {
		edits = 100
	}
	randPos := func(lf logFiles) pos {
		for {
			f := rng.IntN(len(lf.lines))
			if len(lf.lines[f]) > 0 {
				return pos{f, rng.IntN(len(lf.lines[f]))}
			}
		}
	}
	anchored := 0
	for e := range edits {
		lf := orig.clone()
		var (
			kind   string
			raw    [][]byte // file contents, when an edit works on bytes
			at     []pos    // where Verify may report the problem
			anchor bool     // the edit may instead show only in Head or Records
		)
		switch op := rng.IntN(4); op {
		case 0: // change one byte of a line, or its newline, to another value
			p := randPos(lf)
			line := lf.lines[p.f][p.l]
			i := rng.IntN(len(line) + 1)
			raw = make([][]byte, len(lf.lines))
			for f, ls := range lf.lines {
				raw[f] = joinLines(ls)
			}
			off := len(joinLines(lf.lines[p.f][:p.l])) + i
			old := raw[p.f][off]
			nb := byte(rng.IntN(255))
			if nb >= old {
				nb++
			}
			raw[p.f][off] = nb
			kind = fmt.Sprintf("change byte %d of %s:%d from %q to %q", i, lf.names[p.f], p.l+1, old, nb)
			// Either line p is no longer a well-formed record in its
			// place, or it is one with other bytes and the prev of the
			// next line breaks. A fused or split line is never valid JSON.
			at = []pos{p}
			if q, ok := orig.next(p); ok {
				at = append(at, q)
			} else {
				anchor = true // the final record: nothing after it
			}
		case 1: // delete a line
			p := randPos(lf)
			kind = fmt.Sprintf("delete %s:%d", lf.names[p.f], p.l+1)
			lf.lines[p.f] = append(lf.lines[p.f][:p.l:p.l], lf.lines[p.f][p.l+1:]...)
			// The next record now sits where the deleted one was: seq gap.
			if q, ok := lf.next(pos{p.f, p.l - 1}); ok {
				at = []pos{q}
			} else {
				anchor = true // the final record deleted
			}
		case 2: // insert a copy of some line, or junk, before some line
			src := randPos(lf)
			ins := bytes.Clone(lf.lines[src.f][src.l])
			if rng.IntN(4) == 0 {
				ins = fmt.Appendf(nil, `{"junk":%d}`, rng.Int())
			}
			p := randPos(lf)
			if rng.IntN(10) == 0 { // sometimes after the very last line
				p = pos{len(lf.lines) - 1, len(lf.lines[len(lf.lines)-1])}
			}
			kind = fmt.Sprintf("insert %s at %s:%d", clip(ins), lf.names[p.f], p.l+1)
			same := p.l < len(lf.lines[p.f]) && bytes.Equal(ins, lf.lines[p.f][p.l])
			lf.lines[p.f] = append(append(append([][]byte{}, lf.lines[p.f][:p.l]...), ins), lf.lines[p.f][p.l:]...)
			at = []pos{p}
			if same { // an identical line in front: the one after repeats its seq
				q, _ := lf.next(p)
				at = []pos{q}
			}
		case 3: // swap two lines, possibly in different files
			a, b := randPos(lf), randPos(lf)
			for a == b {
				b = randPos(lf)
			}
			if b.f < a.f || b.f == a.f && b.l < a.l {
				a, b = b, a
			}
			kind = fmt.Sprintf("swap %s:%d and %s:%d", lf.names[a.f], a.l+1, lf.names[b.f], b.l+1)
			lf.lines[a.f][a.l], lf.lines[b.f][b.l] = lf.lines[b.f][b.l], lf.lines[a.f][a.l]
			at = []pos{a} // the later record is now first: seq gap
		}
		for f, name := range lf.names {
			if raw != nil {
				writeFile(t, name, raw[f])
			} else {
				writeFile(t, name, joinLines(lf.lines[f]))
			}
		}
		sum, err := Verify(lf.names...)
		if err == nil && anchor {
			anchored++
			if sum.Head == head && sum.Records == n {
				t.Errorf("edit %d (%s) not detected, not even by the anchored head", e, kind)
			}
			continue
		}
		var ve *VerifyError
		if !errors.As(err, &ve) {
			t.Errorf("edit %d (%s) not detected: %v (%+v)", e, kind, err, sum)
			continue
		}
		found := false
		for _, p := range at {
			found = found || ve.File == lf.names[p.f] && ve.Line == p.l+1
		}
		if !found {
			t.Errorf("edit %d (%s): %v, want a problem at %v", e, kind, err, at)
		}
	}
	t.Logf("%d random edits, %d caught only through the anchored head", edits, anchored)
}
