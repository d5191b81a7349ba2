package eventlog

import (
	"bufio"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"log/slog"
	"os"
	"path/filepath"
	"strconv"
	"sync"
	"sync/atomic"

	"quietband/ingest"
)

// ErrFailed is wrapped by every append to a Log whose earlier write, sync or
// rotation failed. Such a Log writes nothing more until Reopen succeeds:
// after a failed fsync the kernel may have dropped the dirty pages, so
// carrying on could leave a hole that nobody notices.
var ErrFailed = errors.New("eventlog: log failed, no appends until it is reopened")

// ErrClosed is returned by operations on a closed Log.
var ErrClosed = errors.New("eventlog: log closed")

// Options configure a Log.
type Options struct {
	// MaxBytes rotates the active file when an append would make it longer
	// than MaxBytes bytes (and it holds at least one record). A single
	// append is never split, so one record or batch longer than MaxBytes
	// still lands whole in a fresh file. 0 means never rotate.
	MaxBytes int64
	// Logger receives diagnostics (torn tails cut, rotations, failures).
	// nil discards them.
	Logger *slog.Logger
	// SetAsideDamaged makes Open and Reopen go on past a file that fails
	// verification (a bad line followed by more lines, or a break of the
	// chain, in the active file or in the newest segment when the active
	// file is empty) instead of refusing: the file is set aside untouched
	// (DamagedName), a new active file is started and its first record, of
	// kind KindBreak, says so and carries the last good hash (see Break).
	// The daemon sets it: it keeps monitoring, and the evidence is kept
	// for Verify to name.
	SetAsideDamaged bool

	// wrap, when set by tests, stands between the Log and the active file
	// on the write path so that Write and Sync can be made to fail.
	wrap func(*os.File) writeSyncer
}

// writeSyncer is the part of *os.File that appends use.
type writeSyncer interface {
	Write([]byte) (int, error)
	Sync() error
}

// Item is one record of a batch: a kind and a body that encoding/json
// marshals to an object.
type Item struct {
	Kind string
	Body any
}

// Log is an open event log. Its methods are safe for concurrent use; appends
// are serialised.
type Log struct {
	mu     sync.Mutex
	path   string
	opt    Options
	logger *slog.Logger

	f *os.File    // active file; nil after a failed rotation or Close
	w writeSyncer // f, or the test hook around it

	size      int64    // bytes in the active file
	lines     int      // records in the active file
	firstSeq  uint64   // seq of the active file's first record; 0 if empty
	seq       uint64   // seq of the last record; 0 for an empty log
	head      [32]byte // SHA-256 of the last line; zero for an empty log
	recovered int64    // bytes cut by the last recovery
	failed    error    // non-nil: the cause of the failed state
	closed    bool
	breaks    int           // files set aside as damaged since Open
	outside   atomic.Uint64 // outside changes taken up (Reattach)
	lock      *writerLock   // one writer per log: held from Open to Close
}

// Open opens the log whose active file is path, creating it (mode 0640)
// if needed, and recovers its state: the seq and hash of the last record
// come from the active file or, if that is empty, from the newest rotated
// segment; older segments are not read (Verify checks them).
//
// A torn tail of the active file (a last line without its newline, or a
// last line that is not JSON or lacks a valid header) is reported through
// the logger, truncated to the end of the last whole record and synced;
// Recovered tells how many bytes were cut. A bad line followed by more
// lines, or a break of the chain within the active file, is corruption:
// Open returns an error naming the file and line (wrapping a *VerifyError)
// and changes nothing.
//
// A log has one writer: Open first takes the log's lock (LockName), and
// while another Log holds it, in this process or another, Open changes
// nothing and returns an error wrapping ErrLocked that names the holder.
func Open(path string, opt Options) (*Log, error) {
	l := &Log{path: filepath.Clean(path), opt: opt, logger: opt.Logger}
	if l.logger == nil {
		l.logger = slog.New(slog.DiscardHandler)
	}
	if opt.MaxBytes < 0 {
		return nil, fmt.Errorf("eventlog: negative MaxBytes %d", opt.MaxBytes)
	}
	lock, err := lockLog(l.path)
	if err != nil {
		return nil, err
	}
	l.lock = lock
	if err := l.recover(); err != nil {
		lock.release()
		return nil, err
	}
	return l, nil
}

// Path returns the name of the active file.
func (l *Log) Path() string { return l.path }

// LastSeq returns the seq of the last record, 0 for an empty log.
func (l *Log) LastSeq() uint64 {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.seq
}

