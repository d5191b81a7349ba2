package eventlog

import (
	"context"
	"errors"
	"math"
	"os"
	"strings"
	"sync/atomic"
	"testing"
	"time"
)

// TestCommitRidesOutFailures: a batch whose append fails (the sync after
// a whole write, a write torn after the first line, a write of nothing)
// is committed once the log takes appends again, every record exactly
// once and the chain intact (Verify); the records that reached the log
// before the failure are read back, not written twice.
func TestCommitRidesOutFailures(t *testing.T) {
	batch := []Item{
		{KindEvent, testEvent{ID: "e1", Class: "cw"}},
		{KindEvent, testEvent{ID: "e2", Class: "pulsed"}},
		{KindCapture, testCapture{Capture: "c.sigmf-meta", Status: "ok", Events: 2}},
	}
	// The records on disk after the failure: all three, the first, none;
	// written again, they would make the log longer than 7 records.
	for _, tt := range []struct {
		name string
		mode int32
	}{
		{"sync fails after the whole write", faultSync},
		{"write torn after its first line", faultWriteHalf},
		{"write of nothing", faultWriteNoData},
	} {
		t.Run(tt.name, func(t *testing.T) {
			var mode atomic.Int32
			path := tempLog(t)
			l := openLog(t, path, Options{wrap: func(f *os.File) writeSyncer { return &faultyFile{f: f, mode: &mode} }})
			fill(t, l, 4)
			mode.Store(tt.mode)
			failed, writable := 0, 0
			c := &Committer{Log: l, Retry: time.Millisecond,
				Failed:   func() { failed++; mode.Store(faultNone) }, // one failure, then the disk is fine
				Writable: func(ok bool) { writable++ },
			}
			recs, err := c.Commit(context.Background(), batch)
			if err != nil {
				t.Fatal(err)
			}
			if len(recs) != len(batch) || recs[0].Seq != 5 || recs[2].Seq != 7 {
				t.Fatalf("%d records from seq %d, want 3 from 5", len(recs), recs[0].Seq)
			}
			if failed != 1 || writable != 1 || c.Failing() {
				t.Errorf("failed %d, writable %d, failing %v; want 1, 1, false", failed, writable, c.Failing())
			}
			sum, err := Verify(path)
			if err != nil || sum.Records != 7 {
				t.Fatalf("log verifies to %d records (%v), want 7", sum.Records, err)
			}
			got, err := RecordsAfter(path, 4)
			if err != nil {
				t.Fatal(err)
			}
			for i, rec := range got {
				if string(rec.Line) != string(recs[i].Line) {
					t.Errorf("record %d: %s, committed %s", i+5, rec.Line, recs[i].Line)
				}
			}
		})
	}
}

// TestCommitGivesUp: while the log keeps failing, Commit waits and tries
// again until its context ends, says so (Failing), and writes nothing;
// a body that cannot be encoded is an error at once, not a log failure.
func TestCommitGivesUp(t *testing.T) {
	var mode atomic.Int32
	path := tempLog(t)
	l := openLog(t, path, Options{wrap: func(f *os.File) writeSyncer { return &faultyFile{f: f, mode: &mode} }})
	fill(t, l, 2)
	mode.Store(faultWriteNoData)
	ctx, cancel := context.WithCancel(context.Background())
	failed := 0
	c := &Committer{Log: l, Retry: time.Millisecond, Failed: func() {
		if failed++; failed == 3 {
			cancel()
		}
	}}
	if _, err := c.Commit(ctx, []Item{{KindCapture, testCapture{Capture: "x", Status: "ok"}}}); !errors.Is(err, context.Canceled) {
		t.Fatalf("Commit = %v, want the context's end", err)
	}
	if failed < 3 || !c.Failing() {
		t.Errorf("%d failed appends, failing %v", failed, c.Failing())
	}
	if sum, err := Verify(path); err != nil || sum.Records != 2 {
		t.Errorf("log holds %d records (%v), want the 2 before", sum.Records, err)
	}

	mode.Store(faultNone)
	l.Reopen()
	_, err := c.Commit(context.Background(), []Item{{KindEvent, map[string]any{"id": "x", "bad": math.NaN()}}})
	if err == nil || errors.Is(err, ErrFailed) || !strings.Contains(err.Error(), "unsupported value") {
		t.Errorf("Commit of a NaN body = %v, want an encoding error", err)
	}
}

// TestPending: an item's record is found by kind and body bytes; items
// of the same body under another kind, or another body, are pending.
func TestPending(t *testing.T) {
	path := tempLog(t)
	l := openLog(t, path, Options{})
	items := []Item{{KindEvent, testEvent{ID: "a"}}, {KindEvent, testEvent{ID: "b"}}, {KindCapture, testCapture{Capture: "c"}}}
	recs, err := l.AppendBatch(items[:1])
	if err != nil {
		t.Fatal(err)
	}
	if got := Pending(items, recs); len(got) != 2 || got[0].Body.(testEvent).ID != "b" {
		t.Errorf("Pending = %+v, want b and the capture", got)
	}
	other := []Item{{KindCapture, testEvent{ID: "a"}}}
	if got := Pending(other, recs); len(got) != 1 {
		t.Errorf("a capture with an event's body counted as written: %+v", got)
	}
	empty, err := l.AppendBatch([]Item{{KindCapture, struct{}{}}})
	if err != nil {
		t.Fatal(err)
	}
	if got := Pending([]Item{{KindCapture, struct{}{}}}, empty); len(got) != 0 {
		t.Errorf("an empty body not found: %+v", got)
	}
}
