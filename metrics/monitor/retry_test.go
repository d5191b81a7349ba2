package monitor

import (
	"context"
	"log/slog"
	"os"
	"path/filepath"
	"syscall"
	"testing"
	"time"

	"quietband/detect"
	"quietband/ingest"
	"quietband/metrics/monitor/monitortest"
)

// TestTransientRetried (issue 17, item 3): a capture whose reading failed
// for a transient reason (out of file descriptors: EMFILE, POSIX errno) is
// not recorded, but tried again after a wait, and then analysed; one that
// fails retryTries times in a row is quarantined with the reason; a
// permanent problem is quarantined at once (ingest.Transient tells them
// apart).
func TestTransientRetried(t *testing.T) {
	s := newSite(t, nil)
	m, err := New(s.cfg, slog.New(slog.DiscardHandler))
	if err != nil {
		t.Fatal(err)
	}
	defer m.elog.Close()
	defer m.ledger.Close()
	ctx := context.Background()
	path := filepath.Join(s.in, "fd.ci8")
	if err := os.WriteFile(path, monitortest.CI8(5, true), 0o644); err != nil {
		t.Fatal(err)
	}
	emfile := func(name string) ingest.Found {
		p := filepath.Join(s.in, name)
		return ingest.Found{Input: "roof", Root: s.in, Name: name, Path: p, DataPath: p, Ready: time.Now(),
			Problem: &ingest.CaptureError{File: p, Problem: &os.PathError{Op: "open", Path: p, Err: syscall.EMFILE}}}
	}
	if err := m.handle(ctx, emfile("fd.ci8")); err != nil {
		t.Fatal(err)
	}
	if n := monitortest.CountCaptures(t, s.logPath); n != 0 {
		t.Fatalf("%d capture records after a transient failure, want none", n)
	}
	r := m.retries["roof\x00fd.ci8"]
	if r == nil || r.tries != 1 || time.Until(r.at) > retryFirst || time.Until(r.at) < retryFirst/2 {
		t.Fatalf("retry %+v, want one failure and a retry in %v", r, retryFirst)
	}
	// Not due yet: nothing happens; due: analysed from the file.
	m.retryDue(ctx, time.Now())
	if n := monitortest.CountCaptures(t, s.logPath); n != 0 {
		t.Fatalf("tried again before its time")
	}
	if err := m.retryDue(ctx, time.Now().Add(retryFirst)); err != nil {
		t.Fatal(err)
	}
	caps := monitortest.CaptureRecords(monitortest.CheckLog(t, s.logPath))
	if rs := caps["fd.ci8"]; len(rs) != 1 || rs[0].Status != detect.StatusOK || rs[0].Events == 0 {
		t.Fatalf("fd.ci8 after the retry: %+v, want one ok record with its tone", rs)
	}
	if len(m.retries) != 0 {
		t.Errorf("retries left: %v", m.retries)
	}

	// Failing every time: quarantined after retryTries failures, waits
	// doubling from retryFirst up to retryMaxWait.
	os.WriteFile(filepath.Join(s.in, "always.ci8"), monitortest.CI8(6, false), 0o644)
	var waits []time.Duration
	for i := 1; i < retryTries; i++ {
		m.handle(ctx, emfile("always.ci8"))
		r := m.retries["roof\x00always.ci8"]
		if r == nil || r.tries != i {
			t.Fatalf("failure %d: retry %+v", i, r)
		}
		waits = append(waits, time.Until(r.at).Round(time.Second))
	}
	if waits[0] != retryFirst || waits[1] != 2*retryFirst || waits[len(waits)-1] != retryMaxWait {
		t.Errorf("waits %v, want from %v doubling up to %v", waits, retryFirst, retryMaxWait)
	}
	m.handle(ctx, emfile("always.ci8"))
	caps = monitortest.CaptureRecords(monitortest.CheckLog(t, s.logPath))
	if rs := caps["always.ci8"]; len(rs) != 1 || rs[0].Status != detect.StatusQuarantined {
		t.Errorf("always.ci8 after %d failures: %+v, want one quarantined record", retryTries, rs)
	}
	// A permanent problem: quarantined at once.
	p := filepath.Join(s.in, "odd.ci8")
	m.handle(ctx, ingest.Found{Input: "roof", Root: s.in, Name: "odd.ci8", Path: p, DataPath: p,
		Problem: &ingest.CaptureError{File: p, Problem: os.ErrInvalid}})
	caps = monitortest.CaptureRecords(monitortest.CheckLog(t, s.logPath))
	if rs := caps["odd.ci8"]; len(rs) != 1 {
		t.Errorf("odd.ci8: %+v, want quarantined at once", rs)
	}
	// Every retry scheduled is counted (fd.ci8 once, always.ci8 until it
	// was quarantined): quietband_capture_retries_total.
	mfs, _ := m.set.Registry().Gather()
	got := -1.0
	for _, mf := range mfs {
		if mf.GetName() == "quietband_capture_retries_total" {
			got = mf.GetMetric()[0].GetCounter().GetValue()
		}
	}
	if got != float64(retryTries) {
		t.Errorf("quietband_capture_retries_total %g, want %d", got, retryTries)
	}
	t.Logf("waits between tries: %v", waits)
}
