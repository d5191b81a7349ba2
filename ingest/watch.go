package ingest

import (
	"cmp"
	"context"
	"errors"
	"fmt"
	"io/fs"
	"log/slog"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"time"

	"github.com/fsnotify/fsnotify"
)

// Defaults of WatchConfig and WatchInput.
const (
	DefaultSettle         = 2 * time.Second
	DefaultRescanInterval = 60 * time.Second
	DefaultQueueSize      = 64
	DefaultOrphanAfter    = 60 * time.Second
)

// Ways a Watcher learns about changes (WatchConfig.Notify).
const (
	NotifyAuto     = ""         // inotify on Linux, fsnotify elsewhere
	NotifyInotify  = "inotify"  // Linux inotify: close-after-write and rename events
	NotifyFsnotify = "fsnotify" // portable events; completion by settle time only
	NotifyPoll     = "poll"     // no events, rescans only (network file systems)
)

// ErrHalfPair is wrapped by the problem of a capture found as half of a
// SigMF pair that waited its input's MetadataWait for the other half.
// Such a capture is incomplete, not bad: it is not to be moved away, and
// it is found again, whole, when the other half arrives.
var ErrHalfPair = errors.New("half of a SigMF pair")

// halfPairError is a half pair's problem: its message, and ErrHalfPair.
type halfPairError struct{ msg string }

func (e *halfPairError) Error() string        { return e.msg }
func (e *halfPairError) Is(target error) bool { return target == ErrHalfPair }

// WatchInput is one watched folder and what its raw files cannot say.
type WatchInput struct {
	Name string // the input's name, carried into every capture found
	Root string // the folder, watched recursively
	// Raw are the format, rate, centre, IF and LO side of raw files, and
	// their name pattern: a file matching it (or with a format ending, or
	// a common raw-data ending) is a capture, and one that cannot be read
	// is handed out with its problem, never passed over.
	Raw RawSettings
	// Settle is how long a file's size and modification time must stay
	// unchanged before it counts as complete when no rename event says
	// so; after a close-after-write event, min(Settle, DefaultSettle)
	// (a recorder may append in several open–append–close rounds).
	// 0: DefaultSettle.
	Settle time.Duration
	// MetadataWait is how long half of a SigMF pair (data without its
	// metadata, or metadata without its data) waits for the other half
	// before it is handed out with a problem wrapping ErrHalfPair.
	// 0: WatchConfig.OrphanAfter.
	MetadataWait time.Duration
}

// WatchConfig configures a Watcher.
type WatchConfig struct {
	Inputs []WatchInput
	// RescanInterval is the period of the full rescan that catches
	// anything the events missed. 0: DefaultRescanInterval; negative: only
	// at start and after an event overflow.
	RescanInterval time.Duration
	// QueueSize bounds the channel of captures found. 0: DefaultQueueSize.
	QueueSize int
	// Notify selects the event source (NotifyAuto, NotifyInotify,
	// NotifyFsnotify or NotifyPoll).
	Notify string
	// OrphanAfter is how long a complete SigMF data file may wait for its
	// metadata before it is reported as a problem. 0: DefaultOrphanAfter.
	OrphanAfter time.Duration
	// Logger receives diagnostics; nil discards them.
	Logger *slog.Logger
}

// WatchStats are counters of a Watcher.
type WatchStats struct {
	Backlog   int    // captures found complete and not yet taken
	Pending   int    // files seen but not yet complete
	Rescans   uint64 // full rescans done
	Overflows uint64 // event overflows (events lost, rescan forced)
	Notify    string // event source in use
}

