package eventlog

import (
	"bufio"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"strconv"
	"unicode/utf8"
)

// Record kinds: the values of the "kind" header member.
const (
	KindEvent   = "event"   // one detected interference within one capture
	KindCapture = "capture" // a capture's summary, written after its events
	// KindBreak is how a Record reports a break record: the log's own
	// first record of a new active file when the file before it failed
	// verification and was set aside (see Break). On the wire it is a
	// capture record, "kind":"capture" with status "quarantined" (the
	// contract admits the kinds event and capture only, ../shared
	// DESIGN.md), told apart by its added member "log_break": true.
	KindBreak = "break"
)

// breakMember is the top-level member that marks a break record.
const breakMember = `"log_break"`

// Version is the schema version written in the "v" header member.
const Version = 1

// MaxLine is the longest line, in bytes without the newline, that the
// writer produces and the readers accept. A longer line is reported as an
// error rather than buffered, so reading memory stays bounded.
const MaxLine = 16 << 20

// zeroHash is the prev of the first record: 32 zero bytes in hex.
const zeroHash = "0000000000000000000000000000000000000000000000000000000000000000"

// Record is one line of the log.
type Record struct {
	Seq  uint64 // "seq" header member
	Kind string // "kind" header member: KindEvent or KindCapture
	Prev string // "prev" header member: hex SHA-256 of the previous line
	// Line holds the exact bytes of the line without its newline; the
	// SHA-256 of Line is the next record's Prev.
	Line []byte
	// File is the file the line is in. For records returned by Append it
	// is the active file at the time of writing, which a later rotation
	// renames (to SegmentName(path, first seq of the file)).
	File   string
	LineNo int // 1-based line number within File
}

// Decode unmarshals the whole line, header members included, into v with
// json.Unmarshal.
func (r Record) Decode(v any) error {
	if err := json.Unmarshal(r.Line, v); err != nil {
		return fmt.Errorf("eventlog: %s:%d: %w", r.File, r.LineNo, err)
	}
	return nil
}

// Reader reads the records of one or more log files in order, one line at a
// time, with memory bounded by MaxLine. It parses each line's header but
// does not check the chain (seq continuity and prev); Verify does.
type Reader struct {
	paths  []string
	next   int // index in paths of the next file to open
	f      *os.File
	br     *bufio.Reader
	file   string
	lineNo int
	err    error // sticky: I/O errors end the reading
}

// NewReader returns a Reader over the named files, read in the order given
// (oldest first, as Segments lists them). Files are opened one at a time as
// the reading reaches them.
func NewReader(paths ...string) *Reader {
	return &Reader{paths: append([]string(nil), paths...)}
}

// Next returns the next record, or io.EOF after the last line of the last
// file.
//
// A line that is not a well-formed record (not UTF-8 JSON, not an object, a
// missing or invalid header member, no final newline, longer than MaxLine)
// gives a *VerifyError together with a Record that has File, LineNo and, if
// it was read, Line set; the following call continues with the next line.
// Failing to open or read a file gives an error that ends the reading.
func (r *Reader) Next() (Record, error) {
	for r.err == nil {
		if r.br == nil {
			if r.next >= len(r.paths) {
				return Record{}, io.EOF
			}
			name := r.paths[r.next]
			r.next++
			f, err := os.Open(name)
			if err != nil {
				r.err = fmt.Errorf("eventlog: %w", err)
				break
			}
			r.f, r.file, r.lineNo = f, name, 0
			r.br = bufio.NewReaderSize(f, 64<<10)
		}
		ln, err := readLine(r.br)
		if err != nil {
			r.err = fmt.Errorf("eventlog: reading %s: %w", r.file, err)
			r.closeFile()
			break
		}
		if ln.n == 0 {
			if err := r.closeFile(); err != nil {
				r.err = fmt.Errorf("eventlog: %w", err)
				break
			}
			continue
		}
		r.lineNo++
		rec := Record{Line: ln.line, File: r.file, LineNo: r.lineNo}
		problem := ln.problem()
		if problem == "" {
			var h header
			h, problem = parseHeader(ln.line)
			rec.Seq, rec.Kind, rec.Prev = h.seq, h.kind, h.prev
		}
		if problem != "" {
			return rec, &VerifyError{File: r.file, Line: r.lineNo, Problem: problem}
		}
		return rec, nil
	}
	return Record{}, r.err
}

