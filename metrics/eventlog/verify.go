package eventlog

import (
	"errors"
	"fmt"
	"io"
	"time"
)

// VerifyError locates the first problem Verify (or a Reader, or Open) found.
type VerifyError struct {
	File string // file as named by the caller
	Line int    // 1-based line number within File
	// Seq is the seq the record at that place should have: one more than
	// the number of records before it (0 where a Reader cannot know).
	Seq     uint64
	Problem string // what is wrong
}

// Error returns "file:line: problem".
func (e *VerifyError) Error() string {
	return fmt.Sprintf("%s:%d: %s", e.File, e.Line, e.Problem)
}

// Summary describes a verified log.
type Summary struct {
	Records  uint64 // records read; also the last seq
	Events   uint64 // records of kind "event"
	Captures uint64 // records of kind "capture"
	Breaks   uint64 // break records (KindBreak)
	// First is the earliest "start" member and Last the latest "end" member
	// (or "start" for records without "end"), parsed as RFC 3339 times
	// (time.RFC3339Nano); zero when no record has one. Members that are
	// not RFC 3339 strings are left to the schema checks and ignored here.
	First, Last time.Time
	Files       int // files read (on error: opened so far)
	// Head is the lowercase hex SHA-256 of the last line (64 zeros for an
	// empty log). A changed or dropped last record still verifies, since no
	// later record covers it: compare Head and Records with a copy kept
	// elsewhere (Log.Head and Log.LastSeq at the time) to catch that.
	Head string
}

// Verify checks the log made of the named files, oldest first (as Segments
// lists them): every line ends with '\n', is a UTF-8 JSON object with
// v == 1 and kind "event" or "capture", seq is 1 on the first record and
// grows by exactly 1 from record to record across files, and
//
//	prev_1 = 64 zeros,  prev_n = hex(SHA-256(line_{n-1}))
//
// with SHA-256 as in FIPS 180-4 and line_{n-1} the exact bytes of the
// previous line without its newline. The first problem is returned as a
// *VerifyError naming the file and line, together with the Summary of the
// records before it. Failing to read a file is returned as it is.
func Verify(paths ...string) (Summary, error) {
	var sum Summary
	sum.Head = zeroHash
	if len(paths) == 0 {
		return sum, errors.New("eventlog: verify: no files given")
	}
	r := NewReader(paths...)
	defer r.Close()
	prev := zeroHash
	prevFile, prevLine := "", 0
	for {
		rec, err := r.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			sum.Files = r.next
			var ve *VerifyError
			if errors.As(err, &ve) {
				ve.Seq = sum.Records + 1
			}
			return sum, err
		}
		want := sum.Records + 1
		if rec.Seq != want {
			return sum, &VerifyError{File: rec.File, Line: rec.LineNo, Seq: want, Problem: seqProblem(want, rec.Seq)}
		}
		if rec.Prev != prev {
			var p string
			switch {
			case want == 1:
				p = "prev of the first record is not 64 zeros (log cut at the start, or record altered)"
			case prevFile == rec.File:
				p = prevProblem(fmt.Sprintf("line %d", prevLine))
			default:
				p = prevProblem(fmt.Sprintf("%s:%d, the last line of the previous file", prevFile, prevLine))
			}
			return sum, &VerifyError{File: rec.File, Line: rec.LineNo, Seq: want, Problem: p}
		}
		prev = sha256Hex(rec.Line)
		prevFile, prevLine = rec.File, rec.LineNo
		sum.add(rec, prev)
	}
	sum.Files = len(paths)
	return sum, nil
}

// add counts a record that verified, whose line hashes to head.
func (s *Summary) add(rec Record, head string) {
	s.Records++
	s.Head = head
	switch rec.Kind {
	case KindEvent:
		s.Events++
	case KindCapture:
		s.Captures++
	case KindBreak:
		s.Breaks++
	}
	s.addTimes(rec.Line)
}

// addTimes widens First and Last with the record's "start" and "end".
func (s *Summary) addTimes(line []byte) {
	var start, end time.Time
	forMembers(line, func(key, val []byte) {
		k := key[1 : len(key)-1]
		if string(k) != "start" && string(k) != "end" {
			return
		}
		v, ok := stringValue(val)
		if !ok {
			return
		}
		t, err := time.Parse(time.RFC3339Nano, v)
		if err != nil {
			return
		}
		if string(k) == "start" {
			start = t
		} else {
			end = t
		}
	})
	if !start.IsZero() && (s.First.IsZero() || start.Before(s.First)) {
		s.First = start
	}
	last := end
	if last.IsZero() {
		last = start
	}
	if !last.IsZero() && last.After(s.Last) {
		s.Last = last
	}
}

// seqProblem describes a seq that is not the expected one.
func seqProblem(want, got uint64) string {
	if got > want {
		n := got - want
		s := "s"
		if n == 1 {
			s = ""
		}
		return fmt.Sprintf("seq gap: expected seq %d, got %d (%d record%s missing: deleted, or the log cut)", want, got, n, s)
	}
	return fmt.Sprintf("seq repeat: expected seq %d, got %d (record duplicated, inserted or out of order)", want, got)
}

// prevProblem describes a prev that is not the hash of the line at where.
func prevProblem(where string) string {
	return fmt.Sprintf("prev does not match the SHA-256 of %s (record altered, deleted, inserted or reordered)", where)
}