// Watcher watches folders recursively and hands out each capture once it is
// complete, opened (Found.Capture) or with its problem, in time order
// within a batch, on a bounded channel.
//
// A file is complete when a rename-into-place event says so (inotify), when
// it was closed after writing (inotify) and has not changed since for the
// settle time or DefaultSettle, whichever is shorter (a close alone is not
// enough: a recorder may open, append and close again each second), or
// when its size and modification time have not changed for the input's
// settle time. A SigMF pair is complete when both files are;
// by convention the data file is written first and the metadata renamed
// into place last, so the metadata is the trigger. Files and folders whose
// name starts with '.' are ignored (writers' temporary files), and symbolic
// links leaving the root are refused, as in Find. Every folder is rescanned
// in full on start, after an event overflow and every RescanInterval.
//
// When the channel is full the Watcher keeps the items in order and offers
// them again; nothing is dropped. A capture whose files change after it was
// handed out is handed out again.
type Watcher struct {
	// unwatchable are the folders reported as beyond the system's path
	// length limit (each once).
	unwatchable map[string]bool
	cfg         WatchConfig
	log         *slog.Logger
	inputs      []*watchInput
	queue       chan Found
	tick        time.Duration

	rescanReq chan struct{}
	inject    chan fsEvent // tests: synthetic events
	lose      atomic.Bool  // tests: lose the real events, as an overflow does
	listed    func()       // tests: called between a scan's listing and its checks

	// Owned by Run.
	note    notifier
	pending map[string]*candidate
	ready   []readyItem
	head    *Found // ready[0], ready to hand out
	emitted map[string]signature
	ignored map[string]bool // files with raw-data endings warned about (noteIgnored)
	full    bool
	fullLog time.Time

	running   atomic.Bool
	backlog   atomic.Int64
	npending  atomic.Int64
	rescans   atomic.Uint64
	overflows atomic.Uint64
	notify    atomic.Value // string
}

type watchInput struct {
	WatchInput
	abs string // absolute, cleaned root
}

// NewWatcher checks the configuration. The folders must exist and must not
// lie inside one another.
func NewWatcher(cfg WatchConfig) (*Watcher, error) {
	if len(cfg.Inputs) == 0 {
		return nil, errors.New("ingest: watcher: no folders to watch")
	}
	switch cfg.Notify {
	case NotifyAuto, NotifyInotify, NotifyFsnotify, NotifyPoll:
	default:
		return nil, fmt.Errorf("ingest: watcher: notify %q: use %q, %q or %q (or empty for automatic)", cfg.Notify, NotifyInotify, NotifyFsnotify, NotifyPoll)
	}
	if cfg.Notify == NotifyInotify && newInotify == nil {
		return nil, errors.New("ingest: watcher: inotify is only available on Linux")
	}
	if cfg.RescanInterval == 0 {
		cfg.RescanInterval = DefaultRescanInterval
	}
	if cfg.QueueSize <= 0 {
		cfg.QueueSize = DefaultQueueSize
	}
	if cfg.OrphanAfter <= 0 {
		cfg.OrphanAfter = DefaultOrphanAfter
	}
	w := &Watcher{cfg: cfg, log: cfg.Logger, queue: make(chan Found, cfg.QueueSize),
		rescanReq: make(chan struct{}, 1), inject: make(chan fsEvent, 16)}
	if w.log == nil {
		w.log = slog.New(slog.DiscardHandler)
	}
	minSettle := time.Duration(1<<63 - 1)
	names := map[string]bool{}
	for i, in := range cfg.Inputs {
		if in.Settle <= 0 {
			in.Settle = DefaultSettle
		}
		if in.MetadataWait <= 0 {
			in.MetadataWait = cfg.OrphanAfter
		}
		if in.Name == "" {
			return nil, fmt.Errorf("ingest: watcher: input %d (%s) has no name", i, in.Root)
		}
		if names[in.Name] {
			return nil, fmt.Errorf("ingest: watcher: input name %q used twice", in.Name)
		}
		names[in.Name] = true
		abs, err := filepath.Abs(in.Root)
		if err != nil {
			return nil, fmt.Errorf("ingest: watcher: input %s: %w", in.Name, err)
		}
		st, err := os.Stat(abs)
		if err != nil {
			return nil, fmt.Errorf("ingest: watcher: input %s: %w", in.Name, err)
		}
		if !st.IsDir() {
			return nil, fmt.Errorf("ingest: watcher: input %s: %s is not a folder", in.Name, in.Root)
		}
		for _, o := range w.inputs {
			if within(o.abs, abs) || within(abs, o.abs) {
				return nil, fmt.Errorf("ingest: watcher: folders of inputs %s (%s) and %s (%s) lie inside one another", o.Name, o.Root, in.Name, in.Root)
			}
		}
		w.inputs = append(w.inputs, &watchInput{WatchInput: in, abs: abs})
		minSettle = min(minSettle, in.Settle)
	}
	w.tick = min(max(minSettle/4, 10*time.Millisecond), 500*time.Millisecond)
	w.notify.Store("")
	return w, nil
}

