// Package ledger is what the event log says is done, kept on disk so that
// the daemon neither holds the log's history in memory nor re-reads it (or the
// captures) at every start. It is derived data: the event log stays the
// record, and the ledger is caught up from it, or rebuilt from it, at start.
//
// ledger.db is a bbolt file (a B+tree in one file, one writer, an exclusive
// lock) with three buckets:
//
//	meta      format → ledgerFormat; seq → the seq of the last log record
//	          applied (8 bytes, big-endian); head → SHA-256 of that record's
//	          line (32 bytes); captures → the number of capture names
//	captures  capture key → the contents it was recorded with (data
//	          SHA-256 and metadata SHA-256), each with its outcome (""
//	          analysed, or the quarantine reason; the latest record wins),
//	          and the data file's identity (size, mtime, ctime, device,
//	          inode) when it was recorded, with the SHA-256 it had then
//	events    event id → nothing: every event id in the log
//
// A capture is its input and its name (issue 17, item 6: two antennas'
// folders may hold the same names, even the same bytes): its key is the
// input, a NUL and the name (Key), or the name alone for a record without
// an input (replay's, or one written before records carried the input).
// Lookup falls back on that entry, so that a log written before the
// change still says what is done. Its content is the data's SHA-256 and
// the metadata's (detect.CaptureRecord.MetadataSHA256, issue 17, item 7):
// corrected metadata is a content not recorded yet, analysed again; a
// record without a metadata SHA-256 (a raw file, metadata that could not
// be read, or a record written before the field) stands for any
// metadata.
//
// Every event id is kept, not only those of captures in flight: an id is
// derived from the data's SHA-256 (with the input and the metadata's),
// the detection and the configuration (detect.eventID), not from the
// capture's name, so the same bytes recorded under a second name in the
// same input give the same ids, and only the full set keeps an id
// from being written twice. On disk that costs a 13-byte key and bbolt's
// 16-byte element header an event, and no heap.
//
// The identity makes a later sighting of an unchanged file cheap: same size,
// modification and change times, device and inode as when its record was
// written means the same content, so the SHA-256 is taken from the ledger
// instead of reading the file. Any write to the file changes its mtime and
// ctime (and setting the mtime back changes the ctime), so a changed file is
// hashed as before.
//
// The ledger is written after the commits to the event log (which is
// fsynced first), in bbolt transactions that also store seq and head. A
// bbolt commit fsyncs twice (pages, then the meta page): 0.6–0.7 ms here
// (BenchmarkLedgerNote), as much again as the log's own append, which in
// a burst of small captures made the daemon up to a fifth slower. Rather
// than turn that fsync off (NoSync: a power cut can then leave a file whose
// meta page points at pages never written, which bbolt does not detect and
// may crash on), commits are grouped: a note is written at once when the
// last write is GroupWait old, else it waits (in memory, where
// lookups see it) for the next write, at most GroupWait or
// GroupMax records later, or housekeeping's. The file is then always
// a valid tree that lags the log by at most that much, and a start after a
// crash applies the missing records again from the log (sync).
package ledger

import (
	"bytes"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"log/slog"
	"os"
	"path/filepath"
	"runtime/debug"
	"time"

	bolt "go.etcd.io/bbolt"

	"quietband/detect"
	"quietband/metrics/eventlog"
)

const (
	// FileName is the ledger's file in the state folder.
	FileName = "ledger.db"
	// ledgerFormat is the layout version in meta/format; another value
	// makes the ledger be rebuilt. 2: keys with the input, contents with
	// the metadata's SHA-256 (issue 17, items 6 and 7).
	ledgerFormat = 2
	// LockWait is how long opening waits for another process's lock
	// on the file before giving up.
	LockWait = 2 * time.Second
	// ledgerBatch is how many log records one transaction applies when the
	// ledger is caught up or rebuilt from the log.
	ledgerBatch = 2048
	// refreshMax is how many identity refreshes wait before they are
	// written without waiting for housekeeping.
	refreshMax = 512
	// GroupWait and GroupMax bound how long, and for how many
	// records, noted records wait to be written with later ones.
	GroupWait = 200 * time.Millisecond
	GroupMax  = 1024
)

var (
	bucketMeta     = []byte("meta")
	bucketCaptures = []byte("captures")
	bucketEvents   = []byte("events")
	keyFormat      = []byte("format")
	keySeq         = []byte("seq")
	keyHead        = []byte("head")
	keyCaptures    = []byte("captures")
)

// outcome is one content a capture was recorded with, and how.
type outcome struct {
	sha    string // the data's SHA-256
	meta   string // the metadata's (MetadataSHA256); "" when the record gave none
	reason string // "" analysed; else why it was quarantined
}

