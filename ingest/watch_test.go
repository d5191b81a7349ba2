package ingest

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"
)

// The watcher tests drop files the way recorders and copy tools do and
// check what comes out against the completion rules of DESIGN.md ("closed
// after writing, or renamed into place, or unchanged for a settle time")
// and inotify(7): IN_CLOSE_WRITE is sent when a file opened for writing is
// closed, IN_MOVED_TO when a file is renamed into a watched folder.

// watchModes are the event sources; every behaviour test runs on each.
// With inotify the settle time is an hour, so only the close-after-write
// (and then DefaultSettle unchanged) and rename events can hand a capture
// out: that checks they are used.
var watchModes = []struct {
	notify string
	settle time.Duration
	rescan time.Duration
}{
	{NotifyInotify, time.Hour, -1},
	{NotifyFsnotify, 200 * time.Millisecond, -1},
	{NotifyPoll, 200 * time.Millisecond, 100 * time.Millisecond},
}

var testRaw = RawSettings{SampleRate: 1e6, CenterHz: 1575.42e6, HasCenter: true}

type watchHarness struct {
	t    *testing.T
	w    *Watcher
	root string
}

func startWatcher(t *testing.T, cfg WatchConfig) *watchHarness {
	t.Helper()
	w, err := NewWatcher(cfg)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- w.Run(ctx) }()
	t.Cleanup(func() {
		cancel()
		if err := <-done; err != nil {
			t.Errorf("Run: %v", err)
		}
	})
	deadline := time.Now().Add(5 * time.Second)
	for !w.Running() {
		if time.Now().After(deadline) {
			t.Fatal("watcher did not start")
		}
		time.Sleep(5 * time.Millisecond)
	}
	return &watchHarness{t: t, w: w, root: cfg.Inputs[0].Root}
}

func startMode(t *testing.T, notify string, settle, rescan time.Duration) *watchHarness {
	root := t.TempDir()
	return startWatcher(t, WatchConfig{Notify: notify, RescanInterval: rescan,
		Inputs: []WatchInput{{Name: "site", Root: root, Raw: testRaw, Settle: settle}}})
}

// next waits for the next item.
func (h *watchHarness) next(timeout time.Duration) (Found, bool) {
	select {
	case wk := <-h.w.Work():
		return wk, true
	case <-time.After(timeout):
		return Found{}, false
	}
}

// take collects n items, failing after the timeout.
func (h *watchHarness) take(n int, timeout time.Duration) []Found {
	h.t.Helper()
	var out []Found
	deadline := time.Now().Add(timeout)
	for len(out) < n {
		wk, ok := h.next(time.Until(deadline))
		if !ok {
			h.t.Fatalf("got %d of %d items within %v: %v", len(out), n, timeout, names(out))
		}
		out = append(out, wk)
	}
	return out
}

// none checks that nothing is handed out for d.
func (h *watchHarness) none(d time.Duration) {
	h.t.Helper()
	if wk, ok := h.next(d); ok {
		h.t.Fatalf("unexpected item %s (problem %v)", wk.Name, wk.Problem)
	}
}

func names(ws []Found) []string {
	var out []string
	for _, w := range ws {
		out = append(out, w.Name)
	}
	return out
}

// ci8Bytes is n random ci8 samples.
func ci8Bytes(rng *rand.Rand, n int) []byte {
	b := make([]byte, 2*n)
	for i := range b {
		b[i] = byte(rng.IntN(256))
	}
	return b
}

func writeFile(t *testing.T, path string, data []byte) {
	t.Helper()
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
}

func checkOK(t *testing.T, wk Found, name string, samples int64) {
	t.Helper()
	if wk.Name != name {
		t.Errorf("item %q, want %q", wk.Name, name)
	}
	if wk.Problem != nil {
		t.Fatalf("%s: unexpected problem %v", wk.Name, wk.Problem)
	}
	if wk.Capture.Samples != samples {
		t.Errorf("%s: %d samples, want %d (taken before it was complete?)", wk.Name, wk.Capture.Samples, samples)
	}
	if wk.Input != "site" {
		t.Errorf("%s: input %q, want site", wk.Name, wk.Input)
	}
}