// within reports whether path is dir or lies inside it (both cleaned).
func within(dir, path string) bool {
	rel, err := filepath.Rel(dir, path)
	return err == nil && rel != ".." && !strings.HasPrefix(rel, ".."+string(filepath.Separator))
}

// Work returns the channel of the captures found complete (and of files
// that look like captures but cannot be one: Problem set). It is never
// closed.
func (w *Watcher) Work() <-chan Found { return w.queue }

// Running reports whether Run is watching.
func (w *Watcher) Running() bool { return w.running.Load() }

// Rescan asks Run for a full rescan of every folder.
func (w *Watcher) Rescan() {
	select {
	case w.rescanReq <- struct{}{}:
	default:
	}
}

// Stats returns the Watcher's counters; safe to call while Run runs.
func (w *Watcher) Stats() WatchStats {
	return WatchStats{Backlog: int(w.backlog.Load()) + len(w.queue), Pending: int(w.npending.Load()),
		Rescans: w.rescans.Load(), Overflows: w.overflows.Load(), Notify: w.notify.Load().(string)}
}

// Run watches until ctx is done. Failing to set up events is not fatal:
// the Watcher logs it and goes on with rescans only.
func (w *Watcher) Run(ctx context.Context) error {
	w.pending = map[string]*candidate{}
	w.emitted = map[string]signature{}
	mode := w.cfg.Notify
	if mode == NotifyAuto {
		mode = NotifyFsnotify
		if newInotify != nil {
			mode = NotifyInotify
		}
	}
	var err error
	switch mode {
	case NotifyInotify:
		w.note, err = newInotify(w.log)
	case NotifyFsnotify:
		w.note, err = newFsnotify(w.log)
	}
	if err != nil {
		w.log.Error("watcher: no file events, rescans only", "notify", mode, "err", err)
		mode, w.note = NotifyPoll, nil
	}
	w.notify.Store(mode)
	var events <-chan fsEvent
	if w.note != nil {
		defer w.note.close()
		events = w.note.events()
	}
	w.rescanAll("start")
	w.running.Store(true)
	defer w.running.Store(false)

	ticker := time.NewTicker(w.tick)
	defer ticker.Stop()
	var rescan <-chan time.Time
	if w.cfg.RescanInterval > 0 {
		t := time.NewTicker(w.cfg.RescanInterval)
		defer t.Stop()
		rescan = t.C
	}
	for {
		var out chan<- Found
		var next Found
		if w.prepareHead() {
			out, next = w.queue, *w.head
		}
		select {
		case <-ctx.Done():
			return nil
		case ev := <-events:
			if !w.lose.Load() {
				w.handle(ev)
			}
		case ev := <-w.inject:
			w.handle(ev)
		case out <- next:
			w.head = nil
			w.ready[0] = readyItem{}
			w.ready = w.ready[1:]
			w.backlog.Store(int64(len(w.ready)))
		case now := <-ticker.C:
			w.check(now)
			w.reportFull(now)
		case <-rescan:
			w.rescanAll("periodic")
		case <-w.rescanReq:
			w.rescanAll("requested")
		}
	}
}

// reportFull logs once when the queue fills up (and every minute while
// it stays full), and once when it drains.
func (w *Watcher) reportFull(now time.Time) {
	waiting := len(w.ready)
	full := waiting > 0 && len(w.queue) == cap(w.queue)
	switch {
	case full && (!w.full || now.Sub(w.fullLog) >= time.Minute):
		w.log.Warn("watcher: analysis queue full; captures wait in order, none dropped",
			"waiting", waiting+len(w.queue), "queue_size", cap(w.queue))
		w.full, w.fullLog = true, now
	case waiting == 0 && w.full:
		w.log.Info("watcher: analysis queue has room again", "queued", len(w.queue))
		w.full = false
	}
}

// fsOp is what happened to a path.
type fsOp uint8

