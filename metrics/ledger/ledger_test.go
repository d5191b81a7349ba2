package ledger

import (
	"bytes"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"log/slog"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"

	"quietband/detect"
	"quietband/metrics/eventlog"
)

// syncBuffer collects a ledger's diagnostic log.
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

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
		var b struct {
			ID, Capture, SHA256, Status, Error string
		}
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
func checkAnswers(t *testing.T, lg *Ledger, m model) {
	t.Helper()
	bad := 0
	for name, shas := range m.caps {
		e, ok, err := lg.Lookup("", name)
		if err != nil || !ok || len(e.outcomes) != len(shas) {
			t.Errorf("%s: found %v (%v), %d outcomes, want %d", name, ok, err, len(e.outcomes), len(shas))
			bad++
		}
		for sha, reason := range shas {
			if got, ok := e.Outcome(sha, ""); !ok || got != reason {
				t.Errorf("%s: sha %.12s… outcome %q (%v), want %q", name, sha, got, ok, reason)
				bad++
			}
		}
		if bad > 5 {
			t.Fatal("too many differences")
		}
	}
	for _, id := range m.ids {
		if ok, err := lg.HasEvent(id); !ok || err != nil {
			t.Fatalf("event %s not known (%v)", id, err)
		}
	}
	for _, absent := range []string{"nowhere.ci8", "d1/c999999.ci8"} {
		if _, ok, _ := lg.Lookup("", absent); ok {
			t.Errorf("%s is known but not in the log", absent)
		}
	}
	if ok, _ := lg.HasEvent(hexSHA("no such event")[:24]); ok {
		t.Error("an id not in the log is known")
	}
	if got := lg.Captures(); got != uint64(len(m.caps)) {
		t.Errorf("captures() = %d, want %d", got, len(m.caps))
	}
}

// openTestLedger opens and syncs the ledger of state folder dir for the
// log at logPath, logging into out.
func openTestLedger(t *testing.T, dir, logPath string, out *syncBuffer) *Ledger {
	t.Helper()
	lg, err := Open(dir, logPath, slog.New(slog.NewTextHandler(out, nil)))
	if err != nil {
		t.Fatal(err)
	}
	if err := lg.Sync(); err != nil {
		lg.Close()
		t.Fatal(err)
	}
	t.Cleanup(func() { lg.Close() })
	return lg
}