// Close releases the file being read, if any. Reading to io.EOF closes every
// file without it.
func (r *Reader) Close() error {
	err := r.closeFile()
	if r.err == nil {
		r.err = errReaderClosed
	}
	return err
}

var errReaderClosed = errors.New("eventlog: reader closed")

func (r *Reader) closeFile() error {
	if r.f == nil {
		return nil
	}
	err := r.f.Close()
	r.f, r.br = nil, nil
	return err
}

// Scan calls fn for every record of the log whose active file is path, in
// order over Segments(path). It stops at the first malformed line (a
// *VerifyError), read error or error from fn, and returns it. Like Reader,
// it does not check the chain.
func Scan(path string, fn func(Record) error) error {
	segs, err := Segments(path)
	if err != nil {
		return err
	}
	return scanFiles(segs, 0, fn)
}

// ScanFrom calls fn for every record of the log whose active file is path
// that has seq ≥ from, in order. Rotated segments are named after the seq
// of their first record, so the files that end before from (those followed
// by a file whose first seq is ≤ from) are skipped without being opened; in
// the file that holds from, the lines before it are read but not passed to
// fn. The active file's first seq is taken from its first line. With from
// ≤ 1 it is Scan. Like Scan, it stops at the first malformed line (a
// *VerifyError), read error or error from fn, and returns it, and it does
// not check the chain.
func ScanFrom(path string, from uint64, fn func(Record) error) error {
	files, err := filesFrom(path, from)
	if err != nil {
		return err
	}
	return scanFiles(files, from, fn)
}

// scanFiles calls fn for every record of files with seq ≥ from, in order,
// stopping at the first error.
func scanFiles(files []string, from uint64, fn func(Record) error) error {
	r := NewReader(files...)
	defer r.Close()
	for {
		rec, err := r.Next()
		if err == io.EOF {
			return nil
		}
		if err != nil {
			if isDamaged(rec.File) && damageOf(err) != nil {
				continue // a file set aside as damaged: its good lines still count
			}
			return err
		}
		if rec.Seq < from {
			continue
		}
		if err := fn(rec); err != nil {
			return err
		}
	}
}

// filesFrom returns the files of the log at path that can hold records
// with seq ≥ from, oldest first: the last file whose first record has seq
// ≤ from and every file after it (all of them if none starts at or before
// from).
func filesFrom(path string, from uint64) ([]string, error) {
	segs, err := rotated(path)
	if err != nil {
		return nil, err
	}
	files := make([]string, 0, len(segs)+1)
	firsts := make([]uint64, 0, len(segs)+1)
	for _, s := range segs {
		files = append(files, s.path)
		firsts = append(firsts, s.first)
	}
	first, state, err := firstSeq(path)
	if err != nil {
		return nil, err
	}
	switch state {
	case firstKnown:
		files, firsts = append(files, path), append(firsts, first)
	case firstUnknown:
		// A malformed first line: the file is read (and the Reader
		// reports the line), but it cannot be where the reading starts.
		files, firsts = append(files, path), append(firsts, ^uint64(0))
	}
	start := 0
	for i, f := range firsts {
		if f <= from {
			start = i
		}
	}
	return files[start:], nil
}

// What firstSeq found.
const (
	firstNone    = iota // no such file, or an empty one
	firstKnown          // the first line is a record: its seq
	firstUnknown        // the first line is not a record
)

// firstSeq reads the seq of the first record of the file at path.
func firstSeq(path string) (uint64, int, error) {
	f, err := os.Open(path)
	if errors.Is(err, os.ErrNotExist) {
		return 0, firstNone, nil
	}
	if err != nil {
		return 0, firstNone, fmt.Errorf("eventlog: %w", err)
	}
	defer f.Close()
	ln, err := readLine(bufio.NewReader(f))
	if err != nil {
		return 0, firstNone, fmt.Errorf("eventlog: reading %s: %w", path, err)
	}
	if ln.n == 0 {
		return 0, firstNone, nil
	}
	if ln.problem() != "" {
		return 0, firstUnknown, nil
	}
	h, problem := parseHeader(ln.line)
	if problem != "" {
		return 0, firstUnknown, nil
	}
	return h.seq, firstKnown, nil
}