const (
	opWritten  fsOp = iota + 1 // a file was created or written: not complete yet
	opComplete                 // renamed into place
	opClosed                   // closed after writing: complete once unchanged for closedQuiet (a recorder may append in rounds)
	opGone                     // a file was deleted or moved away
	opDir                      // a folder was made: watch and scan it
	opDirMoved                 // a folder was moved in: its files are in place
	opDirGone                  // a folder went away
	opOverflow                 // events were lost: rescan everything
)

type fsEvent struct {
	path string
	op   fsOp
}

// notifier is an event source.
type notifier interface {
	add(dir string) error
	removeTree(dir string)
	events() <-chan fsEvent
	close() error
}

// newInotify is set on Linux (watch_linux.go).
var newInotify func(*slog.Logger) (notifier, error)

// fileState is what the Watcher knows about one file of a candidate.
type fileState struct {
	path        string
	exists      bool
	link        bool
	size        int64
	mtime       time.Time
	ino         uint64
	stableSince time.Time // since when size and mtime are unchanged
	closed      bool      // complete by event since the last change
	// closedWrite: closed after writing since the last change; complete
	// once unchanged for closedQuiet(settle) (issue 17, item 4).
	closedWrite bool
}

// closedQuiet is how long a file closed after writing must stay unchanged
// to be complete: the settle time, at most DefaultSettle. A recorder that
// opens, appends and closes its file each round (each second, say) closes
// it many times; a quiet period longer than its rounds sees it whole.
func closedQuiet(settle time.Duration) time.Duration { return min(settle, DefaultSettle) }

func (f *fileState) complete(now time.Time, settle time.Duration) bool {
	quiet := now.Sub(f.stableSince)
	return f.exists && (f.closed || (f.closedWrite && quiet >= closedQuiet(settle)) || quiet >= settle)
}

// observe stats the file and records a change. It reports whether the
// file changed since the last observation.
func (f *fileState) observe(now time.Time) bool {
	st, err := os.Lstat(f.path)
	if err != nil {
		changed := f.exists
		*f = fileState{path: f.path}
		return changed
	}
	f.link = st.Mode()&fs.ModeSymlink != 0
	if f.link {
		if t, err := os.Stat(f.path); err == nil {
			st = t
		}
	}
	ino := inode(st)
	if f.exists && st.Size() == f.size && st.ModTime().Equal(f.mtime) && ino == f.ino {
		return false
	}
	first := !f.exists
	f.exists, f.size, f.mtime, f.ino = true, st.Size(), st.ModTime(), ino
	f.closed = f.link // making a link is atomic: in place once it exists
	f.closedWrite = false
	f.stableSince = now
	if first && st.ModTime().Before(now) {
		// Unchanged since its modification time.
		f.stableSince = st.ModTime()
	}
	return true
}

// inode is the file's inode number where the system has one (set on
// Linux), so that a file replaced by another of the same size and
// modification time still counts as changed.
var inode = func(fs.FileInfo) uint64 { return 0 }

// signature identifies the state of a capture's files when handed out.
type signature [2]struct {
	size  int64
	mtime int64
	ino   uint64
	ok    bool
}

// candidate is a capture seen but not yet handed out.
type candidate struct {
	in         *watchInput
	key        string       // metadata path of a SigMF pair, or the raw file
	files      [2]fileState // key file; data file of a SigMF pair
	n          int          // files in use (1 raw, 2 SigMF)
	completeAt time.Time    // when the existing files were first all complete
}

func (c *candidate) sig() signature {
	var s signature
	for i := 0; i < c.n; i++ {
		f := c.files[i]
		if f.exists {
			s[i].size, s[i].mtime, s[i].ino, s[i].ok = f.size, f.mtime.UnixNano(), f.ino, true
		}
	}
	return s
}

// readyItem is a capture in waiting, opened when it was found complete
// (for its start time, by which the batch is sorted, and for analysis),
// with its files' signature then.
type readyItem struct {
	work  Found
	start time.Time
	sig   signature
}

// keyOf maps a capture file to its candidate key and whether it is a
// SigMF pair.
func keyOf(path string) (string, bool) {
	ext := strings.ToLower(filepath.Ext(path))
	if ext == MetaExt || ext == DataExt {
		return strings.TrimSuffix(path, filepath.Ext(path)) + MetaExt, true
	}
	return path, false
}