// Head returns the lowercase hex SHA-256 of the last line, which the next
// record will carry as prev: 64 zeros for an empty log. Keeping it outside
// the log directory is what makes a rewrite of the tail detectable.
func (l *Log) Head() string {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.headHex()
}

func (l *Log) headHex() string {
	if l.seq == 0 {
		return zeroHash
	}
	return hex.EncodeToString(l.head[:])
}

// Recovered returns the number of bytes of torn tail that the last Open or
// Reopen cut from the active file, 0 if none.
func (l *Log) Recovered() int64 {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.recovered
}

// Err returns nil while the Log accepts appends, and otherwise an error
// wrapping ErrFailed (or ErrClosed) and the cause.
func (l *Log) Err() error {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.usable()
}

func (l *Log) usable() error {
	if l.closed {
		return ErrClosed
	}
	if l.failed != nil {
		return fmt.Errorf("%w: %w", ErrFailed, l.failed)
	}
	return nil
}

// Append writes one record of the given kind (KindEvent or KindCapture)
// whose members after the header are those of body, marshalled with
// encoding/json:
//
//	{"v":1,"kind":<kind>,"seq":<LastSeq+1>,"prev":<Head>,<members of body>}
//
// The body must marshal to a JSON object without the header members v,
// kind, seq and prev. The line is written with one write and synced before
// Append returns the record. An invalid kind or body is an error that
// leaves the Log as it was; a failed write or sync puts the Log in the
// failed state (see ErrFailed).
func (l *Log) Append(kind string, body any) (Record, error) {
	recs, err := l.AppendBatch([]Item{{Kind: kind, Body: body}})
	if err != nil {
		return Record{}, err
	}
	return recs[0], nil
}

// AppendBatch writes the records of items, in order and with consecutive
// seqs, with a single write and a single sync (group commit: a capture's
// events together with its capture record). Either every item is valid
// and all are written, or none is. An empty batch writes nothing.
func (l *Log) AppendBatch(items []Item) ([]Record, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	if err := l.usable(); err != nil {
		return nil, err
	}
	for i, it := range items {
		if it.Kind == KindBreak {
			return nil, fmt.Errorf("eventlog: item %d: kind %q is written by the log itself", i, it.Kind)
		}
	}
	return l.appendLocked(items)
}

// appendLocked is AppendBatch with l.mu held and the Log usable.
func (l *Log) appendLocked(items []Item) ([]Record, error) {
	if len(items) == 0 {
		return nil, nil
	}
	buf, ends, err := l.encode(items)
	if err != nil {
		return nil, err
	}
	if l.opt.MaxBytes > 0 && l.size > 0 && l.size+int64(len(buf)) > l.opt.MaxBytes {
		if err := l.rotate(); err != nil {
			return nil, l.fail("rotating", err)
		}
	}
	n, err := l.w.Write(buf)
	if err == nil && n != len(buf) {
		err = io.ErrShortWrite
	}
	if err != nil {
		return nil, l.fail("writing", err)
	}
	if err := l.w.Sync(); err != nil {
		return nil, l.fail("syncing", err)
	}

	recs := make([]Record, len(items))
	start := 0
	prev := l.headHex()
	for i, end := range ends {
		line := buf[start:end:end]
		recs[i] = Record{
			Seq:    l.seq + 1,
			Kind:   items[i].Kind,
			Prev:   prev,
			Line:   line,
			File:   l.path,
			LineNo: l.lines + 1,
		}
		l.seq++
		l.lines++
		l.head = sha256.Sum256(line)
		prev = hex.EncodeToString(l.head[:])
		start = end + 1
	}
	if l.firstSeq == 0 {
		l.firstSeq = recs[0].Seq
	}
	l.size += int64(len(buf))
	return recs, nil
}

