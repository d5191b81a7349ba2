package main

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"io"
	"log/slog"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strings"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"

	"quietband/detect"
	"quietband/metrics"
	"quietband/metrics/eventlog"
)

// hexSHA is the lowercase hex SHA-256 (FIPS 180-4) of s, computed with
// crypto/sha256.
func hexSHA(s string) string {
	h := sha256.Sum256([]byte(s))
	return hex.EncodeToString(h[:])
}

// chainer makes records the way DESIGN.md's event-log contract spells
// them, without the eventlog package: header members, then the body's;
// seq counts from 1 and prev is the hex SHA-256 of the previous line (64
// zeros for the first).
type chainer struct {
	seq  uint64
	prev string
}

func (c *chainer) rec(kind, members string) eventlog.Record {
	if c.prev == "" {
		c.prev = strings.Repeat("0", 64)
	}
	c.seq++
	line := fmt.Sprintf(`{"v":1,"kind":"%s","seq":%d,"prev":"%s",%s}`, kind, c.seq, c.prev, members)
	r := eventlog.Record{Seq: c.seq, Kind: kind, Prev: c.prev, Line: []byte(line)}
	c.prev = hexSHA(line)
	return r
}

// synthBody is the body of synthetic record i: a capture record (ok, or
// quarantined when i%9 == 4; every 50th re-records the previous name with
// new content), preceded for i%3 == 0 by one event.
func synthBodies(i int) []eventlog.Item {
	name := fmt.Sprintf("d%d/c%06d.ci8", i%7, i)
	if i%50 == 49 {
		name = fmt.Sprintf("d%d/c%06d.ci8", (i-1)%7, i-1)
	}
	var items []eventlog.Item
	if i%3 == 0 {
		items = append(items, eventlog.Item{Kind: eventlog.KindEvent,
			Body: map[string]any{"id": hexSHA(fmt.Sprint("event ", i))[:24], "class": detect.ClassCW, "capture": name}})
	}
	rec := map[string]any{"capture": name, "sha256": hexSHA(fmt.Sprint("data ", i)), "status": detect.StatusOK, "events": len(items)}
	if i%9 == 4 {
		rec["status"], rec["error"] = detect.StatusQuarantined, fmt.Sprintf("reason %d", i)
	}
	return append(items, eventlog.Item{Kind: eventlog.KindCapture, Body: rec})
}

// writeLog appends the synthetic records for i in [from, to) to the log
// at path (rotated at maxBytes, 0 never).
func writeLog(t testing.TB, path string, from, to int, maxBytes int64) {
	t.Helper()
	l, err := eventlog.Open(path, eventlog.Options{MaxBytes: maxBytes})
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	var items []eventlog.Item
	for i := from; i < to; i++ {
		items = append(items, synthBodies(i)...)
		if len(items) >= 500 || i == to-1 {
			if _, err := l.AppendBatch(items); err != nil {
				t.Fatal(err)
			}
			items = items[:0]
		}
	}
}

// model is what the event log says is done, read with a plain scan into
// maps (the daemon's former in-memory ledger): the reference the ledger's
// answers are checked against.
type model struct {
	caps map[string]map[string]string // name → sha → "" or reason; the latest record wins
	ids  []string
}