// Key is the ledger's key of the capture name found in input: the input,
// a NUL and the name, or the name alone without an input. Names are
// paths, which hold no NUL.
func Key(input, name string) string {
	if input == "" {
		return name
	}
	return input + "\x00" + name
}

// Entry is what the ledger knows of one capture (a name in an input).
type Entry struct {
	outcomes []outcome
	// The data file's identity when the latest record was written, and
	// the SHA-256 it had; hasFile is false when none was kept (the record
	// came from the log, or the file changed while it was analysed).
	hasFile bool
	file    FileID
	fileSHA string
}

// Outcome returns the recorded outcome of the content whose data has
// SHA-256 sha and whose metadata has SHA-256 meta ("" for none): that of
// a record of both, else that of a record of the data that gave no
// metadata SHA-256 (which stands for any metadata).
func (e *Entry) Outcome(sha, meta string) (reason string, ok bool) {
	for _, o := range e.outcomes {
		if o.sha == sha && o.meta == meta {
			return o.reason, true
		}
	}
	for _, o := range e.outcomes {
		if o.sha == sha && o.meta == "" {
			return o.reason, true
		}
	}
	return "", false
}

// hasData reports whether a record of the entry has data SHA-256 sha.
func (e *Entry) hasData(sha string) bool {
	for _, o := range e.outcomes {
		if o.sha == sha {
			return true
		}
	}
	return false
}

// shaFor returns the SHA-256 of the data file without reading it, when
// the file still has the identity it had when the capture was recorded.
func (e *Entry) SHAFor(id FileID, ok bool) (string, bool) {
	if !ok || !e.hasFile || e.file != id {
		return "", false
	}
	return e.fileSHA, true
}

// Latest returns the content of the capture's latest record (of a
// content recorded before, its first record counts): the data's SHA-256,
// "" if none, and the metadata's, "" if none. A record of other content
// replaces it (issue 17, items 4 and 7).
func (e *Entry) Latest() (sha, meta string) {
	if len(e.outcomes) == 0 {
		return "", ""
	}
	o := e.outcomes[len(e.outcomes)-1]
	return o.sha, o.meta
}

// record applies a capture record: content (sha, meta) has the outcome
// reason, and the data file had identity *file (nil: not known).
func (e *Entry) record(sha, meta, reason string, file *FileID) {
	found := false
	for i := range e.outcomes {
		if e.outcomes[i].sha == sha && e.outcomes[i].meta == meta {
			e.outcomes[i].reason, found = reason, true
		}
	}
	if !found {
		e.outcomes = append(e.outcomes, outcome{sha, meta, reason})
	}
	e.hasFile = file != nil && sha != ""
	if e.hasFile {
		e.file, e.fileSHA = *file, sha
	} else {
		e.file, e.fileSHA = FileID{}, ""
	}
}

// encode lays the entry out as
//
//	uvarint n, n × (sha, meta, uvarint len(reason), reason),
//	0 | 1 sha varint(size) varint(mtime) varint(ctime) uvarint(dev) uvarint(ino)
//
// with each sha as 1 and 32 bytes when it is lowercase hex of 32 bytes,
// else 0, uvarint length and the string.
func (e *Entry) encode() []byte {
	b := make([]byte, 0, 16+len(e.outcomes)*40+48)
	b = binary.AppendUvarint(b, uint64(len(e.outcomes)))
	for _, o := range e.outcomes {
		b = appendSHA(b, o.sha)
		b = appendSHA(b, o.meta)
		b = binary.AppendUvarint(b, uint64(len(o.reason)))
		b = append(b, o.reason...)
	}
	if !e.hasFile {
		return append(b, 0)
	}
	b = append(b, 1)
	b = appendSHA(b, e.fileSHA)
	b = binary.AppendVarint(b, e.file.size)
	b = binary.AppendVarint(b, e.file.mtime)
	b = binary.AppendVarint(b, e.file.ctime)
	b = binary.AppendUvarint(b, e.file.dev)
	return binary.AppendUvarint(b, e.file.ino)
}

func appendSHA(b []byte, sha string) []byte {
	if raw, err := hex.DecodeString(sha); err == nil && len(raw) == sha256.Size && hex.EncodeToString(raw) == sha {
		return append(append(b, 1), raw...)
	}
	b = append(b, 0)
	b = binary.AppendUvarint(b, uint64(len(sha)))
	return append(b, sha...)
}

// errEntry reports a ledger value that does not decode.
var errEntry = errors.New("malformed capture entry")