// encode builds the lines of items into one buffer, each followed by '\n';
// ends[i] is the index of line i's newline.
func (l *Log) encode(items []Item) (buf []byte, ends []int, err error) {
	bodies := make([][]byte, len(items))
	size := 0
	for i, it := range items {
		if it.Kind != KindEvent && it.Kind != KindCapture && it.Kind != KindBreak {
			return nil, nil, fmt.Errorf("eventlog: item %d: kind %q is not %q or %q", i, it.Kind, KindEvent, KindCapture)
		}
		b, err := json.Marshal(it.Body)
		if err != nil {
			return nil, nil, fmt.Errorf("eventlog: item %d: marshalling %s body: %w", i, it.Kind, err)
		}
		if err := checkBody(b); err != nil {
			return nil, nil, fmt.Errorf("eventlog: item %d: %s body %w", i, it.Kind, err)
		}
		bodies[i] = b
		size += len(b) + 128
	}
	buf = make([]byte, 0, size)
	ends = make([]int, len(items))
	seq := l.seq
	var prev [64]byte
	if seq == 0 {
		copy(prev[:], zeroHash)
	} else {
		hex.Encode(prev[:], l.head[:])
	}
	for i, it := range items {
		seq++
		start := len(buf)
		buf = append(buf, `{"v":1,"kind":"`...)
		if it.Kind == KindBreak {
			buf = append(buf, KindCapture...) // see KindBreak
		} else {
			buf = append(buf, it.Kind...)
		}
		buf = append(buf, `","seq":`...)
		buf = strconv.AppendUint(buf, seq, 10)
		buf = append(buf, `,"prev":"`...)
		buf = append(buf, prev[:]...)
		buf = append(buf, '"')
		if b := bodies[i]; b[1] == '}' {
			buf = append(buf, '}')
		} else {
			buf = append(buf, ',')
			buf = append(buf, b[1:]...)
		}
		if n := len(buf) - start; n > MaxLine {
			return nil, nil, fmt.Errorf("eventlog: item %d: record of %d bytes is longer than MaxLine (%d)", i, n, MaxLine)
		}
		h := sha256.Sum256(buf[start:])
		hex.Encode(prev[:], h[:])
		ends[i] = len(buf)
		buf = append(buf, '\n')
	}
	return buf, ends, nil
}

// checkBody checks that b, the output of json.Marshal, is an object whose
// members do not collide with the header.
func checkBody(b []byte) error {
	// json.Marshal output is compact (it compacts MarshalJSON results too)
	// and escapes control characters, so it holds no newline and starts
	// with '{' if it is an object.
	if len(b) < 2 || b[0] != '{' {
		return fmt.Errorf("is %s, not a JSON object", clip(b))
	}
	var clash []byte
	forMembers(b, func(key, _ []byte) {
		if clash == nil && headerIndex(key) >= 0 {
			clash = key
		}
	})
	if clash != nil {
		return fmt.Errorf("has member %s, which is a header field the log sets", clash)
	}
	return nil
}

// fail puts the Log in the failed state and returns the error for the
// caller.
func (l *Log) fail(what string, err error) error {
	l.failed = fmt.Errorf("%s %s: %w", what, l.path, err)
	l.logger.Error("eventlog: append failed; refusing further appends until reopened",
		"file", l.path, "op", what, "err", err)
	return fmt.Errorf("%w: %w", ErrFailed, l.failed)
}

// rotate renames the active file to its segment name and starts an empty
// active file, fsyncing the directory after each step.
func (l *Log) rotate() error {
	seg := SegmentName(l.path, l.firstSeq)
	if _, err := os.Lstat(seg); err == nil {
		return fmt.Errorf("segment %s already exists", seg)
	} else if !errors.Is(err, fs.ErrNotExist) {
		return err
	}
	err := l.f.Close()
	l.f, l.w = nil, nil
	if err != nil {
		return err
	}
	dir := filepath.Dir(l.path)
	if err := os.Rename(l.path, seg); err != nil {
		return err
	}
	if err := ingest.SyncDir(dir); err != nil {
		return err
	}
	f, err := os.OpenFile(l.path, os.O_RDWR|os.O_APPEND|os.O_CREATE|os.O_EXCL, 0o640)
	if err != nil {
		return err
	}
	if err := ingest.SyncDir(dir); err != nil {
		f.Close()
		return err
	}
	l.setFile(f)
	l.size, l.lines, l.firstSeq = 0, 0, 0
	l.logger.Info("eventlog: rotated", "segment", seg, "first_seq", firstSeqOf(seg, l.path), "last_seq", l.seq)
	return nil
}

func firstSeqOf(seg, path string) uint64 {
	_, stem, ext := splitName(path)
	n, _ := segmentSeq(filepath.Base(seg), stem, ext)
	return n
}

func (l *Log) setFile(f *os.File) {
	l.f, l.w = f, f
	if l.opt.wrap != nil {
		l.w = l.opt.wrap(f)
	}
}