func eachMode(t *testing.T, fn func(t *testing.T, h *watchHarness)) {
	eachModeSettle(t, 0, fn)
}

// eachModeSettle runs fn on each event source, with the given settle
// time instead of the mode's when it is not zero.
func eachModeSettle(t *testing.T, settle time.Duration, fn func(t *testing.T, h *watchHarness)) {
	// The modes run at once (t.Run from several goroutines): the tests
	// mostly wait, and -parallel would hold them to GOMAXPROCS at a time.
	var wg sync.WaitGroup
	for _, m := range watchModes {
		wg.Go(func() {
			t.Run(m.notify, func(t *testing.T) {
				s := m.settle
				if settle != 0 {
					s = settle
				}
				fn(t, startMode(t, m.notify, s, m.rescan))
			})
		})
	}
	wg.Wait()
}

func TestWatchDroppedAtOnce(t *testing.T) {
	t.Parallel()
	eachMode(t, func(t *testing.T, h *watchHarness) {
		rng := rand.New(rand.NewPCG(1, 2))
		const n = 25
		for i := range n {
			writeFile(t, filepath.Join(h.root, fmt.Sprintf("burst-%02d.ci8", i)), ci8Bytes(rng, 100+i))
		}
		got := h.take(n, 20*time.Second)
		slices.SortFunc(got, func(a, b Found) int { return strings.Compare(a.Name, b.Name) })
		for i, wk := range got {
			checkOK(t, wk, fmt.Sprintf("burst-%02d.ci8", i), int64(100+i))
		}
		// Nothing twice: rescans and late events hand out nothing more.
		h.w.Rescan()
		h.none(500 * time.Millisecond)
	})
}

func TestWatchSlowWriter(t *testing.T) {
	t.Parallel()
	// A writer that keeps the file open and adds one byte at a time, far
	// faster than the settle time: the capture must not be handed out
	// before the writer closes it, and then whole.
	eachMode(t, func(t *testing.T, h *watchHarness) {
		path := filepath.Join(h.root, "slow.ci8")
		f, err := os.Create(path)
		if err != nil {
			t.Fatal(err)
		}
		data := ci8Bytes(rand.New(rand.NewPCG(3, 4)), 40)
		got := make(chan Found, 4)
		stop := make(chan struct{})
		go func() {
			for {
				select {
				case wk := <-h.w.Work():
					got <- wk
				case <-stop:
					return
				}
			}
		}()
		for i := range data {
			if _, err := f.Write(data[i : i+1]); err != nil {
				t.Fatal(err)
			}
			time.Sleep(10 * time.Millisecond)
			select {
			case wk := <-got:
				t.Fatalf("taken after %d of %d bytes (samples %v, problem %v)", i+1, len(data), wk.Capture, wk.Problem)
			default:
			}
		}
		if err := f.Close(); err != nil {
			t.Fatal(err)
		}
		select {
		case wk := <-got:
			checkOK(t, wk, "slow.ci8", 40)
		case <-time.After(10 * time.Second):
			t.Fatal("not handed out after the writer closed it")
		}
		close(stop)
	})
}

func TestWatchRenamedIntoPlace(t *testing.T) {
	t.Parallel()
	eachMode(t, func(t *testing.T, h *watchHarness) {
		tmp := filepath.Join(h.root, ".moved.ci8.part")
		writeFile(t, tmp, ci8Bytes(rand.New(rand.NewPCG(5, 6)), 64))
		h.none(400 * time.Millisecond) // dot-file: a writer's temporary
		if err := os.Rename(tmp, filepath.Join(h.root, "moved.ci8")); err != nil {
			t.Fatal(err)
		}
		checkOK(t, h.take(1, 10*time.Second)[0], "moved.ci8", 64)
		h.none(500 * time.Millisecond)
	})
}