func readModel(t testing.TB, path string) model {
	t.Helper()
	m := model{caps: map[string]map[string]string{}}
	err := eventlog.Scan(path, func(rec eventlog.Record) error {
		var b logRecord
		if err := json.Unmarshal(rec.Line, &b); err != nil {
			return err
		}
		switch rec.Kind {
		case eventlog.KindEvent:
			m.ids = append(m.ids, b.ID)
		case eventlog.KindCapture:
			if m.caps[b.Capture] == nil {
				m.caps[b.Capture] = map[string]string{}
			}
			reason := ""
			if b.Status != detect.StatusOK {
				reason = b.Error
			}
			m.caps[b.Capture][b.SHA256] = reason
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// checkAnswers: the ledger knows every capture of the model with the same
// outcomes, every event id, and nothing else asked of it.
func checkAnswers(t *testing.T, lg *ledger, m model) {
	t.Helper()
	bad := 0
	for name, shas := range m.caps {
		e, ok, err := lg.lookup(name)
		if err != nil || !ok || len(e.outcomes) != len(shas) {
			t.Errorf("%s: found %v (%v), %d outcomes, want %d", name, ok, err, len(e.outcomes), len(shas))
			bad++
		}
		for sha, reason := range shas {
			if got, ok := e.outcome(sha); !ok || got != reason {
				t.Errorf("%s: sha %.12s… outcome %q (%v), want %q", name, sha, got, ok, reason)
				bad++
			}
		}
		if bad > 5 {
			t.Fatal("too many differences")
		}
	}
	for _, id := range m.ids {
		if ok, err := lg.hasEvent(id); !ok || err != nil {
			t.Fatalf("event %s not known (%v)", id, err)
		}
	}
	for _, absent := range []string{"nowhere.ci8", "d1/c999999.ci8"} {
		if _, ok, _ := lg.lookup(absent); ok {
			t.Errorf("%s is known but not in the log", absent)
		}
	}
	if ok, _ := lg.hasEvent(hexSHA("no such event")[:24]); ok {
		t.Error("an id not in the log is known")
	}
	if got := lg.captures(); got != uint64(len(m.caps)) {
		t.Errorf("captures() = %d, want %d", got, len(m.caps))
	}
}

// openTestLedger opens and syncs the ledger of state folder dir for the
// log at logPath, logging into out.
func openTestLedger(t *testing.T, dir, logPath string, out *syncBuffer) *ledger {
	t.Helper()
	lg, err := openLedger(dir, logPath, slog.New(slog.NewTextHandler(out, nil)))
	if err != nil {
		t.Fatal(err)
	}
	if err := lg.sync(); err != nil {
		lg.close()
		t.Fatal(err)
	}
	t.Cleanup(func() { lg.close() })
	return lg
}

func TestLedgerEntryEncoding(t *testing.T) {
	id := fileID{size: 40000, mtime: 1764621296123456789, ctime: -5, dev: 2049, ino: 1 << 40}
	good := []captureEntry{
		{},
		{outcomes: []outcome{{hexSHA("a"), ""}}},
		{outcomes: []outcome{{hexSHA("a"), ""}, {"", "cannot read: permission denied"}, {"ABCDEF", "not lowercase hex"}},
			hasFile: true, file: id, fileSHA: hexSHA("a")},
		{outcomes: []outcome{{hexSHA("b"), "reason\nwith\x00bytes ü"}}, hasFile: true, file: id, fileSHA: "short"},
	}
	for i, e := range good {
		b := e.encode()
		got, err := decodeEntry(b)
		if err != nil {
			t.Errorf("entry %d: %v", i, err)
			continue
		}
		if !slices.Equal(got.outcomes, e.outcomes) && len(e.outcomes) > 0 || got.hasFile != e.hasFile || got.file != e.file || got.fileSHA != e.fileSHA {
			t.Errorf("entry %d: decoded %+v, want %+v", i, got, e)
		}
		// Every proper prefix, and one byte more, is malformed.
		for n := range len(b) {
			if _, err := decodeEntry(b[:n]); err == nil {
				t.Errorf("entry %d: prefix of %d of %d bytes decodes", i, n, len(b))
			}
		}
		if _, err := decodeEntry(append(bytes.Clone(b), 0)); err == nil {
			t.Errorf("entry %d: a trailing byte decodes", i)
		}
	}
	// A lowercase hex SHA-256 takes 33 bytes, not 65.
	if n := len((&captureEntry{outcomes: []outcome{{hexSHA("a"), ""}}}).encode()); n != 1+33+1+1 {
		t.Errorf("one outcome: %d bytes, want 36", n)
	}
	tests := []struct {
		id   string
		want []byte
	}{
		{"00ff10", []byte{0, 0x00, 0xff, 0x10}},
		{"00FF10", append([]byte{1}, "00FF10"...)}, // not the canonical (lowercase) spelling
		{"abc", append([]byte{1}, "abc"...)},
		{"", []byte{0}},
	}
	for _, tt := range tests {
		if got := eventKey(tt.id); !bytes.Equal(got, tt.want) {
			t.Errorf("eventKey(%q) = %x, want %x", tt.id, got, tt.want)
		}
	}
}

func TestLedgerEntryRecord(t *testing.T) {
	id := fileID{size: 1, mtime: 2, dev: 3, ino: 4}
	a, b := hexSHA("a"), hexSHA("b")
	var e captureEntry
	steps := []struct {
		sha, reason string
		file        *fileID
		outcomes    []outcome
		hasFile     bool
	}{
		{a, "zero length", &id, []outcome{{a, "zero length"}}, true},
		{a, "", nil, []outcome{{a, ""}}, false}, // the latest record of the same content wins
		{b, "", &id, []outcome{{a, ""}, {b, ""}}, true},
		{"", "cannot read", &id, []outcome{{a, ""}, {b, ""}, {"", "cannot read"}}, false}, // nothing hashed: no identity
	}
	for i, s := range steps {
		e.record(s.sha, s.reason, s.file)
		if !slices.Equal(e.outcomes, s.outcomes) || e.hasFile != s.hasFile {
			t.Fatalf("step %d: %+v", i, e)
		}
		if sha, ok := e.shaFor(id, true); ok != s.hasFile || ok && sha != s.sha {
			t.Errorf("step %d: shaFor = %q, %v", i, sha, ok)
		}
		if _, ok := e.shaFor(fileID{size: 1, mtime: 3, dev: 3, ino: 4}, true); ok {
			t.Errorf("step %d: another mtime matches", i)
		}
	}
}

// TestLedgerRestartHashesNothing: after a restart over N recorded
// captures, none is read to be hashed; a capture rewritten in place, one
// replaced by a rename and one touched are hashed (their identity
// changed), the first two analysed again; the next restart hashes none.
func TestLedgerRestartHashesNothing(t *testing.T) {
	const n = 300
	s := newSite(t, "")
	rd := startDaemon(t, s)
	for i := range n {
		dropCapture(t, filepath.Join(s.in, fmt.Sprintf("h%d", i%6), fmt.Sprintf("c%03d.ci8", i)), ci8Capture(uint64(3000+i), false))
	}
	// A link inside the watched folder: analysed through the link, and
	// recognised through it after a restart.
	os.MkdirAll(filepath.Join(s.in, "targets"), 0o755)
	os.WriteFile(filepath.Join(s.in, "targets", "t.ci8.bin"), ci8Capture(3999, false), 0o644)
	os.Symlink("../targets/t.ci8.bin", filepath.Join(s.in, "h0", "link.ci8"))
	waitFor(t, 60*time.Second, "every capture recorded", func() bool { return countCaptures(t, s.logPath) == n+1 })
	if err := rd.stop(); err != nil {
		t.Fatal(err)
	}

	changes := []struct {
		name     string
		change   func(path string)
		hashed   bool
		analysed bool // a new capture record
	}{
		{"h1/c001.ci8", func(p string) { os.WriteFile(p, ci8Capture(4001, false), 0o644) }, true, true},
		{"h2/c002.ci8", func(p string) { dropCapture(t, p, ci8Capture(4002, false)) }, true, true},
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
			st := rd.d.watcher.Stats()
			return st.Rescans >= 1 && st.Backlog == 0 && st.Pending == 0
		}
	}
	before := captureRecords(readLog(t, s.logPath))
	rd = startDaemon(t, s)
	waitFor(t, 20*time.Second, "the start scan handled", settled(rd))
	waitFor(t, 20*time.Second, "the changed captures recorded", func() bool { return countCaptures(t, s.logPath) == n+1+wantNew })
	time.Sleep(300 * time.Millisecond)
	if got := rd.d.hashes.Load(); got != int64(wantHashes) {
		t.Errorf("restart over %d recorded captures hashed %d files, want %d (the changed ones)", n+1, got, wantHashes)
	}
	after := captureRecords(readLog(t, s.logPath))
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
	waitFor(t, 20*time.Second, "the start scan handled", settled(rd))
	time.Sleep(300 * time.Millisecond)
	if got := rd.d.hashes.Load(); got != 0 {
		t.Errorf("second restart hashed %d files, want 0", got)
	}
	if got := countCaptures(t, s.logPath); got != n+1+wantNew {
		t.Errorf("second restart: %d capture records, want %d", got, n+1+wantNew)
	}
	checkLog(t, s.logPath)
}

// TestLedgerHeap: noting 100 000 capture records leaves the heap about
// where it was, while the ledger answers for all of them. The bound, 4 MiB,
// is what does not grow with the records: bbolt keeps the tree in its
// memory map (page cache, not heap) and the Go heap holds the freelist and,
// during a write, the nodes of the pages it changes (a group of at most
// ledgerGroupMax records). The same records in the former maps take about
// 30 MiB (logged); the file holds about 10 MB.
func TestLedgerHeap(t *testing.T) {
	n := 100_000
	if testing.Short() {
		n = 20_000
	}
	const bound = 4 << 20
	dir := t.TempDir()
	out := &syncBuffer{}
	lg := openTestLedger(t, dir, filepath.Join(dir, "events.jsonl"), out)
	heap := func() uint64 {
		var ms runtime.MemStats
		runtime.GC()
		runtime.ReadMemStats(&ms)
		return ms.HeapAlloc
	}
	var c chainer
	recs := make([]eventlog.Record, 0, 100)
	note := func(i int) {
		recs = append(recs, c.rec(eventlog.KindCapture, fmt.Sprintf(`"capture":"d%d/c%06d.ci8","sha256":"%s","status":"ok","events":0`,
			i%7, i, hexSHA(fmt.Sprint(i)))))
		if len(recs) == cap(recs) {
			if err := lg.note(recs); err != nil {
				t.Fatal(err)
			}
			recs = make([]eventlog.Record, 0, 100)
		}
	}
	// A first thousand warms bbolt up (its first pages, the freelist).
	for i := range 1000 {
		note(i)
	}
	h0 := heap()
	for i := 1000; i < n; i++ {
		note(i)
	}
	if err := lg.save(); err != nil {
		t.Fatal(err)
	}
	h1 := heap()
	for i := range n {
		name := fmt.Sprintf("d%d/c%06d.ci8", i%7, i)
		e, ok, err := lg.lookup(name)
		if r, known := e.outcome(hexSHA(fmt.Sprint(i))); err != nil || !ok || !known || r != "" {
			t.Fatalf("%s: %v %v %v %q", name, ok, err, known, r)
		}
	}
	h2 := heap()
	st, _ := os.Stat(lg.path)
	grow := int64(max(h1, h2)) - int64(h0)
	if grow > bound {
		t.Errorf("heap grew by %.1f MiB over %d records, want at most %d MiB", float64(grow)/(1<<20), n, bound>>20)
	}
	// For comparison: the same records in the former in-memory maps.
	h3 := heap()
	old := map[string]map[string]string{}
	for i := range n {
		old[fmt.Sprintf("d%d/c%06d.ci8", i%7, i)] = map[string]string{hexSHA(fmt.Sprint(i)): ""}
	}
	h4 := heap()
	runtime.KeepAlive(old)
	t.Logf("%d capture records: heap %+.2f MiB after noting, %+.2f MiB after %d lookups (bound %d MiB); ledger file %.1f MB; the same in maps: %.1f MiB",
		n, float64(int64(h1)-int64(h0))/(1<<20), float64(int64(h2)-int64(h0))/(1<<20), n, bound>>20, float64(st.Size())/1e6,
		float64(int64(h4)-int64(h3))/(1<<20))
}

// TestLedgerDamaged: a ledger deleted, emptied, cut short, overwritten
// with garbage, of another layout or lacking its buckets is set aside with a
// warning and rebuilt from the log, with the same answers as the log gives.
func TestLedgerDamaged(t *testing.T) {
	tests := []struct {
		name    string
		damage  func(t *testing.T, path string)
		rebuilt bool   // false: the damage is harmless
		aside   bool   // the old file is kept, renamed
		warn    string // in the warning
	}{
		{"deleted", func(t *testing.T, p string) { os.Remove(p) }, true, false, "no ledger; built it from the event log"},
		{"empty", func(t *testing.T, p string) { os.Truncate(p, 0) }, true, true, "empty file"},
		// bbolt grows its file ahead of the pages in use: cutting that
		// off loses nothing, cutting into the pages does.
		{"cut after its pages", func(t *testing.T, p string) { os.Truncate(p, boltPages(t, p)) }, false, false, ""},
		{"cut into its pages", func(t *testing.T, p string) { os.Truncate(p, boltPages(t, p)/2/4096*4096) }, true, true, "set aside"},
		{"cut to one page", func(t *testing.T, p string) { os.Truncate(p, 4096) }, true, true, "does not open"},
		{"garbage", func(t *testing.T, p string) {
			st, _ := os.Stat(p)
			b := make([]byte, st.Size())
			rng := rand.New(rand.NewPCG(1, 2))
			for i := range b {
				b[i] = byte(rng.Uint32())
			}
			os.WriteFile(p, b, 0o640)
		}, true, true, "does not open"},
		{"another layout", func(t *testing.T, p string) {
			db, err := bolt.Open(p, 0o640, nil)
			if err != nil {
				t.Fatal(err)
			}
			db.Update(func(tx *bolt.Tx) error { return tx.Bucket(bucketMeta).Put(keyFormat, []byte{0, 0, 0, 0, 0, 0, 0, 9}) })
			db.Close()
		}, true, true, "layout version 9"},
		{"bucket missing", func(t *testing.T, p string) {
			db, err := bolt.Open(p, 0o640, nil)
			if err != nil {
				t.Fatal(err)
			}
			db.Update(func(tx *bolt.Tx) error { return tx.DeleteBucket(bucketEvents) })
			db.Close()
		}, true, true, "lacks a bucket"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			dir := t.TempDir()
			logPath := filepath.Join(dir, "events.jsonl")
			writeLog(t, logPath, 0, 3000, 64<<10)
			m := readModel(t, logPath)
			lg := openTestLedger(t, dir, logPath, &syncBuffer{})
			checkAnswers(t, lg, m)
			if err := lg.close(); err != nil {
				t.Fatal(err)
			}
			tt.damage(t, filepath.Join(dir, ledgerFileName))

			out := &syncBuffer{}
			lg = openTestLedger(t, dir, logPath, out)
			checkAnswers(t, lg, m)
			if tt.rebuilt && (!lg.fullScan || lg.applied != int(lg.seq)) || !tt.rebuilt && (lg.fullScan || lg.applied != 0) {
				t.Errorf("full scan %v, %d of %d records applied, want rebuilt %v", lg.fullScan, lg.applied, lg.seq, tt.rebuilt)
			}
			if warned := strings.Contains(out.String(), "level=WARN"); warned != tt.rebuilt || !strings.Contains(out.String(), tt.warn) {
				t.Errorf("log %q, want a warning with %q: %v", out.String(), tt.warn, tt.rebuilt)
			}
			aside, _ := filepath.Glob(filepath.Join(dir, ledgerFileName+".bad-*"))
			if (len(aside) == 1) != tt.aside {
				t.Errorf("set aside: %q, want one file %v", aside, tt.aside)
			}
		})
	}
}

// TestLedgerLogChanged: a ledger whose record at its seq is not in the log
// any more (the log replaced by another, or cut) is set aside and rebuilt;
// one that is only behind (a crash after the log's fsync, before the
// ledger's write) is caught up, reading no segment before its seq.
func TestLedgerLogChanged(t *testing.T) {
	tests := []struct {
		name    string
		change  func(t *testing.T, logPath string)
		rebuilt bool
		warn    string
	}{
		{"another log of the same length", func(t *testing.T, p string) {
			removeLog(t, p)
			writeLog(t, p, 10000, 13000, 64<<10)
		}, true, "is not the one the ledger applied"},
		{"another, longer log", func(t *testing.T, p string) {
			removeLog(t, p)
			writeLog(t, p, 20000, 24000, 64<<10)
		}, true, "is not the one the ledger applied"},
		{"log cut short", func(t *testing.T, p string) {
			// The active file and the newest segment removed.
			segs, _ := eventlog.Segments(p)
			os.Remove(segs[len(segs)-1])
			os.Rename(segs[len(segs)-2], p)
		}, true, "the event log ends before record"},
		{"ledger behind", func(t *testing.T, p string) {
			writeLog(t, p, 3000, 3400, 64<<10)
			// Spoil the oldest segment: catching up must not read it.
			segs, _ := eventlog.Segments(p)
			os.WriteFile(segs[0], []byte("not a record\n"), 0o640)
		}, false, ""},
		{"nothing changed", func(t *testing.T, p string) {}, false, ""},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			dir := t.TempDir()
			logPath := filepath.Join(dir, "events.jsonl")
			writeLog(t, logPath, 0, 3000, 64<<10)
			lg := openTestLedger(t, dir, logPath, &syncBuffer{})
			seq := lg.seq
			lg.close()
			tt.change(t, logPath)

			out := &syncBuffer{}
			lg = openTestLedger(t, dir, logPath, out)
			var m model
			if tt.rebuilt {
				m = readModel(t, logPath)
			} else {
				// Scan cannot read the spoiled segment: the model is the
				// one of the log as written.
				ref := filepath.Join(t.TempDir(), "events.jsonl")
				writeLog(t, ref, 0, 3000, 64<<10)
				if tt.name == "ledger behind" {
					writeLog(t, ref, 3000, 3400, 64<<10)
				}
				m = readModel(t, ref)
			}
			checkAnswers(t, lg, m)
			if lg.fullScan != tt.rebuilt {
				t.Errorf("full scan %v, want %v", lg.fullScan, tt.rebuilt)
			}
			if !tt.rebuilt && lg.applied != int(lg.seq-seq) {
				t.Errorf("%d records applied, want the %d after seq %d", lg.applied, lg.seq-seq, seq)
			}
			aside, _ := filepath.Glob(filepath.Join(dir, ledgerFileName+".stale-*"))
			if (len(aside) == 1) != tt.rebuilt {
				t.Errorf("set aside: %q, want one file %v", aside, tt.rebuilt)
			}
			if tt.rebuilt && !strings.Contains(out.String(), tt.warn) {
				t.Errorf("log %q, want a warning with %q", out.String(), tt.warn)
			}
			if !tt.rebuilt && strings.Contains(out.String(), "level=WARN") {
				t.Errorf("warning on a plain catch-up: %s", out.String())
			}
		})
	}
}