// Reopen closes the active file and opens it again (after Reattach deals
// with an active file moved, deleted or cut outside), re-running the
// recovery that Open does (for instance on SIGHUP, or once disk space is back after
// a failed append). If recovery succeeds the failed state is cleared. A
// record whose append reported an error may or may not be in the log
// afterwards, depending on how far its write got; LastSeq tells.
func (l *Log) Reopen() error {
	l.mu.Lock()
	defer l.mu.Unlock()
	if l.closed {
		return ErrClosed
	}
	if l.f != nil {
		// The active file moved away, deleted or cut first: keep what it
		// held (Reattach), or the recovery below would start the seqs over.
		if _, err := l.reattach(); err != nil {
			l.failed = fmt.Errorf("reattaching %s: %w", l.path, err)
			return l.failed
		}
	}
	var cerr error
	if l.f != nil {
		cerr = l.f.Close()
		l.f, l.w = nil, nil
	}
	if err := l.recover(); err != nil {
		l.failed = err
		return err
	}
	l.failed = nil
	if cerr != nil {
		l.logger.Warn("eventlog: closing the old file on reopen", "file", l.path, "err", cerr)
	}
	return nil
}

// Close closes the active file and releases the log's lock. Later appends
// return ErrClosed.
func (l *Log) Close() error {
	l.mu.Lock()
	defer l.mu.Unlock()
	if l.closed {
		return nil
	}
	l.closed = true
	defer l.lock.release()
	if l.f == nil {
		return nil
	}
	err := l.f.Close()
	l.f, l.w = nil, nil
	if err != nil {
		return fmt.Errorf("eventlog: closing %s: %w", l.path, err)
	}
	return nil
}

// recover opens the active file and sets the Log's state from it (or from
// the newest rotated segment when it is empty), cutting a torn tail.
func (l *Log) recover() error {
	f, err := os.OpenFile(l.path, os.O_RDWR|os.O_APPEND|os.O_CREATE|os.O_EXCL, 0o640)
	switch {
	case err == nil:
		if err := ingest.SyncDir(filepath.Dir(l.path)); err != nil {
			f.Close()
			return fmt.Errorf("eventlog: creating %s: %w", l.path, err)
		}
	case errors.Is(err, fs.ErrExist):
		f, err = os.OpenFile(l.path, os.O_RDWR|os.O_APPEND, 0)
		if err != nil {
			return fmt.Errorf("eventlog: %w", err)
		}
	default:
		return fmt.Errorf("eventlog: %w", err)
	}

	st, err := scanFile(f, l.path)
	if err != nil {
		f.Close()
		if ve := damageOf(err); ve != nil && l.opt.SetAsideDamaged {
			if st.sure() == 0 {
				// Nothing good in it: the chain goes on from the newest
				// segment's last record.
				if err := l.recoverFromSegment(); err != nil {
					return err
				}
			}
			return l.setAsideDamaged(l.path, st, ve)
		}
		return err
	}
	l.recovered = 0
	if st.torn != nil {
		cut := st.size - st.good
		if err := f.Truncate(st.good); err != nil {
			f.Close()
			return fmt.Errorf("eventlog: cutting torn tail of %s: %w", l.path, err)
		}
		if err := f.Sync(); err != nil {
			f.Close()
			return fmt.Errorf("eventlog: cutting torn tail of %s: %w", l.path, err)
		}
		l.recovered = cut
		l.logger.Warn("eventlog: cut torn tail", "file", l.path, "line", st.torn.Line,
			"offset", st.good, "dropped_bytes", cut, "reason", st.torn.Problem)
	}
	l.size, l.lines, l.firstSeq = st.good, st.lines, st.first
	l.seq, l.head = st.last, st.head

	if st.lines == 0 {
		if err := l.recoverFromSegment(); err != nil {
			f.Close()
			var bad *damagedSegment
			if errors.As(err, &bad) && l.opt.SetAsideDamaged {
				l.seq, l.head = bad.prevSeq, bad.prevHead
				return l.setAsideDamaged(bad.path, bad.st, bad.ve)
			}
			return err
		}
	}
	l.setFile(f)
	return nil
}

// damagedSegment is recoverFromSegment's error for a newest segment that
// fails verification: the segment, what was read of it, the problem, and
// the last record of the segment before it.
type damagedSegment struct {
	path     string
	st       fileState
	ve       *VerifyError
	err      error
	prevSeq  uint64
	prevHead [32]byte
}

func (e *damagedSegment) Error() string { return e.err.Error() }
func (e *damagedSegment) Unwrap() error { return e.err }

