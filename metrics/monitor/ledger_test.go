package monitor

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"log/slog"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"quietband/detect"
	"quietband/metrics/eventlog"
	"quietband/metrics/ledger"
	"quietband/metrics/monitor/monitortest"
)

// The ledger as the daemon uses it: a restart hashes nothing, a ledger
// behind the log is caught up, the same data under two names, a second
// daemon on the same state folder. The ledger's own tests are in
// metrics/ledger.

// TestLedgerRestartHashesNothing: after a restart over N recorded
// captures, none is read to be hashed; a capture rewritten in place, one
// replaced by a rename and one touched are hashed (their identity
// changed), the first two analysed again; the next restart hashes none.
func TestLedgerRestartHashesNothing(t *testing.T) {
	const n = 300
	s := newSite(t, nil)
	rd := startDaemon(t, s)
	for i := range n {
		monitortest.Drop(t, filepath.Join(s.in, fmt.Sprintf("h%d", i%6), fmt.Sprintf("c%03d.ci8", i)), monitortest.CI8(uint64(3000+i), false))
	}
	// A link inside the watched folder: analysed through the link, and
	// recognised through it after a restart.
	os.MkdirAll(filepath.Join(s.in, "targets"), 0o755)
	os.WriteFile(filepath.Join(s.in, "targets", "t.ci8.bin"), monitortest.CI8(3999, false), 0o644)
	os.Symlink("../targets/t.ci8.bin", filepath.Join(s.in, "h0", "link.ci8"))
	monitortest.WaitFor(t, 60*time.Second, "every capture recorded", func() bool { return monitortest.CountCaptures(t, s.logPath) == n+1 })
	if err := rd.stop(); err != nil {
		t.Fatal(err)
	}

	changes := []struct {
		name     string
		change   func(path string)
		hashed   bool
		analysed bool // a new capture record
	}{
		{"h1/c001.ci8", func(p string) { os.WriteFile(p, monitortest.CI8(4001, false), 0o644) }, true, true},
		{"h2/c002.ci8", func(p string) { monitortest.Drop(t, p, monitortest.CI8(4002, false)) }, true, true},
		{"h3/c003.ci8", func(p string) { now := time.Now(); os.Chtimes(p, now, now) }, true, false},
		{"h4/c004.ci8", func(string) {}, false, false},
		{"h0/link.ci8", func(string) {}, false, false},
	}
	wantHashes, wantNew := 0, 0
	for _, c := range changes {
		c.change(filepath.Join(s.in, c.name))
		if c.hashed {
			wantHashes++
		}
		if c.analysed {
			wantNew++
		}
	}
	settled := func(rd *runningDaemon) func() bool {
		return func() bool {
			st := rd.m.watcher.Stats()
			return st.Rescans >= 1 && st.Backlog == 0 && st.Pending == 0
		}
	}
	before := monitortest.CaptureRecords(monitortest.ReadLog(t, s.logPath))
	rd = startDaemon(t, s)
	monitortest.WaitFor(t, 20*time.Second, "the start scan handled", settled(rd))
	monitortest.WaitFor(t, 20*time.Second, "the changed captures recorded", func() bool { return monitortest.CountCaptures(t, s.logPath) == n+1+wantNew })
	time.Sleep(300 * time.Millisecond)
	if got := rd.m.hashes.Load(); got != int64(wantHashes) {
		t.Errorf("restart over %d recorded captures hashed %d files, want %d (the changed ones)", n+1, got, wantHashes)
	}
	after := monitortest.CaptureRecords(monitortest.ReadLog(t, s.logPath))
	for _, c := range changes {
		if got := len(after[c.name]) - len(before[c.name]); got != map[bool]int{false: 0, true: 1}[c.analysed] {
			t.Errorf("%s: %d new capture records, want analysed again %v", c.name, got, c.analysed)
		}
	}
	if err := rd.stop(); err != nil {
		t.Fatal(err)
	}
	// The touched capture's identity was remembered when it was found
	// recorded: the next restart reads nothing.
	rd = startDaemon(t, s)
	monitortest.WaitFor(t, 20*time.Second, "the start scan handled", settled(rd))
	time.Sleep(300 * time.Millisecond)
	if got := rd.m.hashes.Load(); got != 0 {
		t.Errorf("second restart hashed %d files, want 0", got)
	}
	if got := monitortest.CountCaptures(t, s.logPath); got != n+1+wantNew {
		t.Errorf("second restart: %d capture records, want %d", got, n+1+wantNew)
	}
	monitortest.CheckLog(t, s.logPath)
}

