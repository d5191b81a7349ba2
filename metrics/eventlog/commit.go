package eventlog

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"io"
	"log/slog"
	"sync/atomic"
	"time"
)

// Appender is what a Committer needs of a log: a *Log, or a stand-in that
// fails on demand in tests.
type Appender interface {
	AppendBatch([]Item) ([]Record, error)
	Reopen() error
	LastSeq() uint64
	Path() string
}

// Committer appends batches for a process that must neither lose nor
// double a record when the log fails (disk full, I/O error): the daemon
// commits each capture's events and capture record with it. Commit keeps
// the batch, reopens the log after Retry, doubling the wait up to
// 16·Retry, and tries again until it succeeds or its context is done;
// what of the batch reached the log before the failure is read back and
// not written again (Pending). Its methods are for one goroutine.
type Committer struct {
	Log    Appender
	Retry  time.Duration // first wait before reopening a failed log
	Logger *slog.Logger  // nil: discarded
	// Failed, when set, is called after every append that failed (a
	// write-error counter); Writable, when set, with whether the log
	// takes appends again after a batch succeeded.
	Failed   func()
	Writable func(bool)

	failing atomic.Bool
	lastLog time.Time
}

// Failing reports whether the last append failed and the batch is still
// waiting for the log (the daemon is then not ready).
func (c *Committer) Failing() bool { return c.failing.Load() }

// Commit appends items with one write and one sync, riding out failures
// of the log (ErrFailed, ErrClosed) as the type's doc says; it returns the
// records of the whole batch, those read back included. An error that is
// not a failure of the log (a body that does not encode) is returned at
// once, and so is ctx's error when ctx ends while the log fails.
func (c *Committer) Commit(ctx context.Context, items []Item) ([]Record, error) {
	log := c.Logger
	if log == nil {
		log = slog.New(slog.DiscardHandler)
	}
	var landed []Record
	wait := c.Retry
	for {
		before := c.Log.LastSeq()
		recs, err := c.Log.AppendBatch(items)
		if err == nil {
			if c.failing.Swap(false) {
				log.Info("quietband run: event log writable again; resuming")
			}
			c.writable(true)
			return append(landed, recs...), nil
		}
		if !errors.Is(err, ErrFailed) && !errors.Is(err, ErrClosed) {
			return nil, err
		}
		if c.Failed != nil {
			c.Failed()
		}
		if !c.failing.Swap(true) || time.Since(c.lastLog) >= time.Minute {
			c.lastLog = time.Now()
			log.Error("quietband run: event log append failed; the capture is not marked done, analysis paused, retrying",
				"err", err, "retry_after", c.Retry, "retry_at_most_every", 16*c.Retry)
		}
		for {
			select {
			case <-ctx.Done():
				return nil, ctx.Err()
			case <-time.After(wait):
			}
			wait = min(2*wait, 16*c.Retry)
			if err := c.Log.Reopen(); err != nil {
				log.Debug("quietband run: reopening the event log failed", "err", err)
				continue
			}
			break
		}
		// What of the batch reached the log before the failure?
		got, err := RecordsAfter(c.Log.Path(), before)
		if err != nil {
			log.Error("quietband run: reading back the event log after a failure", "err", err)
			continue
		}
		landed = append(landed, got...)
		items = Pending(items, got)
		if len(items) == 0 {
			c.failing.Store(false)
			c.writable(true)
			return landed, nil
		}
	}
}

func (c *Committer) writable(ok bool) {
	if c.Writable != nil {
		c.Writable(ok)
	}
}

// RecordsAfter returns the records of the log's active file at path with
// seq > after: those a failed batch left behind (a rotation only happens
// before a batch is written, so they are all in the active file).
func RecordsAfter(path string, after uint64) ([]Record, error) {
	var out []Record
	r := NewReader(path)
	defer r.Close()
	for {
		rec, err := r.Next()
		if errors.Is(err, io.EOF) {
			return out, nil
		}
		if err != nil {
			return nil, err
		}
		if rec.Seq > after {
			out = append(out, rec)
		}
	}
}

// Pending returns the items of a batch whose records are not among got:
// an item's record is there when a record of got has its kind and its
// body, the bytes json.Marshal gives the item's body, which the log
// writes after the header unchanged.
func Pending(items []Item, got []Record) []Item {
	var out []Item
	for _, it := range items {
		b, err := json.Marshal(it.Body)
		found := false
		for _, rec := range got {
			if err == nil && rec.Kind == it.Kind && bytes.Equal(bodyOf(rec.Line), b) {
				found = true
				break
			}
		}
		if !found {
			out = append(out, it)
		}
	}
	return out
}

// bodyOf returns the body of a record line as json.Marshal gave it to the
// log: the members after the header's prev, in braces (nil if the line
// has no header of the log's own layout).
func bodyOf(line []byte) []byte {
	i := bytes.Index(line, []byte(`,"prev":"`))
	if i < 0 || len(line) < i+len(`,"prev":"`)+len(zeroHash)+2 {
		return nil
	}
	rest := line[i+len(`,"prev":"`)+len(zeroHash)+1:] // after the closing quote
	switch rest[0] {
	case '}':
		return []byte("{}")
	case ',':
		return append([]byte{'{'}, rest[1:]...)
	}
	return nil
}