func testMeta(start time.Time) *Meta {
	return &Meta{Global: Global{Datatype: "ci8", Version: SigMFVersion, SampleRate: 1e6},
		Captures: []CaptureSegment{{Frequency: 1575.42e6, HasFrequency: true, Datetime: start}}}
}

func TestWatchSigMFMetadataLast(t *testing.T) {
	t.Parallel()
	eachMode(t, func(t *testing.T, h *watchHarness) {
		base := filepath.Join(h.root, "pair")
		writeFile(t, base+DataExt, ci8Bytes(rand.New(rand.NewPCG(7, 8)), 500))
		// The data alone is not a capture yet, even when settled.
		h.none(600 * time.Millisecond)
		if err := WriteMeta(base+MetaExt, testMeta(time.Date(2026, 5, 1, 12, 0, 0, 0, time.UTC))); err != nil {
			t.Fatal(err)
		}
		wk := h.take(1, 10*time.Second)[0]
		checkOK(t, wk, "pair.sigmf-meta", 500)
		if wk.DataPath != base+DataExt {
			t.Errorf("data path %q, want %q", wk.DataPath, base+DataExt)
		}
		if got := wk.Files(); len(got) != 2 {
			t.Errorf("Files() = %v, want the metadata and data files", got)
		}
		h.none(500 * time.Millisecond)
	})
}

func TestWatchSubfolderCreatedLater(t *testing.T) {
	t.Parallel()
	// A nested folder made and filled at once: the file may land before a
	// watch on the new folders exists, so the new folder is scanned, and
	// completion then rests on the settle time (its events may be gone).
	eachModeSettle(t, 200*time.Millisecond, func(t *testing.T, h *watchHarness) {
		rng := rand.New(rand.NewPCG(9, 10))
		writeFile(t, filepath.Join(h.root, "2026", "05", "01", "a.ci8"), ci8Bytes(rng, 10))
		checkOK(t, h.take(1, 10*time.Second)[0], "2026/05/01/a.ci8", 10)
		// A file written later into the new folder is seen by its watch.
		writeFile(t, filepath.Join(h.root, "2026", "05", "01", "d.ci8"), ci8Bytes(rng, 13))
		checkOK(t, h.take(1, 10*time.Second)[0], "2026/05/01/d.ci8", 13)
	})
}

func TestWatchFolderMovedIn(t *testing.T) {
	t.Parallel()
	// A filled folder renamed into the tree puts its files in place (with
	// inotify, IN_MOVED_TO on the folder; the settle time is an hour).
	eachMode(t, func(t *testing.T, h *watchHarness) {
		rng := rand.New(rand.NewPCG(23, 24))
		outside := filepath.Join(t.TempDir(), "batch")
		writeFile(t, filepath.Join(outside, "b.ci8"), ci8Bytes(rng, 11))
		writeFile(t, filepath.Join(outside, "deeper", "c.ci8"), ci8Bytes(rng, 12))
		if err := os.Rename(outside, filepath.Join(h.root, "batch")); err != nil {
			t.Fatal(err)
		}
		got := h.take(2, 10*time.Second)
		slices.SortFunc(got, func(a, b Found) int { return strings.Compare(a.Name, b.Name) })
		checkOK(t, got[0], "batch/b.ci8", 11)
		checkOK(t, got[1], "batch/deeper/c.ci8", 12)
	})
}