// TestLedgerCaughtUpByDaemon: the daemon killed between the log's fsync
// and the ledger's write (here: the ledger's last records undone by
// writing the log behind its back) applies the missing records at start
// and analyses nothing again.
func TestLedgerCaughtUpByDaemon(t *testing.T) {
	s := newSite(t, nil)
	rd := startDaemon(t, s)
	for i := range 6 {
		monitortest.Drop(t, filepath.Join(s.in, fmt.Sprintf("u%d.ci8", i)), monitortest.CI8(uint64(5100+i), i == 2))
	}
	monitortest.WaitFor(t, 20*time.Second, "6 records", func() bool { return monitortest.CountCaptures(t, s.logPath) == 6 })
	rd.stop()
	// Three more captures recorded in the log only (as a daemon that
	// died right after its append would leave them).
	l, err := eventlog.Open(s.logPath, eventlog.Options{})
	if err != nil {
		t.Fatal(err)
	}
	for i := 6; i < 9; i++ {
		name := fmt.Sprintf("u%d.ci8", i)
		data := monitortest.CI8(uint64(5100+i), false)
		monitortest.Drop(t, filepath.Join(s.in, name), data)
		h := sha256.Sum256(data)
		if _, err := l.Append(eventlog.KindCapture, detect.CaptureRecord{Capture: name, SHA256: hex.EncodeToString(h[:]),
			Status: detect.StatusOK, Format: "ci8", Samples: monitortest.Samples}); err != nil {
			t.Fatal(err)
		}
	}
	l.Close()
	rd = startDaemon(t, s)
	monitortest.WaitFor(t, 20*time.Second, "the start scan handled", func() bool {
		st := rd.m.watcher.Stats()
		return st.Rescans >= 1 && st.Backlog == 0 && st.Pending == 0
	})
	time.Sleep(300 * time.Millisecond)
	if applied, fullScan := rd.m.ledger.LastSync(); applied != 3 || fullScan {
		t.Errorf("start applied %d records (full scan %v), want the 3 the ledger missed", applied, fullScan)
	}
	if got := monitortest.CountCaptures(t, s.logPath); got != 9 {
		t.Errorf("%d capture records, want 9: the caught-up captures were analysed again", got)
	}
	// The three were recorded without an identity: hashed once, found done.
	if got := rd.m.hashes.Load(); got != 3 {
		t.Errorf("%d files hashed, want 3", got)
	}
}

// TestLedgerSameDataTwoNames: event ids come from the data's SHA-256, not
// the capture's name, so the same bytes under a second name give the same
// ids: they must not be written twice (which keeping only the ids of
// captures in flight would allow).
func TestLedgerSameDataTwoNames(t *testing.T) {
	s := newSite(t, nil)
	rd := startDaemon(t, s)
	data := monitortest.CI8(5200, true)
	monitortest.Drop(t, filepath.Join(s.in, "first.ci8"), data)
	monitortest.WaitFor(t, 20*time.Second, "the first", func() bool { return monitortest.CountCaptures(t, s.logPath) == 1 })
	// After a restart too, the id is known from the ledger file.
	rd.stop()
	rd = startDaemon(t, s)
	monitortest.Drop(t, filepath.Join(s.in, "copy", "second.ci8"), data)
	monitortest.WaitFor(t, 20*time.Second, "the second", func() bool { return monitortest.CountCaptures(t, s.logPath) == 2 })
	recs := monitortest.CheckLog(t, s.logPath) // no id twice
	caps := monitortest.CaptureRecords(recs)
	if a, b := caps["first.ci8"], caps["copy/second.ci8"]; len(a) != 1 || len(b) != 1 || a[0].Events == 0 || a[0].Events != b[0].Events {
		t.Errorf("records %+v and %+v, want one each with the same event count (the tone)", a, b)
	}
	if !strings.Contains(rd.out.String(), "event already in the log") {
		t.Error("the second capture's events were not recognised as in the log")
	}
}