// decodeEntry reverses encode. The strings are copies: b may be bbolt's
// memory map, valid only within its transaction.
func decodeEntry(b []byte) (Entry, error) {
	var e Entry
	d := entryDecoder{b: b}
	n := d.uvarint()
	if n > uint64(len(b)) {
		return e, errEntry
	}
	e.outcomes = make([]outcome, 0, n)
	for range n {
		sha := d.sha()
		meta := d.sha()
		reason := d.str()
		e.outcomes = append(e.outcomes, outcome{sha, meta, reason})
	}
	switch d.byte() {
	case 0:
	case 1:
		e.hasFile = true
		e.fileSHA = d.sha()
		e.file.size, e.file.mtime, e.file.ctime = d.varint(), d.varint(), d.varint()
		e.file.dev, e.file.ino = d.uvarint(), d.uvarint()
	default:
		d.bad = true
	}
	if d.bad || len(d.b) != 0 {
		return Entry{}, errEntry
	}
	return e, nil
}

type entryDecoder struct {
	b   []byte
	bad bool
}

func (d *entryDecoder) uvarint() uint64 {
	v, n := binary.Uvarint(d.b)
	if n <= 0 {
		d.bad, d.b = true, nil
		return 0
	}
	d.b = d.b[n:]
	return v
}

func (d *entryDecoder) varint() int64 {
	v, n := binary.Varint(d.b)
	if n <= 0 {
		d.bad, d.b = true, nil
		return 0
	}
	d.b = d.b[n:]
	return v
}

func (d *entryDecoder) byte() byte {
	if len(d.b) == 0 {
		d.bad = true
		return 0
	}
	c := d.b[0]
	d.b = d.b[1:]
	return c
}

func (d *entryDecoder) take(n uint64) []byte {
	if n > uint64(len(d.b)) {
		d.bad, d.b = true, nil
		return nil
	}
	s := d.b[:n]
	d.b = d.b[n:]
	return s
}

func (d *entryDecoder) str() string { return string(d.take(d.uvarint())) }

func (d *entryDecoder) sha() string {
	switch d.byte() {
	case 1:
		return hex.EncodeToString(d.take(sha256.Size))
	case 0:
		return d.str()
	}
	d.bad = true
	return ""
}

// eventKey is the events-bucket key of an event id: 0 and the bytes of a
// lowercase hex id (the ids detect makes), else 1 and the id as it is.
func eventKey(id string) []byte {
	if raw, err := hex.DecodeString(id); err == nil && hex.EncodeToString(raw) == id {
		return append([]byte{0}, raw...)
	}
	return append([]byte{1}, id...)
}

// Stamp is the identity a capture's data file had when its record was
// written (or, for a refresh, when it was hashed and found recorded).
type Stamp struct {
	Input string // the capture's input
	Name  string // the capture's name
	ID    FileID
	SHA   string // refreshes only: the SHA-256 the file had
}

// noteBatch is records noted together, their bodies, and the stamps of
// their captures.
type noteBatch struct {
	recs   []eventlog.Record
	bodies []recordBody // bodies[i] is recs[i]'s; ok false if it does not decode
	stamps []Stamp
}

func newBatch(recs []eventlog.Record, stamps []Stamp) noteBatch {
	b := noteBatch{recs: recs, bodies: make([]recordBody, len(recs)), stamps: stamps}
	for i, rec := range recs {
		b.bodies[i] = readBody(rec)
	}
	return b
}

// capNote is a capture record not yet written, as lookups apply it.
type capNote struct {
	sha, meta, reason string
	file              *FileID
}

// Ledger is an open ledger. It is used from one goroutine (the daemon's
// main loop).
type Ledger struct {
	path    string // state_dir/ledger.db
	logPath string // the event log's active file
	log     *slog.Logger
	db      *bolt.DB

	// What the file holds: the last record applied and the number of
	// capture names.
	seq  uint64
	head [32]byte
	n    uint64

	// Noted records not yet written (grouped, or their write failed),
	// and what lookups see of them. tailSeq and tailHead are the last
	// record noted, written or not.
	unsaved     []noteBatch
	pendingCaps map[string][]capNote // by Key
	pendingIDs  map[string]struct{}
	tailSeq     uint64
	tailHead    [32]byte
	lastWrite   time.Time
	groupWait   time.Duration // GroupWait; 0 writes every note at once

	refresh map[string]Stamp // identities to remember by Key, written by save

	// While the file cannot be written (unwritable.go): why, and whether
	// it lags the log, the pending maps then holding every record after
	// seq; lastTry is the last attempt to catch it up.
	unwritable error
	lagging    bool
	lastTry    time.Time

	missing  bool // the file did not exist when opened
	applied  int  // records applied by the last sync
	fullScan bool // the last sync read the whole log (a new or rebuilt ledger)
}