// inputOf returns the input whose folder holds path, and whether path is
// to be ignored (outside every input, or under a dot-name).
func (w *Watcher) inputOf(path string) (*watchInput, bool) {
	for _, in := range w.inputs {
		if !within(in.abs, path) {
			continue
		}
		rel, _ := filepath.Rel(in.abs, path)
		if rel == "." {
			return in, false
		}
		for _, part := range strings.Split(rel, string(filepath.Separator)) {
			if strings.HasPrefix(part, ".") {
				return in, true
			}
		}
		return in, false
	}
	return nil, true
}

func (w *Watcher) candidateFor(in *watchInput, path string) *candidate {
	key, sigmf := keyOf(path)
	c := w.pending[key]
	if c == nil {
		c = &candidate{in: in, key: key, n: 1}
		c.files[0].path = key
		if sigmf {
			c.n = 2
			c.files[1].path = strings.TrimSuffix(key, filepath.Ext(key)) + DataExt
		}
		w.pending[key] = c
		w.npending.Store(int64(len(w.pending)))
	}
	return c
}

func (w *Watcher) handle(ev fsEvent) {
	if ev.op == opOverflow {
		w.overflows.Add(1)
		w.log.Warn("watcher: file events were lost (queue overflow); rescanning")
		w.rescanAll("overflow")
		return
	}
	in, ignore := w.inputOf(ev.path)
	if ignore {
		return
	}
	switch ev.op {
	case opDir, opDirMoved:
		w.addTree(in, ev.path)
		w.scan(in, ev.path, false, ev.op == opDirMoved)
		return
	case opDirGone:
		if w.note != nil {
			w.note.removeTree(ev.path)
		}
		return
	}
	if !in.Raw.IsCapture(ev.path) {
		if ev.op != opGone {
			w.noteIgnored(in, ev.path)
		}
		return
	}
	c := w.candidateFor(in, ev.path)
	now := time.Now()
	for i := 0; i < c.n; i++ {
		f := &c.files[i]
		if f.path != ev.path {
			continue
		}
		f.observe(now)
		switch {
		case f.link:
			// Making a link is atomic: it is in place once it exists.
			f.closed = f.exists
		case ev.op == opComplete:
			f.closed = f.exists
		case ev.op == opClosed:
			// Complete once unchanged for closedQuiet since the last
			// change (observe set stableSince).
			f.closed = false
			f.closedWrite = f.exists
		case ev.op == opWritten:
			// Being written: wait for the close, or a settle time from now.
			f.closed = false
			f.stableSince = now
		}
	}
	if ev.op == opGone && !c.files[0].exists && (c.n == 1 || !c.files[1].exists) {
		delete(w.pending, c.key)
		delete(w.emitted, c.key)
		w.npending.Store(int64(len(w.pending)))
	}
}

// check hands out the candidates that are complete, sorted by start time
// then name.
func (w *Watcher) check(now time.Time) {
	var batch []readyItem
	for key, c := range w.pending {
		item, done := w.evaluate(c, now)
		if !done {
			continue
		}
		delete(w.pending, key)
		if item == nil {
			continue
		}
		sig := c.sig()
		if old, ok := w.emitted[key]; ok && old == sig {
			continue // handed out already, unchanged
		}
		w.emitted[key] = sig
		batch = append(batch, *item)
	}
	w.npending.Store(int64(len(w.pending)))
	if len(batch) == 0 {
		return
	}
	slices.SortFunc(batch, func(a, b readyItem) int {
		if c := a.start.Compare(b.start); c != 0 {
			return c
		}
		return cmp.Compare(a.work.Name, b.work.Name)
	})
	w.ready = append(w.ready, batch...)
	w.backlog.Store(int64(len(w.ready)))
}