// boltPages is the size of the pages a bbolt file uses (its high-water
// mark; the file may be longer).
func boltPages(t *testing.T, path string) int64 {
	db, err := bolt.Open(path, 0o640, &bolt.Options{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	var n int64
	db.View(func(tx *bolt.Tx) error { n = tx.Size(); return nil })
	if st, _ := os.Stat(path); st.Size() <= n {
		t.Logf("file of %d bytes, pages %d", st.Size(), n)
	}
	return n
}

func removeLog(t *testing.T, path string) {
	segs, err := eventlog.Segments(path)
	if err != nil {
		t.Fatal(err)
	}
	for _, s := range segs {
		os.Remove(s)
	}
}

// TestLedgerCaughtUpByDaemon: the daemon killed between the log's fsync
// and the ledger's write (here: the ledger's last records undone by
// writing the log behind its back) applies the missing records at start
// and analyses nothing again.
func TestLedgerCaughtUpByDaemon(t *testing.T) {
	s := newSite(t, "")
	rd := startDaemon(t, s)
	for i := range 6 {
		dropCapture(t, filepath.Join(s.in, fmt.Sprintf("u%d.ci8", i)), ci8Capture(uint64(5100+i), i == 2))
	}
	waitFor(t, 20*time.Second, "6 records", func() bool { return countCaptures(t, s.logPath) == 6 })
	rd.stop()
	// Three more captures recorded in the log only (as a daemon that
	// died right after its append would leave them).
	l, err := eventlog.Open(s.logPath, eventlog.Options{})
	if err != nil {
		t.Fatal(err)
	}
	for i := 6; i < 9; i++ {
		name := fmt.Sprintf("u%d.ci8", i)
		data := ci8Capture(uint64(5100+i), false)
		dropCapture(t, filepath.Join(s.in, name), data)
		h := sha256.Sum256(data)
		if _, err := l.Append(eventlog.KindCapture, detect.CaptureRecord{Capture: name, SHA256: hex.EncodeToString(h[:]),
			Status: detect.StatusOK, Format: "ci8", Samples: runSamples}); err != nil {
			t.Fatal(err)
		}
	}
	l.Close()
	rd = startDaemon(t, s)
	waitFor(t, 20*time.Second, "the start scan handled", func() bool {
		st := rd.d.watcher.Stats()
		return st.Rescans >= 1 && st.Backlog == 0 && st.Pending == 0
	})
	time.Sleep(300 * time.Millisecond)
	if lg := rd.d.ledger; lg.applied != 3 || lg.fullScan {
		t.Errorf("start applied %d records (full scan %v), want the 3 the ledger missed", lg.applied, lg.fullScan)
	}
	if got := countCaptures(t, s.logPath); got != 9 {
		t.Errorf("%d capture records, want 9: the caught-up captures were analysed again", got)
	}
	// The three were recorded without an identity: hashed once, found done.
	if got := rd.d.hashes.Load(); got != 3 {
		t.Errorf("%d files hashed, want 3", got)
	}
}

// TestLedgerSameDataTwoNames: event ids come from the data's SHA-256, not
// the capture's name, so the same bytes under a second name give the same
// ids: they must not be written twice (which keeping only the ids of
// captures in flight would allow).
func TestLedgerSameDataTwoNames(t *testing.T) {
	s := newSite(t, "")
	rd := startDaemon(t, s)
	data := ci8Capture(5200, true)
	dropCapture(t, filepath.Join(s.in, "first.ci8"), data)
	waitFor(t, 20*time.Second, "the first", func() bool { return countCaptures(t, s.logPath) == 1 })
	// After a restart too, the id is known from the ledger file.
	rd.stop()
	rd = startDaemon(t, s)
	dropCapture(t, filepath.Join(s.in, "copy", "second.ci8"), data)
	waitFor(t, 20*time.Second, "the second", func() bool { return countCaptures(t, s.logPath) == 2 })
	recs := checkLog(t, s.logPath) // no id twice
	caps := captureRecords(recs)
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
	s := newSite(t, "")
	startDaemon(t, s)
	dropCapture(t, filepath.Join(s.in, "x.ci8"), ci8Capture(5300, false))
	waitFor(t, 20*time.Second, "a record", func() bool { return countCaptures(t, s.logPath) == 1 })
	logBefore := mustRead(t, s.logPath)
	cfg, err := loadRunConfig(s.cfgPath, runOverrides{})
	if err != nil {
		t.Fatal(err)
	}
	done := make(chan error, 1)
	go func() {
		d, err := newDaemon(cfg, s.cfgPath, runOverrides{}, &syncBuffer{})
		if err == nil {
			d.run(canceled(), nil)
		}
		done <- err
	}()
	select {
	case err = <-done:
	case <-time.After(10 * ledgerLockWait):
		t.Fatal("the second daemon hangs")
	}
	want := filepath.Join(s.state, ledgerFileName)
	if err == nil || !strings.Contains(err.Error(), want) || !strings.Contains(err.Error(), "locked") {
		t.Errorf("second daemon: %v, want an error naming %s as locked", err, want)
	}
	if !bytes.Equal(mustRead(t, s.logPath), logBefore) {
		t.Error("the second daemon changed the event log")
	}
}

func canceled() context.Context {
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	return ctx
}

// TestFillRecent: the ring for /api/events gets the newest records of each
// kind, as a full scan would give it, reading only the newest segments.
func TestFillRecent(t *testing.T) {
	dir := t.TempDir()
	logPath := filepath.Join(dir, "events.jsonl")
	writeLog(t, logPath, 0, 3000, 16<<10)
	segs, _ := eventlog.Segments(logPath)
	for _, n := range []int{1, 5, 200, 5000} {
		t.Run(fmt.Sprint(n), func(t *testing.T) {
			want := metrics.NewRecent(n)
			if err := eventlog.Scan(logPath, func(r eventlog.Record) error { want.Add(r); return nil }); err != nil {
				t.Fatal(err)
			}
			got := metrics.NewRecent(n)
			files, err := fillRecent(logPath, got, n)
			if err != nil {
				t.Fatal(err)
			}
			w, g := want.Since(0, 4*n, true, true), got.Since(0, 4*n, true, true)
			if len(g) != len(w) {
				t.Fatalf("%d records, want %d", len(g), len(w))
			}
			for i := range w {
				if g[i].Seq != w[i].Seq || !bytes.Equal(g[i].Line, w[i].Line) {
					t.Fatalf("record %d: seq %d, want %d", i, g[i].Seq, w[i].Seq)
				}
			}
			if n <= 200 && files >= len(segs)/2 {
				t.Errorf("read %d of %d files for %d records of each kind", files, len(segs), n)
			}
			t.Logf("n %d: %d of %d files read", n, files, len(segs))
		})
	}
}

// BenchmarkLedgerNote measures noting one capture (an event and its
// capture record) in the ledger: written at once (a bbolt commit with its
// fsyncs each time) or grouped as the daemon does.
func BenchmarkLedgerNote(b *testing.B) {
	for _, bc := range []struct {
		name string
		wait time.Duration
	}{{"each", 0}, {"grouped", ledgerGroupWait}} {
		b.Run(bc.name, func(b *testing.B) {
			dir := b.TempDir()
			lg, err := openLedger(dir, filepath.Join(dir, "events.jsonl"), slog.New(slog.DiscardHandler))
			if err != nil {
				b.Fatal(err)
			}
			defer lg.close()
			lg.groupWait = bc.wait
			var c chainer
			i := 0
			for b.Loop() {
				recs := []eventlog.Record{
					c.rec(eventlog.KindEvent, fmt.Sprintf(`"id":"%024x","class":"cw","capture":"c%d.ci8"`, i, i)),
					c.rec(eventlog.KindCapture, fmt.Sprintf(`"capture":"c%d.ci8","sha256":"%064x","status":"ok","events":1`, i, i)),
				}
				if err := lg.note(recs, fileStamp{name: fmt.Sprintf("c%d.ci8", i), id: fileID{size: int64(i), mtime: 1}}); err != nil {
					b.Fatal(err)
				}
				i++
			}
			if err := lg.save(); err != nil {
				b.Fatal(err)
			}
		})
	}
}

// BenchmarkLedgerLookup measures the check of one capture against a
// ledger of 10 000: the lookup, and the identity of its data file.
func BenchmarkLedgerLookup(b *testing.B) {
	dir := b.TempDir()
	lg, err := openLedger(dir, filepath.Join(dir, "events.jsonl"), slog.New(slog.DiscardHandler))
	if err != nil {
		b.Fatal(err)
	}
	defer lg.close()
	var c chainer
	for i := range 10000 {
		lg.note([]eventlog.Record{c.rec(eventlog.KindCapture, fmt.Sprintf(`"capture":"c%05d.ci8","sha256":"%064x","status":"ok"`, i, i))})
	}
	lg.save()
	data := filepath.Join(dir, "data.ci8")
	os.WriteFile(data, make([]byte, 40000), 0o644)
	i := 0
	for b.Loop() {
		e, ok, err := lg.lookup(fmt.Sprintf("c%05d.ci8", i%10000))
		if !ok || err != nil || len(e.outcomes) != 1 {
			b.Fatal(ok, err)
		}
		identify(data, true)
		i++
	}
}

// BenchmarkDaemonStart measures a daemon's start over an archive of
// recorded captures, from newDaemon until every capture of the start scan
// has been taken and the daemon has stopped: 300 captures of 40 kB, or 30
// of 4 MB.
func BenchmarkDaemonStart(b *testing.B) {
	for _, bc := range []struct{ n, samples int }{{300, runSamples}, {30, 100 * runSamples}} {
		b.Run(fmt.Sprintf("%dx%dkB", bc.n, 2*bc.samples/1000), func(b *testing.B) {
			s := newSite(b, "")
			rd := startDaemon(b, s)
			for i := range bc.n {
				data := make([]byte, 0, 2*bc.samples)
				for len(data) < 2*bc.samples {
					data = append(data, ci8Capture(uint64(i*1000+len(data)), false)...)
				}
				dropCapture(b, filepath.Join(s.in, fmt.Sprintf("s%03d.ci8", i)), data[:2*bc.samples])
			}
			waitFor(b, 120*time.Second, "every capture recorded", func() bool { return countCaptures(b, s.logPath) == bc.n })
			if err := rd.stop(); err != nil {
				b.Fatal(err)
			}
			cfg, err := loadRunConfig(s.cfgPath, runOverrides{})
			if err != nil {
				b.Fatal(err)
			}
			for b.Loop() {
				d, err := newDaemon(cfg, s.cfgPath, runOverrides{}, io.Discard)
				if err != nil {
					b.Fatal(err)
				}
				ctx, cancel := context.WithCancel(context.Background())
				done := make(chan error, 1)
				go func() { done <- d.run(ctx, nil) }()
				for {
					st := d.watcher.Stats()
					if st.Rescans >= 1 && st.Backlog == 0 && st.Pending == 0 && len(d.watcher.Work()) == 0 {
						break
					}
					time.Sleep(time.Millisecond)
				}
				cancel()
				if err := <-done; err != nil {
					b.Fatal(err)
				}
			}
			if got := countCaptures(b, s.logPath); got != bc.n {
				b.Errorf("%d capture records after the restarts, want %d", got, bc.n)
			}
		})
	}
}