// Open opens state_dir/ledger.db, taking its lock (so that a second
// daemon on the same state folder fails at once with an error naming the
// file), or makes it. A file that does not open as a bbolt database, is
// shorter than its own pages say, fails bbolt's consistency check or lacks
// what the ledger keeps is set aside (renamed with a suffix) with a
// warning and a new one is started; sync then fills it from the log.
func Open(stateDir, logPath string, log *slog.Logger) (*Ledger, error) {
	lg := &Ledger{path: filepath.Join(stateDir, FileName), logPath: logPath, log: log, refresh: map[string]Stamp{},
		pendingCaps: map[string][]capNote{}, pendingIDs: map[string]struct{}{}, groupWait: GroupWait}
	st, err := os.Lstat(lg.path)
	switch {
	case errors.Is(err, fs.ErrNotExist):
		lg.missing = true
	case err == nil && st.Size() == 0:
		// bbolt would take an empty file for a new database: say so.
		if err := lg.reset(nil, "bad", "empty file"); err != nil {
			return nil, err
		}
		return lg, nil
	}
	db, err := openBolt(lg.path)
	if errors.Is(err, bolt.ErrTimeout) {
		return nil, fmt.Errorf("ledger %s is locked by another process (another quietband run on state_dir %s?); waited %v",
			lg.path, stateDir, LockWait)
	}
	why := ""
	switch {
	case err != nil && lg.missing:
		// The file cannot be made (state disk full, read-only): the
		// ledger runs from the log (see unwritable.go) until it can.
		os.Remove(lg.path) // what bbolt began of it
		lg.setUnwritable(fmt.Errorf("creating %s: %w", lg.path, err))
		return lg, nil
	case err != nil:
		why = "does not open: " + err.Error()
	default:
		why = lg.load(db)
	}
	if why != "" {
		if err := lg.reset(db, "bad", why); err != nil {
			return nil, err
		}
		return lg, nil
	}
	lg.db = db
	return lg, nil
}

// openBolt opens a bbolt file, turning a panic of bbolt's on a damaged
// file (or a fault on its memory map past the end of a cut file) into an
// error.
func openBolt(path string) (db *bolt.DB, err error) {
	defer debug.SetPanicOnFault(debug.SetPanicOnFault(true))
	defer func() {
		if r := recover(); r != nil {
			db, err = nil, fmt.Errorf("bbolt: %v", r)
		}
	}()
	return bolt.Open(path, 0o640, &bolt.Options{Timeout: LockWait})
}

// load checks an opened file and reads its meta bucket into lg. It
// returns why the file cannot be used, "" if it can. A file without any
// bucket is new and is initialised.
func (lg *Ledger) load(db *bolt.DB) (why string) {
	// A damaged file can make bbolt panic, and fault on its memory map
	// (SetPanicOnFault turns that into a panic on this goroutine).
	defer debug.SetPanicOnFault(debug.SetPanicOnFault(true))
	defer func() {
		if r := recover(); r != nil {
			why = fmt.Sprintf("damaged: %v", r)
		}
	}()
	st, err := os.Stat(lg.path)
	if err != nil {
		return err.Error()
	}
	empty := false
	err = db.View(func(tx *bolt.Tx) error {
		if st.Size() < tx.Size() {
			why = fmt.Sprintf("truncated: %d bytes, its pages reach %d", st.Size(), tx.Size())
			return nil
		}
		empty = tx.Bucket(bucketMeta) == nil && tx.Bucket(bucketCaptures) == nil && tx.Bucket(bucketEvents) == nil
		if empty {
			return nil
		}
		for err := range tx.Check() { // drained: Check's goroutine sends every problem
			if why == "" {
				why = "fails the consistency check: " + err.Error()
			}
		}
		if why != "" {
			return nil
		}
		m, c, e := tx.Bucket(bucketMeta), tx.Bucket(bucketCaptures), tx.Bucket(bucketEvents)
		if m == nil || c == nil || e == nil {
			why = "lacks a bucket"
			return nil
		}
		format, seq, head, n := m.Get(keyFormat), m.Get(keySeq), m.Get(keyHead), m.Get(keyCaptures)
		if len(format) != 8 || len(seq) != 8 || len(head) != 32 || len(n) != 8 {
			why = "meta bucket incomplete"
			return nil
		}
		if f := binary.BigEndian.Uint64(format); f != ledgerFormat {
			why = fmt.Sprintf("layout version %d, this quietband keeps %d", f, ledgerFormat)
			return nil
		}
		lg.seq, lg.n = binary.BigEndian.Uint64(seq), binary.BigEndian.Uint64(n)
		copy(lg.head[:], head)
		return nil
	})
	if err != nil {
		return err.Error()
	}
	if why != "" {
		return why
	}
	if empty {
		if err := initLedger(db); err != nil {
			return "cannot be initialised: " + err.Error()
		}
		lg.seq, lg.head, lg.n = 0, [32]byte{}, 0
	}
	lg.tailSeq, lg.tailHead = lg.seq, lg.head
	return ""
}