// evaluate decides about a candidate: done reports that it leaves the
// pending set, with the item to hand out (nil: nothing, the files are
// gone).
func (w *Watcher) evaluate(c *candidate, now time.Time) (item *readyItem, done bool) {
	for i := 0; i < c.n; i++ {
		c.files[i].observe(now)
	}
	meta, data := &c.files[0], &c.files[0]
	if c.n == 2 {
		data = &c.files[1]
	}
	if !meta.exists && !data.exists {
		return nil, true
	}
	for i := 0; i < c.n; i++ {
		if f := c.files[i]; f.exists && f.link {
			if problem := checkLink(c.in.abs, f.path); problem != nil {
				return w.item(c, f.path, problem, now), true
			}
		}
	}
	settle := c.in.Settle
	allComplete := true
	for i := 0; i < c.n; i++ {
		if f := &c.files[i]; f.exists && !f.complete(now, settle) {
			allComplete = false
		}
	}
	if !allComplete {
		c.completeAt = time.Time{}
		return nil, false
	}
	if c.completeAt.IsZero() {
		c.completeAt = now
	}
	switch {
	case meta.exists && data.exists:
		return w.item(c, c.key, nil, now), true
	case meta.exists: // data missing: a half pair, like data without metadata
		if now.Sub(c.completeAt) < c.in.MetadataWait {
			return nil, false
		}
		return w.item(c, c.key, &CaptureError{File: meta.path,
			Problem: &halfPairError{"SigMF metadata without its data file " + filepath.Base(data.path)}}, now), true
	default: // data without metadata
		if now.Sub(c.completeAt) < c.in.MetadataWait {
			return nil, false
		}
		return w.item(c, data.path, &CaptureError{File: data.path,
			Problem: &halfPairError{"SigMF data file without its metadata " + filepath.Base(meta.path)}}, now), true
	}
}

// item makes the item to hand out for path, opened once: for its start
// time and for the analysis.
func (w *Watcher) item(c *candidate, path string, problem error, now time.Time) *readyItem {
	name, err := filepath.Rel(c.in.abs, path)
	if err != nil {
		name = path
	}
	f := Found{Input: c.in.Name, Root: c.in.Root, Path: path, DataPath: c.files[c.n-1].path,
		Name: filepath.ToSlash(name), Problem: problem, Ready: now}
	it := &readyItem{work: f}
	if problem == nil {
		// The signature before the opening: a change during it shows at
		// the hand-out.
		it.sig = sigOf(it.work.Path, it.work.DataPath)
		it.work.Open(c.in.Raw)
		if it.work.Capture != nil {
			it.start = it.work.Capture.Start()
		}
	}
	return it
}

// prepareHead makes the first waiting item ready to hand out, if there is
// one, and reports whether there is. A capture whose files changed while
// it waited is opened again (a Watcher opens each capture once otherwise);
// the change makes it found again too, and its analysis then finds the
// new content recorded.
func (w *Watcher) prepareHead() bool {
	if len(w.ready) == 0 {
		return false
	}
	if w.head == nil {
		it := &w.ready[0]
		f := it.work
		if f.Problem == nil && f.Capture != nil && sigOf(f.Path, f.DataPath) != it.sig {
			f.Capture = nil
			f.Open(w.inputNamed(f.Input).Raw)
		}
		w.head = &f
	}
	return true
}

// sigOf is the signature of a capture's files as they are now (the key
// file, and the data file of a SigMF pair), as candidate.sig gives it.
func sigOf(path, data string) signature {
	var s signature
	paths := []string{path}
	if data != path {
		paths = append(paths, data)
	}
	for i, p := range paths {
		f := fileState{path: p}
		f.observe(time.Now())
		if f.exists {
			s[i].size, s[i].mtime, s[i].ino, s[i].ok = f.size, f.mtime.UnixNano(), f.ino, true
		}
	}
	return s
}

func (w *Watcher) inputNamed(name string) *watchInput {
	for _, in := range w.inputs {
		if in.Name == name {
			return in
		}
	}
	panic("ingest: watcher: unknown input " + name)
}

// rescanAll rescans every folder: watches every subfolder, picks up files
// the events missed and forgets files that are gone.
func (w *Watcher) rescanAll(why string) {
	w.rescans.Add(1)
	t0 := time.Now()
	for _, in := range w.inputs {
		w.addTree(in, in.abs)
		w.scan(in, in.abs, true, false)
	}
	w.check(time.Now())
	w.log.Debug("watcher: rescan", "why", why, "took", time.Since(t0), "pending", len(w.pending), "waiting", len(w.ready))
}