// recoverFromSegment takes the last seq and hash from the newest rotated
// segment, which must be whole: segments are sealed, so nothing in them is
// a torn write.
func (l *Log) recoverFromSegment() error {
	all, err := rotated(l.path)
	if err != nil {
		return err
	}
	l.seq, l.head = 0, [32]byte{}
	var segs []segment
	for _, s := range all {
		if !s.damaged {
			segs = append(segs, s)
		}
	}
	if len(segs) == 0 {
		return nil
	}
	seg := segs[len(segs)-1]
	st, err := scanPath(seg.path)
	if ve := damageOf(err); ve != nil || (err == nil && st.torn != nil) {
		if ve == nil {
			ve = st.torn
			err = fmt.Errorf("eventlog: refusing to open %s: %w", l.path, st.torn)
		}
		bad := &damagedSegment{path: seg.path, st: st, ve: ve, err: err}
		if len(segs) > 1 && st.sure() == 0 {
			if pst, perr := scanPath(segs[len(segs)-2].path); perr == nil && pst.torn == nil {
				bad.prevSeq, bad.prevHead = pst.last, pst.head
			}
		}
		return bad
	}
	if err != nil {
		return err
	}
	if st.lines == 0 {
		return fmt.Errorf("eventlog: refusing to open %s: rotated segment %s is empty", l.path, seg.path)
	}
	if st.first != seg.first {
		return fmt.Errorf("eventlog: refusing to open %s: %w", l.path, &VerifyError{File: seg.path, Line: 1, Seq: st.first,
			Problem: fmt.Sprintf("first record has seq %d but the segment name says %d", st.first, seg.first)})
	}
	l.seq, l.head = st.last, st.head
	return nil
}

// scanPath is scanFile on the file at path.
func scanPath(path string) (fileState, error) {
	f, err := os.Open(path)
	if err != nil {
		return fileState{}, fmt.Errorf("eventlog: %w", err)
	}
	defer f.Close()
	return scanFile(f, path)
}

// sha256Hex is the lowercase hex SHA-256 of line.
func sha256Hex(line []byte) string {
	h := sha256.Sum256(line)
	return hex.EncodeToString(h[:])
}

// fileState is what scanFile learns about one file.
type fileState struct {
	lines       int
	first, last uint64   // seqs of the first and last whole records
	head        [32]byte // SHA-256 of the last whole record's line
	good        int64    // offset just past the last whole record
	size        int64    // bytes read
	torn        *VerifyError
	// prevHead is the SHA-256 of the line before the last whole record;
	// chainBreak says the scan ended at a line whose prev is not the
	// last whole record's hash: that record or this line was changed.
	prevHead   [32]byte
	chainBreak bool
}

// sure returns how many of the file's first records are beyond doubt: a
// changed line is found at the line after it, whose prev no longer
// matches, so after a chain break the last whole record is in doubt too.
func (st fileState) sure() int {
	if st.chainBreak {
		return st.lines - 1
	}
	return st.lines
}

// scanFile reads a log file from its start, checking every line's header
// and the chain within the file. A bad last line is returned as torn; a
// bad line followed by another line, or a chain break, is an error.
func scanFile(r io.Reader, name string) (fileState, error) {
	var st fileState
	br := bufio.NewReaderSize(r, 64<<10)
	lineNo := 0
	for {
		ln, err := readLine(br)
		if err != nil {
			return st, fmt.Errorf("eventlog: reading %s: %w", name, err)
		}
		if ln.n == 0 {
			return st, nil
		}
		lineNo++
		st.size += ln.n
		if st.torn != nil {
			return st, fmt.Errorf("eventlog: refusing to open %s: %w (followed by line %d, so it is not a torn write: corruption)",
				name, st.torn, lineNo)
		}
		problem := ln.problem()
		var h header
		if problem == "" {
			h, problem = parseHeader(ln.line)
		}
		if problem != "" {
			st.torn = &VerifyError{File: name, Line: lineNo, Seq: st.last + 1, Problem: problem}
			continue
		}
		if st.lines > 0 {
			if h.seq != st.last+1 {
				return st, fmt.Errorf("eventlog: refusing to open %s: %w", name,
					&VerifyError{File: name, Line: lineNo, Seq: st.last + 1, Problem: seqProblem(st.last+1, h.seq)})
			}
			if h.prev != hex.EncodeToString(st.head[:]) {
				st.chainBreak = true
				return st, fmt.Errorf("eventlog: refusing to open %s: %w", name,
					&VerifyError{File: name, Line: lineNo, Seq: h.seq, Problem: prevProblem(fmt.Sprintf("line %d", lineNo-1))})
			}
		} else {
			st.first = h.seq
		}
		st.lines++
		st.last = h.seq
		st.prevHead = st.head
		st.head = sha256.Sum256(ln.line)
		st.good = st.size
	}
}