func TestWatchSymlinks(t *testing.T) {
	t.Parallel()
	eachMode(t, func(t *testing.T, h *watchHarness) {
		rng := rand.New(rand.NewPCG(11, 12))
		outside := filepath.Join(t.TempDir(), "secret.ci8")
		writeFile(t, outside, ci8Bytes(rng, 20))
		inside := filepath.Join(h.root, "real.ci8")
		writeFile(t, inside, ci8Bytes(rng, 21))
		checkOK(t, h.take(1, 10*time.Second)[0], "real.ci8", 21)
		if err := os.Symlink(outside, filepath.Join(h.root, "escape.ci8")); err != nil {
			t.Fatal(err)
		}
		if err := os.Symlink(inside, filepath.Join(h.root, "alias.ci8")); err != nil {
			t.Fatal(err)
		}
		got := h.take(2, 10*time.Second)
		slices.SortFunc(got, func(a, b Found) int { return strings.Compare(a.Name, b.Name) })
		checkOK(t, got[0], "alias.ci8", 21) // a link within the root is followed
		esc := got[1]
		if esc.Name != "escape.ci8" || esc.Problem == nil || !strings.Contains(esc.Problem.Error(), "outside") {
			t.Fatalf("link out of the root: item %q problem %v, want a refusal naming it outside", esc.Name, esc.Problem)
		}
		if esc.Capture != nil {
			t.Error("refused link was opened")
		}
	})
}

func TestWatchDotfilesIgnored(t *testing.T) {
	t.Parallel()
	eachMode(t, func(t *testing.T, h *watchHarness) {
		rng := rand.New(rand.NewPCG(13, 14))
		writeFile(t, filepath.Join(h.root, ".hidden.ci8"), ci8Bytes(rng, 5))
		writeFile(t, filepath.Join(h.root, ".partial", "x.ci8"), ci8Bytes(rng, 5))
		writeFile(t, filepath.Join(h.root, "sub", ".y.ci8.tmp"), ci8Bytes(rng, 5))
		writeFile(t, filepath.Join(h.root, "notes.txt"), []byte("not a capture"))
		writeFile(t, filepath.Join(h.root, "visible.ci8"), ci8Bytes(rng, 6))
		checkOK(t, h.take(1, 10*time.Second)[0], "visible.ci8", 6)
		h.w.Rescan()
		h.none(500 * time.Millisecond)
	})
}

func TestWatchRescanFindsMissed(t *testing.T) {
	t.Parallel()
	t.Run("start", func(t *testing.T) {
		t.Parallel()
		rng := rand.New(rand.NewPCG(15, 16))
		// A file already there when the watcher starts, unchanged for
		// longer than the settle time: found by the start scan alone (no
		// events, no periodic rescan).
		root := t.TempDir()
		path := filepath.Join(root, "old", "early.ci8")
		writeFile(t, path, ci8Bytes(rng, 7))
		past := time.Now().Add(-2 * time.Hour)
		os.Chtimes(path, past, past)
		h := startWatcher(t, WatchConfig{RescanInterval: -1,
			Inputs: []WatchInput{{Name: "site", Root: root, Raw: testRaw, Settle: time.Hour}}})
		checkOK(t, h.take(1, 10*time.Second)[0], "old/early.ci8", 7)
	})
	t.Run("overflow", func(t *testing.T) {
		t.Parallel()
		rng := rand.New(rand.NewPCG(15, 16))
		h := startMode(t, NotifyInotify, 200*time.Millisecond, -1)
		h.w.lose.Store(true)
		writeFile(t, filepath.Join(h.root, "lost.ci8"), ci8Bytes(rng, 8))
		h.none(500 * time.Millisecond) // its events were lost and there is no periodic rescan
		h.w.inject <- fsEvent{op: opOverflow}
		checkOK(t, h.take(1, 10*time.Second)[0], "lost.ci8", 8)
		if s := h.w.Stats(); s.Overflows != 1 || s.Rescans < 2 {
			t.Errorf("stats %+v, want 1 overflow and a rescan after it", s)
		}
	})
	t.Run("periodic", func(t *testing.T) {
		t.Parallel()
		rng := rand.New(rand.NewPCG(15, 16))
		root := t.TempDir()
		h := startWatcher(t, WatchConfig{Notify: NotifyInotify, RescanInterval: 200 * time.Millisecond,
			Inputs: []WatchInput{{Name: "site", Root: root, Raw: testRaw, Settle: 200 * time.Millisecond}}})
		h.w.lose.Store(true)
		writeFile(t, filepath.Join(h.root, "missed.ci8"), ci8Bytes(rng, 9))
		checkOK(t, h.take(1, 10*time.Second)[0], "missed.ci8", 9)
	})
}