// initLedger makes the buckets of an empty ledger.
func initLedger(db *bolt.DB) error {
	return db.Update(func(tx *bolt.Tx) error {
		for _, name := range [][]byte{bucketCaptures, bucketEvents} {
			if _, err := tx.CreateBucketIfNotExists(name); err != nil {
				return err
			}
		}
		m, err := tx.CreateBucketIfNotExists(bucketMeta)
		if err != nil {
			return err
		}
		if err := m.Put(keyFormat, binary.BigEndian.AppendUint64(nil, ledgerFormat)); err != nil {
			return err
		}
		return putMeta(m, 0, [32]byte{}, 0)
	})
}

func putMeta(m *bolt.Bucket, seq uint64, head [32]byte, n uint64) error {
	if err := m.Put(keySeq, binary.BigEndian.AppendUint64(nil, seq)); err != nil {
		return err
	}
	if err := m.Put(keyHead, bytes.Clone(head[:])); err != nil {
		return err
	}
	return m.Put(keyCaptures, binary.BigEndian.AppendUint64(nil, n))
}

// reset sets the ledger file aside (renamed to ledger.db.<tag>-<UTC time>)
// with a warning giving why, and starts an empty one. old, if not nil, is
// the open old file; it is closed first. If no new file can be made the
// ledger runs from the log (unwritable.go).
func (lg *Ledger) reset(old *bolt.DB, tag, why string) error {
	aside := ""
	if _, err := os.Lstat(lg.path); err == nil {
		aside = lg.path + "." + tag + "-" + time.Now().UTC().Format("20060102T150405Z")
		for n := 2; ; n++ {
			if _, err := os.Lstat(aside); errors.Is(err, fs.ErrNotExist) {
				break
			}
			aside = fmt.Sprintf("%s.%s-%s-%d", lg.path, tag, time.Now().UTC().Format("20060102T150405Z"), n)
		}
		if err := os.Rename(lg.path, aside); err != nil {
			return fmt.Errorf("ledger: setting aside %s: %w", lg.path, err)
		}
	}
	lg.log.Warn("quietband run: ledger set aside; rebuilding it from the event log", "file", lg.path, "moved_to", aside, "reason", why)
	if old != nil {
		closeQuietly(old)
	}
	lg.db = nil
	lg.seq, lg.head, lg.n = 0, [32]byte{}, 0
	db, err := makeBolt(lg.path)
	if err != nil {
		// No new file (state disk full): run from the log until one can
		// be made (unwritable.go).
		lg.setUnwritable(fmt.Errorf("making a new %s: %w", lg.path, err))
		lg.tailSeq, lg.tailHead = 0, [32]byte{}
		lg.dropUnsaved()
		lg.missing = false
		return nil
	}
	lg.db = db
	lg.tailSeq, lg.tailHead = 0, [32]byte{}
	lg.dropUnsaved()
	lg.missing = false
	return nil
}

// dropUnsaved forgets the records not yet written (they are in the log).
func (lg *Ledger) dropUnsaved() {
	lg.unsaved = nil
	clear(lg.pendingCaps)
	clear(lg.pendingIDs)
}

// errStale ends a catch-up whose starting point is not in the log.
var errStale = errors.New("ledger does not match the event log")

// sync brings the ledger up to date with the event log: if the log's
// record at the ledger's seq is the one it applied (same SHA-256 of the
// line), the records after it are applied; otherwise (the log was replaced,
// cut or is shorter) the ledger is set aside and rebuilt from the whole log.
func (lg *Ledger) Sync() error {
	lg.applied, lg.fullScan = 0, lg.seq == 0
	// Whatever was noted and not written is in the log: read again below,
	// written or (if the file cannot be written) held in memory.
	lg.dropUnsaved()
	lg.lagging = false
	lg.tailSeq, lg.tailHead = lg.seq, lg.head
	why, err := lg.catchUp()
	tag := "stale"
	if errors.Is(err, errDamagedOpen) {
		why, err, tag = err.Error(), nil, "bad"
	}
	if err == nil && why != "" {
		old := lg.db
		if tag == "bad" {
			abandon(old)
			old = nil
		}
		if err = lg.reset(old, tag, why); err == nil {
			lg.fullScan = true
			why, err = lg.catchUp()
			if err == nil && why != "" {
				err = fmt.Errorf("ledger: rebuilt from the event log, still %s", why)
			}
		}
	}
	if err != nil {
		return fmt.Errorf("bringing the ledger up to date with the event log: %w", err)
	}
	if lg.missing && lg.seq > 0 {
		lg.log.Warn("quietband run: no ledger; built it from the event log", "file", lg.path, "records", lg.applied)
	}
	lg.missing = false
	if !lg.lagging {
		lg.dropUnsaved()
		lg.tailSeq, lg.tailHead = lg.seq, lg.head
		lg.setWritable()
	}
	return nil
}