// rawLine is one line as read by readLine.
type rawLine struct {
	line     []byte // the line without its newline; nil if tooLong
	n        int64  // bytes consumed, newline included; 0 at end of input
	complete bool   // the line ended with '\n'
	tooLong  bool   // longer than MaxLine; its bytes were skipped
}

func (l rawLine) problem() string {
	switch {
	case l.tooLong:
		return fmt.Sprintf("line longer than %d bytes", MaxLine)
	case !l.complete:
		return "missing final newline (torn write?)"
	}
	return ""
}

// readLine reads one line from br. The returned line is a fresh copy.
// Lines longer than MaxLine are skipped up to their newline without being
// kept in memory.
func readLine(br *bufio.Reader) (rawLine, error) {
	var l rawLine
	for {
		frag, err := br.ReadSlice('\n')
		l.n += int64(len(frag))
		if err == nil {
			frag = frag[:len(frag)-1]
			l.complete = true
		}
		if !l.tooLong {
			if len(l.line)+len(frag) > MaxLine {
				l.tooLong, l.line = true, nil
			} else {
				l.line = append(l.line, frag...)
			}
		}
		switch err {
		case nil, io.EOF:
			if l.line == nil && !l.tooLong && l.n > 0 {
				l.line = []byte{}
			}
			return l, nil
		case bufio.ErrBufferFull:
			continue
		default:
			return l, err
		}
	}
}

// header holds the header members of a line.
type header struct {
	seq  uint64
	kind string
	prev string
}

// Header member names, in the order the writer emits them.
var headerNames = [...]string{"v", "kind", "seq", "prev"}

// headerIndex returns the index in headerNames of the raw JSON string key,
// or -1.
func headerIndex(rawKey []byte) int {
	inner := rawKey[1 : len(rawKey)-1]
	for _, c := range inner {
		if c == '\\' { // escaped key: decode it (rare)
			k, _ := stringValue(rawKey)
			inner = []byte(k)
			break
		}
	}
	for j, name := range headerNames {
		if string(inner) == name {
			return j
		}
	}
	return -1
}

// parseHeader checks that line is a UTF-8 JSON object with valid header
// members and returns them. A non-empty problem says what is wrong.
func parseHeader(line []byte) (header, string) {
	var h header
	if len(line) == 0 {
		return h, "empty line"
	}
	if !utf8.Valid(line) {
		return h, fmt.Sprintf("not valid UTF-8 (byte %d)", invalidUTF8At(line)+1)
	}
	if !json.Valid(line) {
		var raw json.RawMessage
		err := json.Unmarshal(line, &raw)
		if err == nil { // cannot happen: Valid and Unmarshal agree
			err = errors.New("rejected by json.Valid")
		}
		return h, "not valid JSON: " + err.Error()
	}
	i := skipSpace(line, 0)
	if line[i] != '{' {
		return h, fmt.Sprintf("not a JSON object (it is %s)", jsonType(line[i]))
	}
	var vals [len(headerNames)][]byte
	dup := -1
	isBreak := false
	forMembers(line, func(key, val []byte) {
		if string(key) == breakMember && string(val) == "true" {
			isBreak = true
		}
		if j := headerIndex(key); j >= 0 {
			if vals[j] != nil && dup < 0 {
				dup = j
			}
			vals[j] = val
		}
	})
	if dup >= 0 {
		return h, fmt.Sprintf("duplicate header field %q", headerNames[dup])
	}
	for j, v := range vals {
		if v == nil {
			return h, fmt.Sprintf("missing header field %q", headerNames[j])
		}
	}
	if v := vals[0]; string(v) != "1" {
		if n, err := strconv.ParseUint(string(v), 10, 64); err == nil {
			return h, fmt.Sprintf("header field \"v\" is %d: schema version %d is not supported (want %d)", n, n, Version)
		}
		return h, fmt.Sprintf("header field \"v\" is %s, want the integer %d", clip(v), Version)
	}
	switch k, _ := stringValue(vals[1]); k {
	case KindEvent:
		h.kind = KindEvent
	case KindCapture:
		h.kind = KindCapture
		if isBreak {
			h.kind = KindBreak
		}
	default:
		return h, fmt.Sprintf("header field \"kind\" is %s, want %q or %q", clip(vals[1]), KindEvent, KindCapture)
	}
	seq, err := parseSeq(vals[2])
	if err != nil {
		return h, fmt.Sprintf("header field \"seq\" is %s, want a positive integer", clip(vals[2]))
	}
	h.seq = seq
	prev, ok := stringValue(vals[3])
	if !ok || !isHash(prev) {
		return h, fmt.Sprintf("header field \"prev\" is %s, want 64 lowercase hex digits", clip(vals[3]))
	}
	h.prev = prev
	return h, ""
}

