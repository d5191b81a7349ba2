package eventlog

import (
	"bufio"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"time"

	"quietband/ingest"
)

// damagedInfix marks a file set aside because it failed verification:
// <active file>.damaged-<first seq>, e.g. events.jsonl.damaged-41.
const damagedInfix = ".damaged-"

// DamagedName returns the name a file of the log at path is set aside
// under when it fails verification and its first record has seq first.
func DamagedName(path string, first uint64) string {
	return path + damagedInfix + strconv.FormatUint(first, 10)
}

// damagedSeq returns the first seq encoded in the base name of a file set
// aside as damaged from the log whose active file has base name base.
func damagedSeq(name, base string) (uint64, bool) {
	mid, ok := strings.CutPrefix(name, base+damagedInfix)
	if !ok || mid == "" || mid[0] == '0' {
		return 0, false
	}
	n, err := strconv.ParseUint(mid, 10, 64)
	return n, err == nil
}

// isDamaged reports whether file is a file set aside as damaged (by its
// name).
func isDamaged(file string) bool {
	return strings.Contains(filepath.Base(file), damagedInfix)
}

// Damaged returns the files of the log at path that were set aside because
// they failed verification, oldest first. They stay until an operator has
// looked at them and moved them away; while any is there the log is known
// to be damaged (quietband_eventlog_damaged_files).
func Damaged(path string) ([]string, error) {
	segs, err := rotated(path)
	if err != nil {
		return nil, err
	}
	var out []string
	for _, s := range segs {
		if s.damaged {
			out = append(out, s.path)
		}
	}
	return out, nil
}

// Break is the body of a KindBreak record, the first record of the active
// file a Log started after the file before it failed verification
// (Options.SetAsideDamaged):
//
//	{"v":1,"kind":"capture","seq":N+1,"prev":<last_good_hash>,
//	 "capture":<damaged_file>,"status":"quarantined","error":…,"events":0,
//	 "log_break":true,"reason":…,"damaged_file":…,"damaged_line":…,
//	 "damaged_seq":…,"problem":…,"last_good_seq":…,"last_good_hash":…,"at":…}
//
// It is a capture record as the contract has it (kinds event and capture
// only): a quarantined one, named after the file set aside, so that a
// reader of the contract shows an error where the log broke.
//
// N is the highest seq any line of the damaged file still shows, or its
// first seq plus its lines less one if more (so no seq is used twice), and
// prev is the SHA-256 of the last line known good (64 zeros if none is):
// the chain goes on from there, and everything from the break on verifies
// (VerifyResumed). A changed line is found at the line after it, whose
// prev no longer matches it, so either may be the one changed: the last
// good record is the one before both (damaged_line names where
// verification failed, as Verify does).
type Break struct {
	// The members a reader of the contract sees: a quarantined capture
	// named after the file set aside, the reason in error, no events;
	// LogBreak marks the record as a break (see KindBreak).
	Capture  string `json:"capture"`
	Status   string `json:"status"`
	Error    string `json:"error"`
	Events   int    `json:"events"`
	LogBreak bool   `json:"log_break"`

	Reason       string `json:"reason"`
	DamagedFile  string `json:"damaged_file"` // base name of the file set aside
	DamagedLine  int    `json:"damaged_line"` // first bad line in it, 1-based
	DamagedSeq   uint64 `json:"damaged_seq"`  // seq the record there should have
	Problem      string `json:"problem"`      // what verification found there
	LastGoodSeq  uint64 `json:"last_good_seq"`
	LastGoodHash string `json:"last_good_hash"`
	At           string `json:"at"` // when the file was set aside, RFC 3339 UTC
}

// BreakReason is the reason member of every break record.
const BreakReason = "the log's previous file failed verification; it is set aside untouched and the chain goes on from its last good record"

// damageOf returns the *VerifyError that err wraps, if the error is a
// verification failure (not a failure to read).
func damageOf(err error) *VerifyError {
	var ve *VerifyError
	if errors.As(err, &ve) {
		return ve
	}
	return nil
}