// catchUp applies the log's records after lg.seq, in transactions of
// ledgerBatch records. It returns why it cannot (the record at lg.seq is
// not the one applied), having applied nothing.
func (lg *Ledger) catchUp() (string, error) {
	from, matched := lg.seq, lg.seq == 0
	why := ""
	batch := make([]eventlog.Record, 0, 64)
	err := eventlog.ScanFrom(lg.logPath, max(from, 1), func(rec eventlog.Record) error {
		if !matched {
			if rec.Seq != from {
				why = fmt.Sprintf("the event log has no record %d, the last the ledger applied (it goes on with %d)", from, rec.Seq)
				return errStale
			}
			if sha256.Sum256(rec.Line) != lg.head {
				why = fmt.Sprintf("the event log's record %d is not the one the ledger applied (log replaced?)", from)
				return errStale
			}
			matched = true
			return nil
		}
		batch = append(batch, rec)
		if len(batch) < ledgerBatch {
			return nil
		}
		err := lg.apply(batch)
		batch = batch[:0]
		return err
	})
	switch {
	case errors.Is(err, errStale):
		return why, nil
	case errors.Is(err, fs.ErrNotExist) && from == 0:
		err = nil
	case err != nil:
		return "", err
	case !matched:
		return fmt.Sprintf("the event log ends before record %d, the last the ledger applied (log cut or replaced?)", from), nil
	}
	if len(batch) > 0 {
		if err := lg.apply(batch); err != nil {
			return "", err
		}
	}
	return "", nil
}

// recordBody is what the ledger takes from a record, read through the
// record's own type (detect.Event, detect.CaptureRecord).
type recordBody struct {
	ok     bool   // decoded
	id     string // an event's id
	key    string // a capture record's Key, SHA-256 values and outcome
	sha    string
	meta   string
	reason string // "" analysed; else why it was quarantined
}

// readBody reads rec through its own type. A field of a type that does
// not match (a record written by another version) leaves the others read.
func readBody(rec eventlog.Record) recordBody {
	var typeErr *json.UnmarshalTypeError
	decoded := func(err error) bool { return err == nil || errors.As(err, &typeErr) }
	switch rec.Kind {
	case eventlog.KindEvent:
		var e detect.Event
		if decoded(json.Unmarshal(rec.Line, &e)) {
			return recordBody{ok: true, id: e.ID}
		}
	case eventlog.KindCapture:
		var c detect.CaptureRecord
		if decoded(json.Unmarshal(rec.Line, &c)) {
			key := ""
			if c.Capture != "" {
				key = Key(c.Input, c.Capture)
			}
			return recordBody{ok: true, key: key, sha: c.SHA256, meta: c.MetadataSHA256, reason: Reason(c)}
		}
	}
	return recordBody{}
}

// Reason is the outcome a capture record gives its content: "" when it was
// analysed, else why it was quarantined.
func Reason(c detect.CaptureRecord) string {
	if c.Status == detect.StatusOK {
		return ""
	}
	if c.Error != "" {
		return c.Error
	}
	return c.Status
}

// stampFor returns the stamp of the capture with Key key among stamps.
func stampFor(stamps []Stamp, key string) *FileID {
	for i := range stamps {
		if Key(stamps[i].Input, stamps[i].Name) == key {
			return &stamps[i].ID
		}
	}
	return nil
}

