package monitor

import (
	"context"
	"errors"
	"io/fs"
	"os"
	"time"

	"quietband/ingest"
)

// Retries of captures whose reading failed for a transient reason
// (ingest.Transient: out of file descriptors or memory, a network file
// system not answering). Such a failure is not the capture's: it is tried
// again after retryFirst, then after twice the wait each time up to
// retryMaxWait, and only after retryTries failures in a row (about 23
// minutes) recorded as quarantined with the reason. Nothing is recorded
// before: a restart meanwhile finds the capture again as not done.
const (
	retryFirst   = time.Second
	retryMaxWait = 5 * time.Minute
	retryTries   = 12
)

// retry is a capture waiting to be tried again.
type retry struct {
	found ingest.Found
	at    time.Time // when it is tried again
	tries int       // failures so far
	// inFlight is set while retryDue hands it to handle; a transient
	// failure clears it (rescheduled), anything else leaves it set.
	inFlight bool
}

// retryLater schedules capture w, whose reading failed with the
// transient error err, to be tried again, and reports whether it did;
// false means it failed retryTries times and is to be recorded.
func (m *Monitor) retryLater(w ingest.Found, err error) bool {
	key := w.Input + "\x00" + w.Name
	r := m.retries[key]
	if r == nil {
		r = &retry{}
	}
	r.tries++
	if r.tries >= retryTries {
		delete(m.retries, key)
		m.log.Error("quietband run: capture failed for a transient reason too often; quarantining it",
			"capture", w.Name, "input", w.Input, "tries", r.tries, "err", err)
		return false
	}
	wait := min(retryFirst<<(r.tries-1), retryMaxWait)
	r.found, r.at, r.inFlight = w, time.Now().Add(wait), false
	m.retries[key] = r
	m.retried.Add(1)
	m.log.Warn("quietband run: capture could not be read for a transient reason; trying again later",
		"capture", w.Name, "input", w.Input, "try", r.tries, "in", wait, "err", err)
	return true
}

// retryDue tries again the captures whose wait is over (reopened from
// their files). One whose files are gone is forgotten.
func (m *Monitor) retryDue(ctx context.Context, now time.Time) error {
	for key, r := range m.retries {
		if now.Before(r.at) {
			continue
		}
		w := r.found
		if _, err := os.Lstat(w.Path); errors.Is(err, fs.ErrNotExist) {
			delete(m.retries, key)
			m.log.Info("quietband run: capture waiting to be tried again is gone", "capture", w.Name, "input", w.Input)
			continue
		}
		r.inFlight = true
		w.Capture, w.Problem = nil, nil
		w.Open(m.inputs[w.Input].Raw)
		if err := m.handle(ctx, w); err != nil {
			return err
		}
		if m.retries[key] == r && r.inFlight {
			delete(m.retries, key) // recorded (or found done): no failure rescheduled it
		}
	}
	return nil
}