func TestWatchQueueFullKeepsOrder(t *testing.T) {
	t.Parallel()
	// Thirty captures already on disk, a queue of two and nobody reading:
	// the watcher must hold the rest back in order, not drop them, and hand
	// them out by start time (raw files start at mtime − duration).
	root := t.TempDir()
	rng := rand.New(rand.NewPCG(17, 18))
	const n = 30
	t0 := time.Date(2026, 5, 1, 8, 0, 0, 0, time.UTC)
	for i := range n {
		path := filepath.Join(root, fmt.Sprintf("c%02d.ci8", i))
		writeFile(t, path, ci8Bytes(rng, 50))
		// Names ascend while start times descend.
		mt := t0.Add(time.Duration(n-i) * time.Minute)
		os.Chtimes(path, mt, mt)
	}
	h := startWatcher(t, WatchConfig{RescanInterval: 100 * time.Millisecond, QueueSize: 2,
		Inputs: []WatchInput{{Name: "site", Root: root, Raw: testRaw, Settle: 100 * time.Millisecond}}})
	deadline := time.Now().Add(10 * time.Second)
	for h.w.Stats().Backlog < n {
		if time.Now().After(deadline) {
			t.Fatalf("backlog %d, want %d", h.w.Stats().Backlog, n)
		}
		time.Sleep(20 * time.Millisecond)
	}
	time.Sleep(300 * time.Millisecond) // rescans while full add nothing
	if b := h.w.Stats().Backlog; b != n {
		t.Fatalf("backlog %d after rescans, want %d", b, n)
	}
	got := h.take(n, 10*time.Second)
	for i, wk := range got {
		want := fmt.Sprintf("c%02d.ci8", n-1-i)
		if wk.Name != want {
			t.Fatalf("item %d is %s, want %s (start-time order)", i, wk.Name, want)
		}
	}
	h.none(300 * time.Millisecond)
	if b := h.w.Stats().Backlog; b != 0 {
		t.Errorf("backlog %d after draining, want 0", b)
	}
}

func TestWatchChangedFileAgain(t *testing.T) {
	t.Parallel()
	// A capture re-recorded under the same name is handed out again.
	eachMode(t, func(t *testing.T, h *watchHarness) {
		rng := rand.New(rand.NewPCG(19, 20))
		path := filepath.Join(h.root, "again.ci8")
		writeFile(t, path, ci8Bytes(rng, 30))
		checkOK(t, h.take(1, 10*time.Second)[0], "again.ci8", 30)
		writeFile(t, path, ci8Bytes(rng, 31))
		checkOK(t, h.take(1, 10*time.Second)[0], "again.ci8", 31)
	})
}