// write applies batches and refreshes in one transaction, with seq and
// head of the last record.
func (lg *Ledger) write(batches []noteBatch, refresh map[string]Stamp) error {
	seq, head, n := lg.seq, lg.head, lg.n
	if lg.db == nil {
		return fmt.Errorf("ledger: %w", errNoFile)
	}
	update := func(tx *bolt.Tx) error {
		caps, evs, meta := tx.Bucket(bucketCaptures), tx.Bucket(bucketEvents), tx.Bucket(bucketMeta)
		for _, b := range batches {
			for i, rec := range b.recs {
				if body := b.bodies[i]; body.ok {
					switch rec.Kind {
					case eventlog.KindEvent:
						if body.id != "" {
							if err := evs.Put(eventKey(body.id), nil); err != nil {
								return err
							}
						}
					case eventlog.KindCapture:
						if body.key != "" {
							added, err := putRecord(caps, body, stampFor(b.stamps, body.key))
							if err != nil {
								return err
							}
							if added {
								n++
							}
						}
					}
				}
				seq, head = rec.Seq, sha256.Sum256(rec.Line)
			}
		}
		for key, st := range refresh {
			v := caps.Get([]byte(key))
			if v == nil {
				continue
			}
			e, err := decodeEntry(v)
			if err != nil {
				return fmt.Errorf("capture %q: %w", key, err)
			}
			if !e.hasData(st.SHA) {
				continue
			}
			e.hasFile, e.file, e.fileSHA = st.SHA != "", st.ID, st.SHA
			if err := caps.Put([]byte(key), e.encode()); err != nil {
				return err
			}
		}
		return putMeta(meta, seq, head, n)
	}
	err := safely(func() error { return lg.db.Update(update) })
	if err != nil {
		return fmt.Errorf("ledger: writing %s: %w", lg.path, err)
	}
	lg.seq, lg.head, lg.n = seq, head, n
	return nil
}

// putRecord applies a capture record to its entry and reports whether the
// name is new.
func putRecord(caps *bolt.Bucket, body recordBody, file *FileID) (bool, error) {
	key := []byte(body.key)
	var e Entry
	v := caps.Get(key)
	if v != nil {
		var err error
		if e, err = decodeEntry(v); err != nil {
			return false, fmt.Errorf("capture %q: %w", body.key, err)
		}
	}
	e.record(body.sha, body.meta, body.reason, file)
	return v == nil, caps.Put(key, e.encode())
}

// follows reports whether rec comes right after the last record noted.
func (lg *Ledger) follows(rec eventlog.Record) bool {
	prev := hex.EncodeToString(lg.tailHead[:])
	if lg.tailSeq == 0 {
		prev = zeroPrev
	}
	return rec.Seq == lg.tailSeq+1 && rec.Prev == prev
}

// zeroPrev is the prev of a log's first record: 32 zero bytes in hex.
const zeroPrev = "0000000000000000000000000000000000000000000000000000000000000000"

// note records what the log just took (records returned by an append,
// so fsynced), with the data files' identities. They are written at once,
// or with later ones within GroupWait (see the top of this file);
// until then, and while writing fails, they are kept in memory, where
// lookups see them, and retried by the next note or save. Records that do
// not follow the last one noted (the log was replaced or cut under the
// daemon) make the ledger sync with the log.
func (lg *Ledger) Note(recs []eventlog.Record, stamps ...Stamp) error {
	if len(recs) == 0 {
		return nil
	}
	for _, st := range stamps {
		delete(lg.refresh, Key(st.Input, st.Name))
	}
	if !lg.follows(recs[0]) {
		lg.log.Warn("quietband run: the event log is not where the ledger left it; bringing the ledger up to date from the log",
			"ledger_seq", lg.tailSeq, "record_seq", recs[0].Seq)
		return lg.Sync()
	}
	if lg.lagging {
		lg.hold(recs, stamps)
		return lg.Save()
	}
	b := newBatch(recs, stamps)
	lg.unsaved = append(lg.unsaved, b)
	for i, rec := range recs {
		switch body := b.bodies[i]; {
		case !body.ok:
		case rec.Kind == eventlog.KindEvent:
			lg.pendingIDs[body.id] = struct{}{}
		case rec.Kind == eventlog.KindCapture && body.key != "":
			lg.pendingCaps[body.key] = append(lg.pendingCaps[body.key],
				capNote{sha: body.sha, meta: body.meta, reason: body.reason, file: stampFor(stamps, body.key)})
		}
	}
	last := recs[len(recs)-1]
	lg.tailSeq, lg.tailHead = last.Seq, sha256.Sum256(last.Line)
	if time.Since(lg.lastWrite) < lg.groupWait && lg.waiting() < GroupMax {
		return nil
	}
	return lg.Save()
}

// Remember queues the identity the data file of the capture name of
// input was hashed with, so that later sightings need no hashing; save
// writes it.
func (lg *Ledger) Remember(input, name string, id FileID, sha string) {
	lg.refresh[Key(input, name)] = Stamp{Input: input, Name: name, ID: id, SHA: sha}
	if len(lg.refresh) >= refreshMax {
		lg.Save()
	}
}

// save writes what is noted or remembered but not yet in the file.
func (lg *Ledger) Save() error {
	if lg.lagging {
		return lg.catchUpLater()
	}
	if len(lg.unsaved) == 0 && len(lg.refresh) == 0 {
		return nil
	}
	lg.lastWrite = time.Now()
	if err := lg.write(lg.unsaved, lg.refresh); err != nil {
		if errors.Is(err, errDamagedOpen) {
			return lg.rebuild(err)
		}
		// The records are in the log: keep what lookups need in memory
		// and catch the file up from the log once it can be written.
		lg.setUnwritable(err)
		lg.unsaved = nil
		clear(lg.refresh)
		return err
	}
	lg.dropUnsaved()
	clear(lg.refresh)
	return nil
}