// TestLedgerSecondDaemon: a second daemon on the same state folder stops
// at start with an error naming the ledger file, within the lock wait,
// and leaves the first one's log alone.
func TestLedgerSecondDaemon(t *testing.T) {
	s := newSite(t, nil)
	startDaemon(t, s)
	monitortest.Drop(t, filepath.Join(s.in, "x.ci8"), monitortest.CI8(5300, false))
	monitortest.WaitFor(t, 20*time.Second, "a record", func() bool { return monitortest.CountCaptures(t, s.logPath) == 1 })
	logBefore := monitortest.MustRead(t, s.logPath)
	done := make(chan error, 1)
	go func() {
		m, err := New(s.cfg, slog.New(slog.NewTextHandler(&monitortest.Buffer{}, nil)))
		if err == nil {
			m.Run(canceled(), nil, nil)
		}
		done <- err
	}()
	var err error
	select {
	case err = <-done:
	case <-time.After(10 * ledger.LockWait):
		t.Fatal("the second daemon hangs")
	}
	want := filepath.Join(s.state, ledger.FileName)
	if err == nil || !strings.Contains(err.Error(), want) || !strings.Contains(err.Error(), "locked") {
		t.Errorf("second daemon: %v, want an error naming %s as locked", err, want)
	}
	if !bytes.Equal(monitortest.MustRead(t, s.logPath), logBefore) {
		t.Error("the second daemon changed the event log")
	}
}

func canceled() context.Context {
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	return ctx
}

// BenchmarkDaemonStart measures a daemon's start over an archive of
// recorded captures, from New until every capture of the start scan
// has been taken and the daemon has stopped: 300 captures of 40 kB, or 30
// of 4 MB.
func BenchmarkDaemonStart(b *testing.B) {
	for _, bc := range []struct{ n, samples int }{{300, monitortest.Samples}, {30, 100 * monitortest.Samples}} {
		b.Run(fmt.Sprintf("%dx%dkB", bc.n, 2*bc.samples/1000), func(b *testing.B) {
			s := newSite(b, nil)
			rd := startDaemon(b, s)
			for i := range bc.n {
				data := make([]byte, 0, 2*bc.samples)
				for len(data) < 2*bc.samples {
					data = append(data, monitortest.CI8(uint64(i*1000+len(data)), false)...)
				}
				monitortest.Drop(b, filepath.Join(s.in, fmt.Sprintf("s%03d.ci8", i)), data[:2*bc.samples])
			}
			monitortest.WaitFor(b, 120*time.Second, "every capture recorded", func() bool { return monitortest.CountCaptures(b, s.logPath) == bc.n })
			if err := rd.stop(); err != nil {
				b.Fatal(err)
			}
			for b.Loop() {
				m, err := New(s.cfg, slog.New(slog.DiscardHandler))
				if err != nil {
					b.Fatal(err)
				}
				ctx, cancel := context.WithCancel(context.Background())
				done := make(chan error, 1)
				go func() { done <- m.Run(ctx, nil, nil) }()
				for {
					st := m.watcher.Stats()
					if st.Rescans >= 1 && st.Backlog == 0 && st.Pending == 0 && len(m.watcher.Work()) == 0 {
						break
					}
					time.Sleep(time.Millisecond)
				}
				cancel()
				if err := <-done; err != nil {
					b.Fatal(err)
				}
			}
			if got := monitortest.CountCaptures(b, s.logPath); got != bc.n {
				b.Errorf("%d capture records after the restarts, want %d", got, bc.n)
			}
		})
	}
}