// TestWatchChangedWhileWaiting: a capture is opened once, when found
// complete, and handed out opened; one whose file changes while it waits
// behind a full queue is opened again before it is handed out (its
// Capture describes the file as it is then), and handed out once more for
// the change.
func TestWatchChangedWhileWaiting(t *testing.T) {
	t.Parallel()
	root := t.TempDir()
	rng := rand.New(rand.NewPCG(23, 24))
	t0 := time.Date(2026, 5, 1, 8, 0, 0, 0, time.UTC)
	for i, name := range []string{"a.ci8", "b.ci8", "c.ci8"} {
		path := filepath.Join(root, name)
		writeFile(t, path, ci8Bytes(rng, 40))
		mt := t0.Add(time.Duration(i) * time.Minute)
		os.Chtimes(path, mt, mt)
	}
	h := startWatcher(t, WatchConfig{Notify: NotifyPoll, RescanInterval: 50 * time.Millisecond, QueueSize: 1,
		Inputs: []WatchInput{{Name: "site", Root: root, Raw: testRaw, Settle: 100 * time.Millisecond}}})
	deadline := time.Now().Add(10 * time.Second)
	for h.w.Stats().Backlog < 3 {
		if time.Now().After(deadline) {
			t.Fatalf("backlog %d, want 3", h.w.Stats().Backlog)
		}
		time.Sleep(10 * time.Millisecond)
	}
	// a is in the queue, b next; c waits, opened with 40 samples.
	writeFile(t, filepath.Join(root, "c.ci8"), ci8Bytes(rng, 60))
	got := h.take(4, 10*time.Second)
	for i, want := range []struct {
		name    string
		samples int64
	}{{"a.ci8", 40}, {"b.ci8", 40}, {"c.ci8", 60}, {"c.ci8", 60}} {
		checkOK(t, got[i], want.name, want.samples)
	}
	h.none(300 * time.Millisecond)
}

func TestWatchIncompletePairs(t *testing.T) {
	t.Parallel()
	root := t.TempDir()
	h := startWatcher(t, WatchConfig{Notify: NotifyInotify, RescanInterval: -1, OrphanAfter: 400 * time.Millisecond,
		Inputs: []WatchInput{{Name: "site", Root: root, Raw: testRaw, Settle: 200 * time.Millisecond}}})
	rng := rand.New(rand.NewPCG(21, 22))
	// Metadata without data, and data without metadata: half pairs, each
	// a problem wrapping ErrHalfPair once it has waited OrphanAfter (the
	// input's MetadataWait), not before (issue 17, item 2).
	t0 := time.Now()
	if err := WriteMeta(filepath.Join(root, "nodata"+MetaExt), testMeta(time.Time{})); err != nil {
		t.Fatal(err)
	}
	wk := h.take(1, 10*time.Second)[0]
	if wk.Name != "nodata.sigmf-meta" || !errors.Is(wk.Problem, ErrHalfPair) || !strings.Contains(wk.Problem.Error(), "without its data file") {
		t.Errorf("metadata alone: %s problem %v, want a half-pair problem", wk.Name, wk.Problem)
	}
	if d := time.Since(t0); d < 400*time.Millisecond {
		t.Errorf("metadata alone handed out after %v, before OrphanAfter (400ms)", d)
	}
	t0 = time.Now()
	writeFile(t, filepath.Join(root, "nometa"+DataExt), ci8Bytes(rng, 10))
	wk = h.take(1, 10*time.Second)[0]
	if wk.Name != "nometa.sigmf-data" || !errors.Is(wk.Problem, ErrHalfPair) || !strings.Contains(wk.Problem.Error(), "without its metadata") {
		t.Errorf("data alone: %s problem %v, want a half-pair problem", wk.Name, wk.Problem)
	}
	if d := time.Since(t0); d < 400*time.Millisecond {
		t.Errorf("data alone handed out after %v, before OrphanAfter (400ms)", d)
	}
	// Its metadata arrives late: now it is a capture.
	if err := WriteMeta(filepath.Join(root, "nometa"+MetaExt), testMeta(time.Time{})); err != nil {
		t.Fatal(err)
	}
	checkOK(t, h.take(1, 10*time.Second)[0], "nometa.sigmf-meta", 10)
}