// addTree adds event watches for dir and the folders below it, skipping
// dot-folders. Symbolic links to folders are not followed.
func (w *Watcher) addTree(in *watchInput, dir string) {
	if w.note == nil {
		return
	}
	filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil || !d.IsDir() {
			return nil
		}
		if p != in.abs && strings.HasPrefix(d.Name(), ".") {
			return fs.SkipDir
		}
		if err := w.note.add(p); err != nil {
			if errors.Is(err, syscall.ENAMETOOLONG) {
				return fs.SkipDir // beyond the path limit: rescans cannot cover it either (scan reports it)
			}
			w.log.Error("watcher: cannot watch folder; it is covered by rescans only", "dir", p, "err", err)
		}
		return nil
	})
}

// scan runs Find over dir and makes candidates of what it finds that was
// not handed out in its present state. With prune, files handed out
// earlier that are no longer there are forgotten. With placed, dir was
// renamed into the watched tree, which puts its files in place as a
// rename of each would.
func (w *Watcher) scan(in *watchInput, dir string, prune, placed bool) {
	found, err := findRaw(in.Raw, func(p string) { w.noteIgnored(in, p) }, dir)
	if err != nil {
		w.log.Error("watcher: cannot scan folder", "input", in.Name, "dir", dir, "err", err)
		return
	}
	if w.listed != nil {
		w.listed()
	}
	seen := map[string]bool{}
	now := time.Now()
	for _, f := range found {
		if _, ignore := w.inputOf(f.Path); ignore {
			continue
		}
		key, sigmf := keyOf(f.Path)
		seen[key] = true
		if f.Problem != nil && errors.Is(f.Problem, syscall.ENAMETOOLONG) {
			// A folder whose path passes the system's limit (issue 17,
			// item 15): no capture, and nothing below it can be opened.
			// Reported once, clearly; not handed out.
			if w.unwatchable == nil {
				w.unwatchable = map[string]bool{}
			}
			if !w.unwatchable[f.Path] {
				w.unwatchable[f.Path] = true
				w.log.Error("watcher: folder not watchable: its path is longer than the system allows (ENAMETOOLONG); captures below it are not seen",
					"input", in.Name, "dir", f.Path, "path_bytes", len(f.Path))
			}
			continue
		}
		st, stErr := os.Lstat(f.Path)
		if f.Problem != nil && errors.Is(stErr, fs.ErrNotExist) {
			// Gone between the listing and now (retired, moved, a
			// recorder's rename): nothing to report; an event or the
			// next scan sees what took its place.
			continue
		}
		if f.Problem != nil && !asCandidate(f.Path, st, stErr, sigmf) {
			// Not a capture at all (unreadable folder, not a regular
			// file ...): hand out the problem once per state.
			if _, ok := w.pending[key]; ok {
				continue
			}
			var sig signature
			if st, err := os.Lstat(f.Path); err == nil {
				sig[0].size, sig[0].mtime, sig[0].ok = st.Size(), st.ModTime().UnixNano(), true
			}
			if old, ok := w.emitted[key]; ok && old == sig {
				continue
			}
			w.emitted[key] = sig
			name, _ := filepath.Rel(in.abs, f.Path)
			w.ready = append(w.ready, readyItem{work: Found{Input: in.Name, Root: in.Root, Path: f.Path,
				DataPath: f.Path, Name: filepath.ToSlash(name), Problem: f.Problem, Ready: now}})
			continue
		}
		if _, ok := w.pending[key]; ok {
			continue
		}
		c := w.candidateFor(in, f.Path)
		for i := 0; i < c.n; i++ {
			c.files[i].observe(now)
			if placed {
				c.files[i].closed = c.files[i].exists
			}
		}
		if old, ok := w.emitted[key]; ok && old == c.sig() {
			delete(w.pending, key)
		}
	}
	w.npending.Store(int64(len(w.pending)))
	w.backlog.Store(int64(len(w.ready)))
	if prune {
		for key := range w.emitted {
			if within(dir, key) && !seen[key] {
				delete(w.emitted, key)
			}
		}
	}
}

