package ledger

import (
	"log/slog"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"

	"quietband/metrics/eventlog"
)

// TestLedgerUnwritable (issue 17, item 9): the ledger is a cache of the
// log. A ledger file that cannot be made, or that stops taking writes,
// does not stop the ledger: it answers from the log (checked against a
// plain scan of the log, the model), says why (Unwritable) with one
// error line however often it tries, and catches the file up from the log
// once it can write again.
func TestLedgerUnwritable(t *testing.T) {
	defer func(d time.Duration) { CatchUpEvery = d }(CatchUpEvery)

	t.Run("no file can be made", func(t *testing.T) {
		dir := t.TempDir()
		logPath := filepath.Join(dir, "events.jsonl")
		writeLog(t, logPath, 0, 2000, 64<<10)
		m := readModel(t, logPath)
		notDir := filepath.Join(dir, "state")
		writeFileT(t, notDir, "a file where the state folder should be")
		out := &syncBuffer{}
		lg := openTestLedger(t, notDir, logPath, out)
		if lg.Unwritable() == nil {
			t.Fatal("Unwritable() nil with no ledger file")
		}
		checkAnswers(t, lg, m)
		CatchUpEvery = 0
		for range 5 {
			lg.Save()
		}
		if n := strings.Count(out.String(), "ledger cannot be written"); n != 1 {
			t.Errorf("%d error lines for one state, want 1:\n%s", n, out.String())
		}
		// The folder comes back: the next try makes the file from the log.
		os.Remove(notDir)
		os.Mkdir(notDir, 0o750)
		if err := lg.Save(); err != nil || lg.Unwritable() != nil {
			t.Fatalf("Save once the folder is there: %v, unwritable %v", err, lg.Unwritable())
		}
		checkAnswers(t, lg, m)
		if !strings.Contains(out.String(), "ledger writable again") {
			t.Errorf("no line saying the ledger is writable again:\n%s", out.String())
		}
	})

	t.Run("writes fail while running", func(t *testing.T) {
		CatchUpEvery = 0
		dir := t.TempDir()
		logPath := filepath.Join(dir, "events.jsonl")
		writeLog(t, logPath, 0, 1000, 64<<10)
		out := &syncBuffer{}
		lg := openTestLedger(t, dir, logPath, out)
		// The same file, read-only under the ledger: every write fails
		// (bolt.ErrDatabaseReadOnly), as on a full disk.
		lg.db.Close()
		ro, err := bolt.Open(lg.path, 0o640, &bolt.Options{ReadOnly: true})
		if err != nil {
			t.Fatal(err)
		}
		lg.db = ro
		l, err := eventlog.Open(logPath, eventlog.Options{MaxBytes: 64 << 10})
		if err != nil {
			t.Fatal(err)
		}
		for i := 1000; i < 1400; i++ {
			recs, err := l.AppendBatch(synthBodies(i))
			if err != nil {
				t.Fatal(err)
			}
			lg.Note(recs)
		}
		l.Close()
		m := readModel(t, logPath)
		if lg.Unwritable() == nil {
			t.Fatal("Unwritable() nil while writes fail")
		}
		checkAnswers(t, lg, m)
		if n := strings.Count(out.String(), "ledger cannot be written"); n != 1 {
			t.Errorf("%d error lines for one state, want 1", n)
		}
		if len(lg.unsaved) != 0 {
			t.Errorf("%d batches of lines kept in memory; only what lookups need is", len(lg.unsaved))
		}
		// Writable again: caught up from the log.
		ro.Close()
		rw, err := openBolt(lg.path)
		if err != nil {
			t.Fatal(err)
		}
		lg.db = rw
		if err := lg.Save(); err != nil || lg.Unwritable() != nil {
			t.Fatalf("Save once writable: %v, unwritable %v", err, lg.Unwritable())
		}
		checkAnswers(t, lg, m)
		lg.Close()
		lg = openTestLedger(t, dir, logPath, &syncBuffer{})
		if lg.applied != 0 || lg.fullScan {
			t.Errorf("after a restart %d records applied (full scan %v); the file should have been caught up", lg.applied, lg.fullScan)
		}
		checkAnswers(t, lg, m)
	})
}