func TestNewWatcherChecks(t *testing.T) {
	t.Parallel()
	a := t.TempDir()
	b := filepath.Join(a, "inner")
	os.Mkdir(b, 0o755)
	file := filepath.Join(a, "f.ci8")
	writeFile(t, file, []byte{1, 2})
	cases := []struct {
		name string
		cfg  WatchConfig
		want string
	}{
		{"none", WatchConfig{}, "no folders"},
		{"nested", WatchConfig{Inputs: []WatchInput{{Name: "a", Root: a}, {Name: "b", Root: b}}}, "inside one another"},
		{"same name", WatchConfig{Inputs: []WatchInput{{Name: "a", Root: a}, {Name: "a", Root: t.TempDir()}}}, "used twice"},
		{"unnamed", WatchConfig{Inputs: []WatchInput{{Root: a}}}, "no name"},
		{"missing", WatchConfig{Inputs: []WatchInput{{Name: "a", Root: filepath.Join(a, "nope")}}}, "no such file"},
		{"file", WatchConfig{Inputs: []WatchInput{{Name: "a", Root: file}}}, "not a folder"},
		{"notify", WatchConfig{Notify: "carrier-pigeon", Inputs: []WatchInput{{Name: "a", Root: a}}}, "carrier-pigeon"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := NewWatcher(c.cfg)
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("error %v, want one containing %q", err, c.want)
			}
		})
	}
}

// BenchmarkWatchRescan measures the periodic safety-net rescan of a tree of
// 2000 captures already handed out (the steady state: nothing new).
func BenchmarkWatchRescan(b *testing.B) {
	root := b.TempDir()
	rng := rand.New(rand.NewPCG(25, 26))
	data := ci8Bytes(rng, 16)
	past := time.Now().Add(-time.Hour)
	for i := range 2000 {
		p := filepath.Join(root, fmt.Sprintf("d%02d", i%20), fmt.Sprintf("c%04d.ci8", i))
		os.MkdirAll(filepath.Dir(p), 0o755)
		os.WriteFile(p, data, 0o644)
		os.Chtimes(p, past, past)
	}
	w, err := NewWatcher(WatchConfig{Notify: NotifyPoll, QueueSize: 4096,
		Inputs: []WatchInput{{Name: "site", Root: root, Raw: testRaw}}})
	if err != nil {
		b.Fatal(err)
	}
	w.pending, w.emitted = map[string]*candidate{}, map[string]signature{}
	w.rescanAll("start")
	if len(w.ready) != 2000 {
		b.Fatalf("%d ready after the first scan, want 2000", len(w.ready))
	}
	for b.Loop() {
		w.rescanAll("periodic")
	}
	if len(w.ready) != 2000 {
		b.Fatalf("%d ready after rescans, want still 2000", len(w.ready))
	}
}