// setAsideDamaged renames the damaged file bad (the active file, or the
// newest segment when the active file is empty) to DamagedName, untouched,
// opens a new active file and writes a break record into it. st is what
// scanFile read of bad before the problem ve; the Log's seq and head are
// those of the last record before bad when st holds no record beyond
// doubt (fileState.sure).
func (l *Log) setAsideDamaged(bad string, st fileState, ve *VerifyError) error {
	lastSeq, lastHead := l.seq, l.head
	first := lastSeq + 1
	if st.lines > 0 {
		first = st.first
	}
	if g := st.sure(); g > 0 {
		lastSeq, lastHead = st.first+uint64(g)-1, st.head
		if g < st.lines {
			lastHead = st.prevHead
		}
	}
	highest, lines, err := highestSeq(bad)
	if err != nil {
		return err
	}
	if lines > 0 {
		// A line too damaged to show its seq still used one.
		highest = max(highest, first+uint64(lines)-1)
	}
	aside := DamagedName(l.path, first)
	if _, err := os.Lstat(aside); err == nil {
		return fmt.Errorf("eventlog: %s failed verification (%v) and %s already exists", bad, ve, aside)
	} else if !errors.Is(err, fs.ErrNotExist) {
		return fmt.Errorf("eventlog: %w", err)
	}
	dir := filepath.Dir(l.path)
	if err := os.Rename(bad, aside); err != nil {
		return fmt.Errorf("eventlog: setting aside %s: %w", bad, err)
	}
	if err := ingest.SyncDir(dir); err != nil {
		return fmt.Errorf("eventlog: setting aside %s: %w", bad, err)
	}
	f, err := os.OpenFile(l.path, os.O_RDWR|os.O_APPEND|os.O_CREATE, 0o640)
	if err != nil {
		return fmt.Errorf("eventlog: %w", err)
	}
	if err := ingest.SyncDir(dir); err != nil {
		f.Close()
		return fmt.Errorf("eventlog: %w", err)
	}
	if fi, err := f.Stat(); err != nil || fi.Size() != 0 {
		f.Close()
		return fmt.Errorf("eventlog: new active file %s is not empty after setting aside %s", l.path, bad)
	}
	l.setFile(f)
	l.size, l.lines, l.firstSeq = 0, 0, 0
	l.seq, l.head = max(highest, lastSeq), lastHead
	if lastSeq == 0 {
		// prev of a first record is 64 zeros; encode writes that for seq 0
		// only, so carry the zero hash explicitly.
		l.head = [32]byte{}
	}
	good := zeroHash
	if lastSeq > 0 {
		good = hex.EncodeToString(lastHead[:])
	}
	b := Break{Reason: BreakReason, DamagedFile: filepath.Base(aside), DamagedLine: ve.Line, DamagedSeq: ve.Seq,
		Problem: ve.Problem, LastGoodSeq: lastSeq, LastGoodHash: good, At: time.Now().UTC().Format(time.RFC3339Nano)}
	b.Capture, b.Status, b.LogBreak = b.DamagedFile, "quarantined", true
	b.Error = fmt.Sprintf("event log file %s failed verification at line %d (%s): set aside untouched; the chain goes on from seq %d",
		b.DamagedFile, b.DamagedLine, b.Problem, b.LastGoodSeq)
	if _, err := l.appendLocked([]Item{{Kind: KindBreak, Body: b}}); err != nil {
		return err
	}
	l.breaks++
	l.logger.Error("eventlog: a file of the log failed verification: set aside untouched, a new active file goes on from the last good record",
		"damaged", bad, "set_aside_as", aside, "line", ve.Line, "problem", ve.Problem,
		"last_good_seq", lastSeq, "last_good_hash", good, "break_seq", l.seq)
	return nil
}

// highestSeq returns the highest seq among the lines of file that still
// parse as records (0 if none), and the number of lines.
func highestSeq(file string) (top uint64, lines int, err error) {
	f, err := os.Open(file)
	if err != nil {
		return 0, 0, fmt.Errorf("eventlog: %w", err)
	}
	defer f.Close()
	br := bufio.NewReaderSize(f, 64<<10)
	for {
		ln, err := readLine(br)
		if err != nil && err != io.EOF {
			return 0, 0, fmt.Errorf("eventlog: reading %s: %w", file, err)
		}
		if ln.n == 0 {
			return top, lines, nil
		}
		lines++
		if ln.problem() != "" {
			continue
		}
		if h, p := parseHeader(ln.line); p == "" {
			top = max(top, h.seq)
		}
	}
}

// Breaks returns the number of files this Log set aside as damaged since
// it was opened.
func (l *Log) Breaks() int {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.breaks
}

// VerifyResumed verifies the part of the log made of the named files
// (oldest first) that starts at its last break record: the break record's
// prev must equal its last_good_hash, and from it on every record must
// follow as Verify requires. It returns the break record (nil if the
// files hold none), its Break and the Summary of the records from it on.
// It is what is left to check once Verify has named the damage: the
// records written after the damaged file was set aside.
func VerifyResumed(paths ...string) (*Record, Break, Summary, error) {
	var sum Summary
	sum.Head = zeroHash
	var brk *Record
	var b Break
	r := NewReader(paths...)
	defer r.Close()
	var prev string
	for {
		rec, err := r.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			if isDamaged(rec.File) && damageOf(err) != nil {
				continue // the damage Verify names; not part of what resumed
			}
			return brk, b, sum, err
		}
		if rec.Kind == KindBreak {
			var nb Break
			if err := rec.Decode(&nb); err != nil {
				return brk, b, sum, err
			}
			if rec.Prev != nb.LastGoodHash {
				return brk, b, sum, &VerifyError{File: rec.File, Line: rec.LineNo, Seq: rec.Seq,
					Problem: "break record's prev is not its last_good_hash"}
			}
			cp := rec
			brk, b, prev = &cp, nb, rec.Prev
			sum = Summary{Head: zeroHash}
		}
		if brk == nil {
			continue
		}
		want := brk.Seq + sum.Records
		if rec.Seq != want {
			return brk, b, sum, &VerifyError{File: rec.File, Line: rec.LineNo, Seq: want, Problem: seqProblem(want, rec.Seq)}
		}
		if rec.Prev != prev {
			return brk, b, sum, &VerifyError{File: rec.File, Line: rec.LineNo, Seq: want, Problem: prevProblem("the record before it")}
		}
		prev = sha256Hex(rec.Line)
		sum.add(rec, prev)
	}
	sum.Files = len(paths)
	return brk, b, sum, nil
}
