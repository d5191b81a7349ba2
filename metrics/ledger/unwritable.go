package ledger

import (
	"crypto/sha256"
	"errors"
	"fmt"
	"os"
	"runtime/debug"
	"time"

	bolt "go.etcd.io/bbolt"

	"quietband/metrics/eventlog"
)

// The ledger is a cache of the event log (issue 17, items 9 and 10). When
// its file cannot be written (the state disk full while the log's has
// room, a read-only state folder), or cannot even be made, the daemon
// does not stop: the ledger runs from the log. Every record after the
// last one the file holds is read from the log (at start, and when a
// write fails, from then on as they are noted) into the maps lookups
// already consult for records not yet written (pendingCaps, pendingIDs:
// a capture name's outcomes, an event id), without their lines; data
// file identities are not kept, so a capture seen again is hashed
// (slower). Every CatchUpEvery the ledger tries again: it makes the file
// if there is none and catches it up from the log (Sync), after which the
// maps are dropped. Unwritable says why meanwhile, for the metric and
// /readyz; the log gets one line when it starts and one when it ends.
//
// A file cut or overwritten under the open ledger (item 10) makes bbolt
// fault on its memory map (SIGBUS) or panic on a page it cannot read.
// Every access runs with debug.SetPanicOnFault, which turns such a fault
// into a panic of the goroutine, and recovers it as errDamagedOpen: the
// file is set aside (ledger.db.bad-*) and rebuilt from the log in place
// (or, if it cannot be made, the ledger runs from the log), and the
// lookup is answered. Checking the file's size before each access was the
// other way; it would miss an overwrite that keeps the size, and cost a
// stat per lookup, while the fault handler costs nothing until it fires.

// CatchUpEvery is how often a ledger that cannot be written tries again.
var CatchUpEvery = 30 * time.Second

var (
	// errNoFile: the ledger has no file (it could not be made).
	errNoFile = errors.New("no ledger file")
	// errDamagedOpen: the file faulted or made bbolt panic while open.
	errDamagedOpen = errors.New("ledger file damaged while open (cut or overwritten?)")
)

// Unwritable returns why the ledger's file cannot be written, nil while
// it can. Meanwhile the ledger runs from the event log.
func (lg *Ledger) Unwritable() error { return lg.unwritable }

// setUnwritable enters (or stays in) running from the log, logging once.
func (lg *Ledger) setUnwritable(err error) {
	lg.lagging = true
	lg.lastTry = time.Now()
	if lg.unwritable == nil {
		lg.log.Error("quietband run: ledger cannot be written; running from the event log (captures seen again are hashed) until it can, retrying every "+CatchUpEvery.String(),
			"file", lg.path, "err", err)
	}
	lg.unwritable = err
}

// setWritable leaves running from the log, logging once.
func (lg *Ledger) setWritable() {
	if lg.unwritable != nil {
		lg.log.Info("quietband run: ledger writable again; caught up from the event log", "file", lg.path, "records", lg.seq)
	}
	lg.unwritable = nil
}

// apply writes records read from the log while catching up, or, once the
// file cannot be written, holds them in memory.
func (lg *Ledger) apply(recs []eventlog.Record) error {
	if !lg.lagging && lg.db != nil {
		err := lg.write([]noteBatch{newBatch(recs, nil)}, nil)
		if err == nil {
			lg.applied += len(recs)
			return nil
		}
		if errors.Is(err, errDamagedOpen) {
			return err
		}
		lg.setUnwritable(err)
	}
	if lg.db == nil && lg.unwritable == nil {
		lg.setUnwritable(errNoFile)
	}
	lg.hold(recs, nil)
	return nil
}

// hold puts what lookups need of recs in the pending maps (not their
// lines) and makes the last of them the ledger's tail.
func (lg *Ledger) hold(recs []eventlog.Record, stamps []Stamp) {
	lg.lagging = true
	for i, rec := range recs {
		body := readBody(rec)
		switch {
		case !body.ok:
		case rec.Kind == eventlog.KindEvent && body.id != "":
			lg.pendingIDs[body.id] = struct{}{}
		case rec.Kind == eventlog.KindCapture && body.key != "":
			lg.pendingCaps[body.key] = append(lg.pendingCaps[body.key],
				capNote{sha: body.sha, meta: body.meta, reason: body.reason, file: stampFor(stamps, body.key)})
		}
		if i == len(recs)-1 {
			lg.tailSeq, lg.tailHead = rec.Seq, sha256.Sum256(rec.Line)
		}
	}
}

// catchUpLater tries, at most every CatchUpEvery, to make the file if
// there is none and to catch it up from the log.
func (lg *Ledger) catchUpLater() error {
	if time.Since(lg.lastTry) < CatchUpEvery {
		return lg.unwritable
	}
	lg.lastTry = time.Now()
	if lg.db == nil {
		db, err := makeBolt(lg.path)
		if err != nil {
			lg.unwritable = fmt.Errorf("making %s: %w", lg.path, err)
			return lg.unwritable
		}
		lg.db = db
		lg.seq, lg.head, lg.n = 0, [32]byte{}, 0
	}
	refresh := lg.refresh
	if err := lg.Sync(); err != nil {
		return err
	}
	if lg.lagging {
		return lg.unwritable
	}
	if len(refresh) > 0 {
		if err := lg.write(nil, refresh); err == nil {
			clear(lg.refresh)
		}
	}
	return nil
}

// rebuild sets aside a file found damaged while open and rebuilds it from
// the log (or runs from the log if a new one cannot be made).
func (lg *Ledger) rebuild(cause error) error {
	lg.log.Error("quietband run: ledger file damaged while open; setting it aside and rebuilding it from the event log",
		"file", lg.path, "err", cause)
	abandon(lg.db)
	lg.db = nil
	if err := lg.reset(nil, "bad", cause.Error()); err != nil {
		return err
	}
	return lg.Sync()
}

// safely runs fn, a bbolt access, turning a fault on the file's memory
// map or a panic of bbolt's into an error wrapping errDamagedOpen.
func safely(fn func() error) (err error) {
	defer debug.SetPanicOnFault(debug.SetPanicOnFault(true))
	defer func() {
		if r := recover(); r != nil {
			err = fmt.Errorf("%w: %v", errDamagedOpen, r)
		}
	}()
	return fn()
}

// makeBolt makes a new ledger file at path, or removes what it began.
func makeBolt(path string) (*bolt.DB, error) {
	db, err := openBolt(path)
	if err == nil {
		if err = safely(func() error { return initLedger(db) }); err != nil {
			closeQuietly(db)
		}
	}
	if err != nil {
		if !errors.Is(err, bolt.ErrTimeout) {
			os.Remove(path)
		}
		return nil, err
	}
	return db, nil
}

// abandon gives up a bbolt file that faulted or panicked: its locks may
// be held by the access that failed, so Close could wait forever. Its
// descriptor, flock (on the old file, now renamed) and mapping are left
// to the process's end: one of each per damage found.
func abandon(db *bolt.DB) {}

// closeQuietly closes db, which may be damaged.
func closeQuietly(db *bolt.DB) error {
	return safely(db.Close)
}