// TestWatchRawFiles checks DESIGN.md "Inputs" for raw files: any name is
// a raw capture once the input gives a format and a pattern matching it;
// a capture that cannot be read (no format, no rate) is handed out with
// its problem, naming the setting, not passed over; sidecars and other
// files are never taken, and a file with a raw-data ending that no pattern
// takes is warned about, once.
func TestWatchRawFiles(t *testing.T) {
	t.Parallel()
	var wg sync.WaitGroup
	for _, m := range watchModes {
		wg.Go(func() {
			t.Run(m.notify, func(t *testing.T) {
				rootA, rootB, rootC := t.TempDir(), t.TempDir(), t.TempDir()
				var logBuf syncBuf
				h := startWatcher(t, WatchConfig{Notify: m.notify, RescanInterval: m.rescan, Logger: slog.New(slog.NewTextHandler(&logBuf, nil)),
					Inputs: []WatchInput{
						{Name: "a", Root: rootA, Settle: m.settle, Raw: RawSettings{Format: CI8, SampleRate: 1e6, Pattern: "cap_*"}},
						{Name: "b", Root: rootB, Settle: m.settle, Raw: RawSettings{Format: CI8, Pattern: "*.dat"}},
						{Name: "c", Root: rootC, Settle: m.settle, Raw: RawSettings{SampleRate: 1e6, Pattern: "*.bin"}},
					}})
				rng := rand.New(rand.NewPCG(51, 52))
				writeFile(t, filepath.Join(rootA, "cap_0001"), ci8Bytes(rng, 7))
				writeFile(t, filepath.Join(rootA, "x.ci8"), ci8Bytes(rng, 8))
				writeFile(t, filepath.Join(rootA, "left.bin"), ci8Bytes(rng, 8))
				writeFile(t, filepath.Join(rootA, "cap_0001.truth.json"), []byte("{}"))
				writeFile(t, filepath.Join(rootA, "cap_notes.txt"), []byte("notes"))
				writeFile(t, filepath.Join(rootA, "other"), ci8Bytes(rng, 3))
				writeFile(t, filepath.Join(rootB, "y.dat"), ci8Bytes(rng, 4))
				writeFile(t, filepath.Join(rootC, "z.bin"), ci8Bytes(rng, 4))
				got := map[string]Found{}
				for _, wk := range h.take(4, 10*time.Second) {
					got[wk.Input+"/"+wk.Name] = wk
				}
				for name, n := range map[string]int64{"a/cap_0001": 7, "a/x.ci8": 8} {
					if wk, ok := got[name]; !ok || wk.Problem != nil || wk.Capture.Samples != n || wk.Capture.Format != CI8 {
						t.Errorf("%s: %+v", name, wk)
					}
				}
				for name, want := range map[string][]string{"b/y.dat": {"y.dat", "no sample rate", "sample_rate"},
					"c/z.bin": {"z.bin", "no sample format", "format"}} {
					wk, ok := got[name]
					if !ok || wk.Problem == nil {
						t.Errorf("%s: handed out %v without its problem", name, ok)
						continue
					}
					for _, w := range want {
						if !strings.Contains(wk.Problem.Error(), w) {
							t.Errorf("%s: problem %q does not say %q", name, wk.Problem, w)
						}
					}
				}
				h.w.Rescan()
				h.none(500 * time.Millisecond)
				if n := strings.Count(logBuf.String(), "file not taken"); n != 1 || !strings.Contains(logBuf.String(), "left.bin") {
					t.Errorf("%d warnings about left.bin, want 1:\n%s", n, logBuf.String())
				}
			})
		})
	}
	wg.Wait()
}

// syncBuf is a bytes.Buffer safe for the watcher's goroutine and the test.
type syncBuf struct {
	mu sync.Mutex
	b  strings.Builder
}

func (s *syncBuf) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuf) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// TestWatchRetiredDuringRescan: a capture deleted while a rescan lists
// its folder (a retention sweep, an operator's clean-up) is nothing to
// report. A retired pair's metadata goes first, so a listing can see its
// data file alone; once that file is gone too, handing it out as "data
// without metadata" would quarantine a capture that was analysed and
// retired (a race seen in the daemon's retention test, issue 17).
func TestWatchRetiredDuringRescan(t *testing.T) {
	t.Parallel()
	rng := rand.New(rand.NewPCG(17, 18))
	root := t.TempDir()
	data := filepath.Join(root, "d", "pair.sigmf-data")
	writeFile(t, data, ci8Bytes(rng, 16))
	past := time.Now().Add(-72 * time.Hour)
	os.Chtimes(data, past, past)
	w, err := NewWatcher(WatchConfig{Notify: NotifyInotify, RescanInterval: -1,
		Inputs: []WatchInput{{Name: "site", Root: root, Raw: testRaw, Settle: time.Hour}}})
	if err != nil {
		t.Fatal(err)
	}
	// The start scan lists the half pair; it is deleted before the scan
	// looks at it.
	w.listed = func() { os.Remove(data) }
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- w.Run(ctx) }()
	defer func() {
		cancel()
		if err := <-done; err != nil {
			t.Errorf("Run: %v", err)
		}
	}()
	select {
	case wk := <-w.Work():
		t.Errorf("%s handed out after it was deleted (problem %v)", wk.Name, wk.Problem)
	case <-time.After(700 * time.Millisecond):
	}
}