// TestLedgerClosedUnwritable (issue 17, item 9): a daemon stopped while
// its ledger cannot be written stops cleanly (Close is no error: the log
// holds what the file lacks) and the next start catches the file up.
func TestLedgerClosedUnwritable(t *testing.T) {
	defer func(d time.Duration) { CatchUpEvery = d }(CatchUpEvery)
	CatchUpEvery = time.Hour
	dir := t.TempDir()
	logPath := filepath.Join(dir, "events.jsonl")
	writeLog(t, logPath, 0, 500, 64<<10)
	out := &syncBuffer{}
	lg := openTestLedger(t, dir, logPath, out)
	lg.db.Close()
	ro, err := bolt.Open(lg.path, 0o640, &bolt.Options{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	lg.db = ro
	l, err := eventlog.Open(logPath, eventlog.Options{MaxBytes: 64 << 10})
	if err != nil {
		t.Fatal(err)
	}
	for i := 500; i < 600; i++ {
		recs, err := l.AppendBatch(synthBodies(i))
		if err != nil {
			t.Fatal(err)
		}
		lg.Note(recs)
	}
	l.Close()
	lg.groupWait = 0
	lg.Save()
	if err := lg.Close(); err != nil || !strings.Contains(out.String(), "closed behind the event log") {
		t.Fatalf("Close while unwritable: %v; want no error and a warning", err)
	}
	lg = openTestLedger(t, dir, logPath, &syncBuffer{})
	if lg.applied == 0 || lg.fullScan {
		t.Errorf("next start applied %d records (full scan %v); want the ones the file lacked", lg.applied, lg.fullScan)
	}
	checkAnswers(t, lg, readModel(t, logPath))
}

// TestLedgerDamagedWhileOpen (issue 17, item 10): ledger.db cut or
// overwritten under an open ledger. Before, bbolt's next access faulted on
// its memory map (SIGBUS) or panicked and the daemon crashed; now the
// lookup is answered (checked against a plain scan of the log), the file
// set aside and rebuilt in place from the log.
func TestLedgerDamagedWhileOpen(t *testing.T) {
	for _, c := range []struct {
		name   string
		damage func(t *testing.T, path string)
	}{
		{"emptied", func(t *testing.T, p string) { os.Truncate(p, 0) }},
		{"cut to one page", func(t *testing.T, p string) { os.Truncate(p, 4096) }},
		{"overwritten in place", func(t *testing.T, p string) {
			st, _ := os.Stat(p)
			b := make([]byte, st.Size())
			rng := rand.New(rand.NewPCG(3, 4))
			for i := range b {
				b[i] = byte(rng.Uint32())
			}
			f, err := os.OpenFile(p, os.O_WRONLY, 0)
			if err != nil {
				t.Fatal(err)
			}
			f.WriteAt(b, 0)
			f.Close()
		}},
	} {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			logPath := filepath.Join(dir, "events.jsonl")
			writeLog(t, logPath, 0, 2000, 64<<10)
			m := readModel(t, logPath)
			out := &syncBuffer{}
			lg, err := Open(dir, logPath, slog.New(slog.NewTextHandler(out, nil)))
			if err != nil {
				t.Fatal(err)
			}
			defer lg.Close()
			if err := lg.Sync(); err != nil {
				t.Fatal(err)
			}
			c.damage(t, lg.path)
			checkAnswers(t, lg, m)
			if !strings.Contains(out.String(), "damaged while open") {
				t.Errorf("no line about the damage:\n%s", out.String())
			}
			if aside, _ := filepath.Glob(lg.path + ".bad-*"); len(aside) != 1 {
				t.Errorf("set aside: %v, want one file", aside)
			}
		})
	}
}

func writeFileT(t *testing.T, path, s string) {
	t.Helper()
	if err := os.WriteFile(path, []byte(s), 0o640); err != nil {
		t.Fatal(err)
	}
}