func TestLedgerEntryEncoding(t *testing.T) {
	id := FileID{size: 40000, mtime: 1764621296123456789, ctime: -5, dev: 2049, ino: 1 << 40}
	good := []Entry{
		{},
		{outcomes: []outcome{{hexSHA("a"), "", ""}}},
		{outcomes: []outcome{{hexSHA("a"), "", ""}, {"", "", "cannot read: permission denied"}, {"ABCDEF", "", "not lowercase hex"}},
			hasFile: true, file: id, fileSHA: hexSHA("a")},
		{outcomes: []outcome{{hexSHA("b"), "", "reason\nwith\x00bytes ü"}}, hasFile: true, file: id, fileSHA: "short"},
		{outcomes: []outcome{{hexSHA("b"), hexSHA("meta 1"), ""}, {hexSHA("b"), hexSHA("meta 2"), "a reason"}, {hexSHA("c"), "Not hex", ""}}},
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
	if n := len((&Entry{outcomes: []outcome{{hexSHA("a"), "", ""}}}).encode()); n != 1+33+2+1+1 {
		t.Errorf("one outcome without metadata: %d bytes, want 38", n)
	}
	if n := len((&Entry{outcomes: []outcome{{hexSHA("a"), hexSHA("m"), ""}}}).encode()); n != 1+33+33+1+1 {
		t.Errorf("one outcome with metadata: %d bytes, want 69", n)
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

// TestLedgerEntryRecord: records applied to an entry in turn. A content
// is the data's SHA-256 and the metadata's (issue 17, item 7): the same
// data with corrected metadata is another content, and Latest names the
// latest record's; a record without a metadata SHA-256 stands for any
// metadata in Outcome (a record written before the field).
func TestLedgerEntryRecord(t *testing.T) {
	id := FileID{size: 1, mtime: 2, dev: 3, ino: 4}
	a, b := hexSHA("a"), hexSHA("b")
	m1, m2 := hexSHA("sample_rate 2e6"), hexSHA("sample_rate 4e6")
	var e Entry
	steps := []struct {
		sha, meta, reason string
		file              *FileID
		outcomes          []outcome
		hasFile           bool
	}{
		{a, "", "zero length", &id, []outcome{{a, "", "zero length"}}, true},
		{a, "", "", nil, []outcome{{a, "", ""}}, false}, // the latest record of the same content wins
		{b, m1, "", &id, []outcome{{a, "", ""}, {b, m1, ""}}, true},
		{b, m2, "", &id, []outcome{{a, "", ""}, {b, m1, ""}, {b, m2, ""}}, true}, // corrected metadata: another content
		{b, m1, "a reason", &id, []outcome{{a, "", ""}, {b, m1, "a reason"}, {b, m2, ""}}, true},
		{"", "", "cannot read", &id, []outcome{{a, "", ""}, {b, m1, "a reason"}, {b, m2, ""}, {"", "", "cannot read"}}, false}, // nothing hashed: no identity
	}
	for i, s := range steps {
		e.record(s.sha, s.meta, s.reason, s.file)
		if !slices.Equal(e.outcomes, s.outcomes) || e.hasFile != s.hasFile {
			t.Fatalf("step %d: %+v", i, e)
		}
		if sha, ok := e.SHAFor(id, true); ok != s.hasFile || ok && sha != s.sha {
			t.Errorf("step %d: shaFor = %q, %v", i, sha, ok)
		}
		if _, ok := e.SHAFor(FileID{size: 1, mtime: 3, dev: 3, ino: 4}, true); ok {
			t.Errorf("step %d: another mtime matches", i)
		}
		if i == 3 {
			if sha, meta := e.Latest(); sha != b || meta != m2 {
				t.Errorf("after the corrected metadata's record: Latest = %.8s…, %.8s…; want its content", sha, meta)
			}
		}
	}
	outcomes := []struct {
		sha, meta, reason string
		ok                bool
	}{
		{b, m1, "a reason", true},
		{b, m2, "", true},
		{b, hexSHA("sample_rate 8e6"), "", false}, // metadata never recorded
		{b, "", "", false},                        // b was never recorded without metadata
		{a, m1, "", true},                         // a's record gave no metadata: it stands for any
		{a, "", "", true},
		{hexSHA("c"), "", "", false},
	}
	for _, o := range outcomes {
		if reason, ok := e.Outcome(o.sha, o.meta); ok != o.ok || reason != o.reason {
			t.Errorf("Outcome(%.8s…, %.8s…) = %q, %v; want %q, %v", o.sha, o.meta, reason, ok, o.reason, o.ok)
		}
	}
}

// TestLedgerHeap: noting 100 000 capture records leaves the heap about
// where it was, while the ledger answers for all of them. The bound, 4 MiB,
// is what does not grow with the records: bbolt keeps the tree in its
// memory map (page cache, not heap) and the Go heap holds the freelist and,
// during a write, the nodes of the pages it changes (a group of at most
// GroupMax records). The same records in the former maps take about
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
			if err := lg.Note(recs); err != nil {
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
	if err := lg.Save(); err != nil {
		t.Fatal(err)
	}
	h1 := heap()
	for i := range n {
		name := fmt.Sprintf("d%d/c%06d.ci8", i%7, i)
		e, ok, err := lg.Lookup("", name)
		if r, known := e.Outcome(hexSHA(fmt.Sprint(i)), ""); err != nil || !ok || !known || r != "" {
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
			if err := lg.Close(); err != nil {
				t.Fatal(err)
			}
			tt.damage(t, filepath.Join(dir, FileName))

			out := &syncBuffer{}
			lg = openTestLedger(t, dir, logPath, out)
			checkAnswers(t, lg, m)
			if tt.rebuilt && (!lg.fullScan || lg.applied != int(lg.seq)) || !tt.rebuilt && (lg.fullScan || lg.applied != 0) {
				t.Errorf("full scan %v, %d of %d records applied, want rebuilt %v", lg.fullScan, lg.applied, lg.seq, tt.rebuilt)
			}
			if warned := strings.Contains(out.String(), "level=WARN"); warned != tt.rebuilt || !strings.Contains(out.String(), tt.warn) {
				t.Errorf("log %q, want a warning with %q: %v", out.String(), tt.warn, tt.rebuilt)
			}
			aside, _ := filepath.Glob(filepath.Join(dir, FileName+".bad-*"))
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
			lg.Close()
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
			aside, _ := filepath.Glob(filepath.Join(dir, FileName+".stale-*"))
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

// BenchmarkLedgerNote measures noting one capture (an event and its
// capture record) in the ledger: written at once (a bbolt commit with its
// fsyncs each time) or grouped as the daemon does.
func BenchmarkLedgerNote(b *testing.B) {
	for _, bc := range []struct {
		name string
		wait time.Duration
	}{{"each", 0}, {"grouped", GroupWait}} {
		b.Run(bc.name, func(b *testing.B) {
			dir := b.TempDir()
			lg, err := Open(dir, filepath.Join(dir, "events.jsonl"), slog.New(slog.DiscardHandler))
			if err != nil {
				b.Fatal(err)
			}
			defer lg.Close()
			lg.groupWait = bc.wait
			var c chainer
			i := 0
			for b.Loop() {
				recs := []eventlog.Record{
					c.rec(eventlog.KindEvent, fmt.Sprintf(`"id":"%024x","class":"cw","capture":"c%d.ci8"`, i, i)),
					c.rec(eventlog.KindCapture, fmt.Sprintf(`"capture":"c%d.ci8","sha256":"%064x","status":"ok","events":1`, i, i)),
				}
				if err := lg.Note(recs, Stamp{Name: fmt.Sprintf("c%d.ci8", i), ID: FileID{size: int64(i), mtime: 1}}); err != nil {
					b.Fatal(err)
				}
				i++
			}
			if err := lg.Save(); err != nil {
				b.Fatal(err)
			}
		})
	}
}

// BenchmarkLedgerLookup measures the check of one capture against a
// ledger of 10 000: the lookup, and the identity of its data file.
func BenchmarkLedgerLookup(b *testing.B) {
	dir := b.TempDir()
	lg, err := Open(dir, filepath.Join(dir, "events.jsonl"), slog.New(slog.DiscardHandler))
	if err != nil {
		b.Fatal(err)
	}
	defer lg.Close()
	var c chainer
	for i := range 10000 {
		lg.Note([]eventlog.Record{c.rec(eventlog.KindCapture, fmt.Sprintf(`"capture":"c%05d.ci8","sha256":"%064x","status":"ok"`, i, i))})
	}
	lg.Save()
	data := filepath.Join(dir, "data.ci8")
	os.WriteFile(data, make([]byte, 40000), 0o644)
	i := 0
	for b.Loop() {
		e, ok, err := lg.Lookup("", fmt.Sprintf("c%05d.ci8", i%10000))
		if !ok || err != nil || len(e.outcomes) != 1 {
			b.Fatal(ok, err)
		}
		Identify(data, true)
		i++
	}
}

// TestLedgerNoteLookupReopen: what is noted is answered at once (grouped
// records wait in memory), survives Save, Close and a reopen (the file
// then matches the log's head: nothing to catch up); a data file's stamp
// gives its SHA-256 back only for the same identity; Remember adds an
// identity to a recorded name; and records that do not follow the last
// one noted (the log replaced under the ledger) make it sync with the log.
func TestLedgerNoteLookupReopen(t *testing.T) {
	dir := t.TempDir()
	logPath := filepath.Join(dir, "events.jsonl")
	l, err := eventlog.Open(logPath, eventlog.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	lg := openTestLedger(t, dir, logPath, &syncBuffer{})
	lg.groupWait = time.Hour // every note waits for Save
	data := filepath.Join(dir, "a.ci8")
	os.WriteFile(data, []byte("samples"), 0o644)
	id, ok := Identify(data, false)
	if !ok {
		t.Fatal("no identity for a regular file")
	}
	sha := HashFile(data, false)
	if want := hexSHA("samples"); sha != want {
		t.Fatalf("HashFile = %s, want %s (crypto/sha256)", sha, want)
	}
	recs, err := l.AppendBatch([]eventlog.Item{
		{Kind: eventlog.KindEvent, Body: detect.Event{ID: "00aa11bb22cc33dd44ee55ff", Class: detect.ClassCW, Capture: "a.ci8"}},
		{Kind: eventlog.KindCapture, Body: detect.CaptureRecord{Capture: "a.ci8", SHA256: sha, Status: detect.StatusOK, Events: 1}},
		{Kind: eventlog.KindCapture, Body: detect.CaptureRecord{Capture: "b.ci8", Status: detect.StatusQuarantined, Error: "b.ci8: zero length"}},
	})
	if err != nil {
		t.Fatal(err)
	}
	if err := lg.Note(recs, Stamp{Name: "a.ci8", ID: id}); err != nil {
		t.Fatal(err)
	}
	check := func(when string) {
		t.Helper()
		e, ok, err := lg.Lookup("", "a.ci8")
		if r, known := e.Outcome(sha, ""); err != nil || !ok || !known || r != "" {
			t.Errorf("%s: a.ci8: %v %v %v %q", when, ok, err, known, r)
		}
		if got, ok := e.SHAFor(id, true); !ok || got != sha {
			t.Errorf("%s: a.ci8's SHA-256 from its identity: %q %v", when, got, ok)
		}
		if _, ok := e.SHAFor(FileID{size: id.size + 1, mtime: id.mtime, ctime: id.ctime, dev: id.dev, ino: id.ino}, true); ok {
			t.Errorf("%s: another size gives the SHA-256", when)
		}
		e, ok, _ = lg.Lookup("", "b.ci8")
		if r, known := e.Outcome("", ""); !ok || !known || r != "b.ci8: zero length" {
			t.Errorf("%s: b.ci8: %v %v %q", when, ok, known, r)
		}
		if ok, err := lg.HasEvent("00aa11bb22cc33dd44ee55ff"); !ok || err != nil {
			t.Errorf("%s: event id not known (%v)", when, err)
		}
		if ok, _ := lg.HasEvent("ffffffffffffffffffffffff"); ok {
			t.Errorf("%s: an id never noted is known", when)
		}
		if lg.Captures() < 1 && when != "noted" {
			t.Errorf("%s: %d capture names", when, lg.Captures())
		}
	}
	check("noted")
	if err := lg.Save(); err != nil {
		t.Fatal(err)
	}
	check("saved")
	// b.ci8 is hashed at a later sighting and found recorded: its
	// identity is remembered.
	bdata := filepath.Join(dir, "b.ci8")
	os.WriteFile(bdata, nil, 0o644)
	bid, _ := Identify(bdata, false)
	lg.Remember("", "b.ci8", bid, "")
	if err := lg.Close(); err != nil {
		t.Fatal(err)
	}
	lg = openTestLedger(t, dir, logPath, &syncBuffer{})
	if applied, full := lg.LastSync(); applied != 0 || full {
		t.Errorf("reopen applied %d records (full scan %v), want none", applied, full)
	}
	check("reopened")
	if lg.Captures() != 2 {
		t.Errorf("%d capture names, want 2", lg.Captures())
	}

	// The log replaced under the ledger: a record that does not follow.
	l.Close()
	os.Remove(logPath)
	l2, err := eventlog.Open(logPath, eventlog.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer l2.Close()
	recs, err = l2.AppendBatch([]eventlog.Item{{Kind: eventlog.KindCapture, Body: detect.CaptureRecord{Capture: "c.ci8", SHA256: hexSHA("c"), Status: detect.StatusOK}}})
	if err != nil {
		t.Fatal(err)
	}
	if err := lg.Note(recs); err != nil {
		t.Fatal(err)
	}
	if _, ok, _ := lg.Lookup("", "a.ci8"); ok {
		t.Error("a.ci8 still known after the log it was in was replaced")
	}
	if e, ok, _ := lg.Lookup("", "c.ci8"); !ok {
		t.Error("c.ci8 of the new log not known")
	} else if _, known := e.Outcome(hexSHA("c"), ""); !known {
		t.Error("c.ci8's outcome not known")
	}
}

// TestLedgerCaptureIdentity (issue 17, items 6 and 7): a capture is its
// input and its name, and its content covers its metadata. Two inputs'
// records of the same name and bytes are two captures; a log written
// before records carried the input or the metadata's SHA-256 (its capture
// records as they were then: no input, no metadata_sha256) still says what
// is done, in any input, whether the ledger is built from it, caught up
// from it or rebuilt from a ledger of the former layout.
func TestLedgerCaptureIdentity(t *testing.T) {
	dir := t.TempDir()
	logPath := filepath.Join(dir, "events.jsonl")
	data, meta, fixed := hexSHA("samples"), hexSHA("sample_rate 2e6"), hexSHA("sample_rate 4e6")
	// The log as a daemon wrote it before the change: lines spelled out.
	var c chainer
	old := []eventlog.Record{
		c.rec(eventlog.KindEvent, `"id":"0123456789abcdef01234567","class":"cw","capture":"old.sigmf-meta"`),
		c.rec(eventlog.KindCapture, `"capture":"old.sigmf-meta","sha256":"`+data+`","samples":20000,"status":"ok","events":1`),
	}
	var lines []byte
	for _, r := range old {
		lines = append(append(lines, r.Line...), '\n')
	}
	if err := os.WriteFile(logPath, lines, 0o644); err != nil {
		t.Fatal(err)
	}
	lg := openTestLedger(t, dir, logPath, &syncBuffer{})
	// Then records of this version: same name and bytes in two inputs,
	// and one capture's metadata corrected.
	recs := []eventlog.Record{
		c.rec(eventlog.KindCapture, `"capture":"a.sigmf-meta","input":"roof","sha256":"`+data+`","metadata_sha256":"`+meta+`","samples":1,"status":"ok","events":0`),
		c.rec(eventlog.KindCapture, `"capture":"a.sigmf-meta","input":"mast","sha256":"`+data+`","metadata_sha256":"`+meta+`","samples":1,"status":"ok","events":0`),
		c.rec(eventlog.KindCapture, `"capture":"a.sigmf-meta","input":"mast","sha256":"`+data+`","metadata_sha256":"`+fixed+`","samples":1,"status":"ok","events":0`),
	}
	if err := lg.Note(recs, Stamp{Input: "mast", Name: "a.sigmf-meta", ID: FileID{size: 7, mtime: 1}}); err != nil {
		t.Fatal(err)
	}
	f, err := os.OpenFile(logPath, os.O_WRONLY|os.O_APPEND, 0)
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range recs {
		f.Write(append(r.Line, '\n'))
	}
	f.Close()

	type ask struct {
		input, name, sha, meta string
		known, done            bool   // the name has an entry; this content is recorded
		latestMeta             string // Latest's metadata SHA-256
	}
	asks := []ask{
		{"roof", "a.sigmf-meta", data, meta, true, true, meta},
		{"roof", "a.sigmf-meta", data, fixed, true, false, meta}, // not corrected in roof
		{"mast", "a.sigmf-meta", data, meta, true, true, fixed},
		{"mast", "a.sigmf-meta", data, fixed, true, true, fixed},
		{"dish", "a.sigmf-meta", data, meta, false, false, ""}, // a third input has not seen it
		{"", "a.sigmf-meta", data, meta, false, false, ""},     // nor has replay
		// Recorded before records carried the input and the metadata:
		// done in every input, whatever the metadata.
		{"roof", "old.sigmf-meta", data, meta, true, true, ""},
		{"dish", "old.sigmf-meta", data, fixed, true, true, ""},
		{"", "old.sigmf-meta", data, "", true, true, ""},
		{"roof", "old.sigmf-meta", hexSHA("other samples"), meta, true, false, ""},
	}
	check := func(when string) {
		t.Helper()
		for _, a := range asks {
			e, known, err := lg.Lookup(a.input, a.name)
			if err != nil {
				t.Fatal(err)
			}
			_, done := e.Outcome(a.sha, a.meta)
			_, latestMeta := e.Latest()
			if known != a.known || done != a.done || latestMeta != a.latestMeta {
				t.Errorf("%s: %s in %q (metadata %.8s…): known %v, done %v, latest metadata %.8s…; want %v, %v, %.8s…",
					when, a.name, a.input, a.meta, known, done, latestMeta, a.known, a.done, a.latestMeta)
			}
		}
		if got := lg.Captures(); got != 3 && when != "noted" {
			t.Errorf("%s: %d captures, want 3 (old, a in roof, a in mast)", when, got)
		}
		if ok, _ := lg.HasEvent("0123456789abcdef01234567"); !ok {
			t.Errorf("%s: the old log's event id is not known", when)
		}
	}
	check("noted")
	mast, roof := mustLookup(t, lg, "mast", "a.sigmf-meta"), mustLookup(t, lg, "roof", "a.sigmf-meta")
	if sha, ok := mast.SHAFor(FileID{size: 7, mtime: 1}, true); !ok || sha != data {
		t.Errorf("the stamp of a.sigmf-meta in mast: %q %v", sha, ok)
	}
	if _, ok := roof.SHAFor(FileID{size: 7, mtime: 1}, true); ok {
		t.Error("the stamp of a.sigmf-meta in mast is taken for roof's")
	}
	if err := lg.Close(); err != nil {
		t.Fatal(err)
	}
	lg = openTestLedger(t, dir, logPath, &syncBuffer{})
	check("reopened")
	lg.Close()

	// A ledger of the former layout (version 1) is set aside and rebuilt
	// from the log.
	db, err := bolt.Open(filepath.Join(dir, FileName), 0o640, nil)
	if err != nil {
		t.Fatal(err)
	}
	err = db.Update(func(tx *bolt.Tx) error {
		return tx.Bucket(bucketMeta).Put(keyFormat, binary.BigEndian.AppendUint64(nil, 1))
	})
	db.Close()
	if err != nil {
		t.Fatal(err)
	}
	var out syncBuffer
	lg = openTestLedger(t, dir, logPath, &out)
	if !strings.Contains(out.String(), "layout version 1") {
		t.Errorf("a version 1 ledger opened without a word: %s", out.String())
	}
	if applied, full := lg.LastSync(); applied != len(old)+len(recs) || !full {
		t.Errorf("rebuild applied %d records (full %v), want %d", applied, full, len(old)+len(recs))
	}
	check("rebuilt from a version 1 ledger")

	// Built from the log alone.
	lg.Close()
	os.Remove(filepath.Join(dir, FileName))
	lg = openTestLedger(t, dir, logPath, &syncBuffer{})
	check("built from the log")
}

func mustLookup(t *testing.T, lg *Ledger, input, name string) Entry {
	t.Helper()
	e, ok, err := lg.Lookup(input, name)
	if err != nil || !ok {
		t.Fatalf("%s in %q: %v %v", name, input, ok, err)
	}
	return e
}