// noteIgnored warns, once per file, about a file left out although its
// ending is one recorders give raw samples (.bin ...): the input has no
// pattern that takes it. At most maxIgnoredNoted files are remembered;
// past that the warnings stop, with a last one saying so.
func (w *Watcher) noteIgnored(in *watchInput, path string) {
	if !HasRawDataEnding(path) || w.ignored[path] || len(w.ignored) > maxIgnoredNoted {
		return
	}
	if w.ignored == nil {
		w.ignored = map[string]bool{}
	}
	w.ignored[path] = true
	if len(w.ignored) > maxIgnoredNoted {
		w.log.Warn("watcher: more files with raw-data endings left out; no more warnings about them", "input", in.Name)
		return
	}
	w.log.Warn("watcher: file not taken: its ending names no sample format; give the input a pattern that matches it, with its format and sample_rate, to read it",
		"input", in.Name, "path", path)
}

// maxIgnoredNoted bounds the files noteIgnored remembers.
const maxIgnoredNoted = 1024

// asCandidate reports whether a file Find reports with a problem is still
// followed as a candidate: a SigMF data file whose metadata may yet come,
// or a symbolic link (checked when it is complete).
func asCandidate(path string, st fs.FileInfo, err error, sigmf bool) bool {
	if err != nil {
		return false
	}
	if st.Mode()&fs.ModeSymlink != 0 {
		return true
	}
	return sigmf && st.Mode().IsRegular() && strings.ToLower(filepath.Ext(path)) == DataExt
}

// fsnotifyNotifier is the portable event source. fsnotify reports no
// close-after-write, so completion comes from the settle time.
type fsnotifyNotifier struct {
	w    *fsnotify.Watcher
	log  *slog.Logger
	out  chan fsEvent
	done chan struct{}
	mu   sync.Mutex
	dirs map[string]bool
}

func newFsnotify(log *slog.Logger) (notifier, error) {
	fw, err := fsnotify.NewWatcher()
	if err != nil {
		return nil, err
	}
	n := &fsnotifyNotifier{w: fw, log: log, out: make(chan fsEvent, 1024), done: make(chan struct{}), dirs: map[string]bool{}}
	go n.loop()
	return n, nil
}

func (n *fsnotifyNotifier) loop() {
	for {
		select {
		case <-n.done:
			return
		case ev, ok := <-n.w.Events:
			if !ok {
				return
			}
			n.convert(ev)
		case err, ok := <-n.w.Errors:
			if !ok {
				return
			}
			if errors.Is(err, fsnotify.ErrEventOverflow) {
				n.send(fsEvent{op: opOverflow})
			} else {
				n.log.Warn("watcher: fsnotify error", "err", err)
			}
		}
	}
}

func (n *fsnotifyNotifier) convert(ev fsnotify.Event) {
	switch {
	case ev.Has(fsnotify.Create):
		if st, err := os.Lstat(ev.Name); err == nil && st.IsDir() {
			n.send(fsEvent{path: ev.Name, op: opDir})
		} else {
			n.send(fsEvent{path: ev.Name, op: opWritten})
		}
	case ev.Has(fsnotify.Write):
		n.send(fsEvent{path: ev.Name, op: opWritten})
	case ev.Has(fsnotify.Remove), ev.Has(fsnotify.Rename):
		n.mu.Lock()
		dir := n.dirs[ev.Name]
		n.mu.Unlock()
		if dir {
			n.send(fsEvent{path: ev.Name, op: opDirGone})
		} else {
			n.send(fsEvent{path: ev.Name, op: opGone})
		}
	}
}

func (n *fsnotifyNotifier) send(ev fsEvent) {
	select {
	case n.out <- ev:
	case <-n.done:
	}
}

func (n *fsnotifyNotifier) add(dir string) error {
	n.mu.Lock()
	defer n.mu.Unlock()
	if n.dirs[dir] {
		return nil
	}
	if err := n.w.Add(dir); err != nil {
		return err
	}
	n.dirs[dir] = true
	return nil
}

func (n *fsnotifyNotifier) removeTree(dir string) {
	n.mu.Lock()
	defer n.mu.Unlock()
	for d := range n.dirs {
		if within(dir, d) {
			n.w.Remove(d) // fails harmlessly when the folder is gone
			delete(n.dirs, d)
		}
	}
}

func (n *fsnotifyNotifier) events() <-chan fsEvent { return n.out }

func (n *fsnotifyNotifier) close() error {
	close(n.done)
	return n.w.Close()
}