// parseSeq parses a JSON number that must be a positive integer written
// without fraction or exponent.
func parseSeq(raw []byte) (uint64, error) {
	for _, c := range raw {
		if c < '0' || c > '9' {
			return 0, errors.New("not an integer")
		}
	}
	n, err := strconv.ParseUint(string(raw), 10, 64)
	if err != nil {
		return 0, err
	}
	if n == 0 {
		return 0, errors.New("zero")
	}
	return n, nil
}

// isHash reports whether s is 64 lowercase hex digits.
func isHash(s string) bool {
	if len(s) != 64 {
		return false
	}
	for i := 0; i < len(s); i++ {
		c := s[i]
		if !('0' <= c && c <= '9' || 'a' <= c && c <= 'f') {
			return false
		}
	}
	return true
}

// clip returns raw JSON for an error message, shortened if long.
func clip(raw []byte) string {
	const max = 72
	if len(raw) > max {
		return string(raw[:max]) + "…"
	}
	return string(raw)
}

func jsonType(c byte) string {
	switch c {
	case '[':
		return "an array"
	case '"':
		return "a string"
	case 't', 'f':
		return "a boolean"
	case 'n':
		return "null"
	}
	return "a number"
}

func invalidUTF8At(b []byte) int {
	for i := 0; i < len(b); {
		r, n := utf8.DecodeRune(b[i:])
		if r == utf8.RuneError && n == 1 {
			return i
		}
		i += n
	}
	return len(b)
}

// The helpers below walk JSON text that json.Valid has accepted (or that
// json.Marshal produced), so they need no error handling of their own.

func isSpace(c byte) bool { return c == ' ' || c == '\t' || c == '\n' || c == '\r' }

func skipSpace(b []byte, i int) int {
	for i < len(b) && isSpace(b[i]) {
		i++
	}
	return i
}

// endOfString returns the index just past the JSON string starting at b[i].
func endOfString(b []byte, i int) int {
	for i++; i < len(b); {
		switch b[i] {
		case '\\':
			i += 2
		case '"':
			return i + 1
		default:
			i++
		}
	}
	return len(b)
}

// endOfValue returns the index just past the JSON value starting at b[i].
func endOfValue(b []byte, i int) int {
	switch b[i] {
	case '"':
		return endOfString(b, i)
	case '{', '[':
		depth := 0
		for i < len(b) {
			switch b[i] {
			case '"':
				i = endOfString(b, i)
				continue
			case '{', '[':
				depth++
			case '}', ']':
				depth--
				if depth == 0 {
					return i + 1
				}
			}
			i++
		}
		return len(b)
	}
	for i < len(b) && b[i] != ',' && b[i] != '}' && b[i] != ']' && !isSpace(b[i]) {
		i++
	}
	return i
}

// forMembers calls fn with the raw key (quotes included) and raw value of
// each top-level member of the valid JSON object obj, in order.
func forMembers(obj []byte, fn func(key, val []byte)) {
	i := skipSpace(obj, 0) + 1 // past '{'
	for {
		i = skipSpace(obj, i)
		if i >= len(obj) || obj[i] == '}' {
			return
		}
		if obj[i] == ',' {
			i = skipSpace(obj, i+1)
		}
		ke := endOfString(obj, i)
		key := obj[i:ke]
		i = skipSpace(obj, ke) + 1 // past ':'
		i = skipSpace(obj, i)
		ve := endOfValue(obj, i)
		fn(key, obj[i:ve])
		i = ve
	}
}

// stringValue decodes a raw JSON value that should be a string.
func stringValue(raw []byte) (string, bool) {
	if len(raw) < 2 || raw[0] != '"' {
		return "", false
	}
	inner := raw[1 : len(raw)-1]
	plain := true
	for _, c := range inner {
		if c == '\\' {
			plain = false
			break
		}
	}
	if plain {
		return string(inner), true
	}
	var s string
	if err := json.Unmarshal(raw, &s); err != nil {
		return "", false
	}
	return s, true
}