func (lg *Ledger) waiting() int {
	n := 0
	for _, b := range lg.unsaved {
		n += len(b.recs)
	}
	return n
}

// Lookup returns what the ledger knows of the capture name found in
// input: its own records, or, when it has none, those of the name without
// an input (a log written before records carried the input says what is
// done in any input). An entry that does not decode (the file was damaged
// under the daemon) makes the ledger be rebuilt from the log, once.
func (lg *Ledger) Lookup(input, name string) (Entry, bool, error) {
	e, ok, err := lg.lookup(input, name)
	if errors.Is(err, errDamagedOpen) {
		if err = lg.rebuild(err); err == nil {
			e, ok, err = lg.lookup(input, name)
		}
	}
	if errors.Is(err, errEntry) {
		if err = lg.reset(lg.db, "bad", fmt.Sprintf("capture %q of input %q: %v", name, input, err)); err == nil {
			if err = lg.Sync(); err == nil {
				e, ok, err = lg.lookup(input, name)
			}
		}
	}
	return e, ok, err
}

func (lg *Ledger) lookup(input, name string) (Entry, bool, error) {
	if name == "" {
		return Entry{}, false, nil
	}
	e, ok, err := lg.get(Key(input, name))
	if err != nil || ok || input == "" {
		return e, ok, err
	}
	return lg.get(name)
}

func (lg *Ledger) get(key string) (Entry, bool, error) {
	var e Entry
	found := false
	if key != "" && lg.db != nil {
		view := func(tx *bolt.Tx) error {
			v := tx.Bucket(bucketCaptures).Get([]byte(key))
			if v == nil {
				return nil
			}
			found = true
			var err error
			e, err = decodeEntry(v)
			return err
		}
		err := safely(func() error { return lg.db.View(view) })
		if err != nil {
			return Entry{}, false, err
		}
	}
	for _, c := range lg.pendingCaps[key] {
		e.record(c.sha, c.meta, c.reason, c.file)
		found = true
	}
	return e, found, nil
}

// hasEvent reports whether an event with this id is in the log.
func (lg *Ledger) HasEvent(id string) (bool, error) {
	found, err := lg.hasEvent(id)
	if errors.Is(err, errDamagedOpen) {
		if err = lg.rebuild(err); err == nil {
			found, err = lg.hasEvent(id)
		}
	}
	return found, err
}

func (lg *Ledger) hasEvent(id string) (bool, error) {
	found := false
	if _, ok := lg.pendingIDs[id]; ok || lg.db == nil {
		return ok, nil
	}
	err := safely(func() error {
		return lg.db.View(func(tx *bolt.Tx) error {
			found = tx.Bucket(bucketEvents).Get(eventKey(id)) != nil
			return nil
		})
	})
	return found, err
}

// Captures is the number of captures recorded (names in their inputs),
// those noted but not yet in the file (or held while it cannot be
// written) included.
func (lg *Ledger) Captures() uint64 {
	n := lg.n
	errFound := errors.New("found")
	for key := range lg.pendingCaps {
		if lg.db == nil || safely(func() error {
			return lg.db.View(func(tx *bolt.Tx) error {
				if tx.Bucket(bucketCaptures).Get([]byte(key)) != nil {
					return errFound // not a new capture
				}
				return nil
			})
		}) == nil {
			n++
		}
	}
	return n
}

// Path is the ledger's file (state_dir/ledger.db).
func (lg *Ledger) Path() string { return lg.path }

// LastSync says what the last Sync did: how many log records it applied,
// and whether it read the whole log (a new or rebuilt ledger).
func (lg *Ledger) LastSync() (applied int, fullScan bool) { return lg.applied, lg.fullScan }

// Close writes what waits and closes the file. A ledger running from the
// log (its file cannot be written) is closed as it is, with a warning.
func (lg *Ledger) Close() error {
	if lg == nil || lg.db == nil {
		return nil
	}
	var err error
	if lg.lagging {
		// Not an error: the log holds what the file lacks, and the next
		// start catches it up (or runs from the log again).
		lg.log.Warn("quietband run: ledger closed behind the event log; the next start catches it up", "file", lg.path, "ledger_seq", lg.seq, "log_seq", lg.tailSeq)
	} else {
		err = lg.Save()
	}
	if lg.db == nil {
		return err
	}
	if cerr := closeQuietly(lg.db); err == nil {
		err = cerr
	}
	lg.db = nil
	return err
}
