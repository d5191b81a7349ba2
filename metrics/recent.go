package metrics

import (
	"errors"
	"io"
	"sync"

	"quietband/metrics/eventlog"
)

// DefaultRecent is how many records of each kind Recent keeps by default.
const DefaultRecent = 1000

// Recent keeps the latest event and capture records of the log in memory,
// for /api/events. Its methods are safe for concurrent use.
type Recent struct {
	mu       sync.Mutex
	events   ring
	captures ring
}

type ring struct {
	recs []eventlog.Record
	next int
	full bool
}

func (r *ring) add(rec eventlog.Record) {
	if r.full {
		r.recs[r.next] = rec
	} else {
		r.recs = append(r.recs, rec)
	}
	r.next++
	if r.next == cap(r.recs) {
		r.next, r.full = 0, true
	}
}

// each calls fn on the records oldest first.
func (r *ring) each(fn func(eventlog.Record)) {
	if r.full {
		for _, rec := range r.recs[r.next:] {
			fn(rec)
		}
	}
	for _, rec := range r.recs[:r.next] {
		fn(rec)
	}
}

// NewRecent keeps the last n records of each kind (n ≤ 0: DefaultRecent).
func NewRecent(n int) *Recent {
	if n <= 0 {
		n = DefaultRecent
	}
	return &Recent{events: ring{recs: make([]eventlog.Record, 0, n)}, captures: ring{recs: make([]eventlog.Record, 0, n)}}
}

// Add keeps records, which must come in seq order.
func (r *Recent) Add(recs ...eventlog.Record) {
	r.mu.Lock()
	defer r.mu.Unlock()
	for _, rec := range recs {
		rec.Line = append([]byte(nil), rec.Line...)
		switch rec.Kind {
		case eventlog.KindEvent:
			r.events.add(rec)
		case eventlog.KindCapture:
			r.captures.add(rec)
		}
	}
}

// Since returns up to limit records of the given kinds with seq > since,
// in seq order, starting from the oldest such record kept.
func (r *Recent) Since(since uint64, limit int, events, captures bool) []eventlog.Record {
	r.mu.Lock()
	defer r.mu.Unlock()
	var ev, cp []eventlog.Record
	pick := func(dst *[]eventlog.Record) func(eventlog.Record) {
		return func(rec eventlog.Record) {
			if rec.Seq > since {
				*dst = append(*dst, rec)
			}
		}
	}
	if events {
		r.events.each(pick(&ev))
	}
	if captures {
		r.captures.each(pick(&cp))
	}
	out := make([]eventlog.Record, 0, min(limit, len(ev)+len(cp)))
	for len(out) < limit && (len(ev) > 0 || len(cp) > 0) {
		if len(cp) == 0 || len(ev) > 0 && ev[0].Seq < cp[0].Seq {
			out, ev = append(out, ev[0]), ev[1:]
		} else {
			out, cp = append(out, cp[0]), cp[1:]
		}
	}
	return out
}

// FillRecent gives recent the newest records of the log at path: the
// segments are read from the newest back until they hold n records of
// each kind (or the log's start is reached), and their records are added
// oldest first. It returns the number of files read.
func FillRecent(path string, recent *Recent, n int) (int, error) {
	segs, err := eventlog.Segments(path)
	if err != nil {
		return 0, err
	}
	var tail []eventlog.Record // oldest first
	events, captures, read := 0, 0, 0
	for i := len(segs) - 1; i >= 0 && (events < n || captures < n); i-- {
		ring := NewRecent(n)
		r := eventlog.NewReader(segs[i])
		for {
			rec, err := r.Next()
			if errors.Is(err, io.EOF) {
				break
			}
			if err != nil {
				r.Close()
				return read, err
			}
			ring.Add(rec)
		}
		r.Close()
		read++
		got := ring.Since(0, 2*n, true, true)
		for _, rec := range got {
			if rec.Kind == eventlog.KindEvent {
				events++
			} else {
				captures++
			}
		}
		tail = append(got, tail...)
	}
	recent.Add(tail...)
	return read, nil
}
