package main

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"os"
	"os/signal"
	"path/filepath"
	"slices"
	"strings"
	"sync/atomic"
	"syscall"
	"time"

	"quietband/detect"
	"quietband/ingest"
	"quietband/metrics"
	"quietband/metrics/baseline"
	"quietband/metrics/eventlog"
	"quietband/metrics/ledger"
	"quietband/metrics/replay"
)

func init() {
	register("run", "the monitoring daemon: watch folders, analyse each capture, log events, serve metrics", runRun)
}

// Timings of the daemon's housekeeping.
const (
	appendRetry    = 2 * time.Second  // first wait before reopening a failed event log
	baselineEvery  = 10 * time.Second // most frequent baseline save
	anchorEvery    = time.Hour        // log the event log's head this often
	retentionEvery = time.Hour        // retention sweep
	shutdownGrace  = 5 * time.Second  // time the capture in hand gets on SIGTERM

	// defaultAnchorEvery is how many event-log records pass between two
	// anchors (see daemon.anchor).
	defaultAnchorEvery = 100
)

// stringList is a repeatable string flag.
type stringList []string

func (s *stringList) String() string     { return strings.Join(*s, ",") }
func (s *stringList) Set(v string) error { *s = append(*s, v); return nil }

func runRun(args []string, out, errOut io.Writer) error {
	fs := newFlags("run", "", `
Runs the monitoring daemon. It watches the configured folders (recursively)
for IQ captures, analyses each complete capture once, in time order, with the
same detectors as 'quietband replay', appends the events and a capture record
to the event log (one fsynced write per capture), and serves Prometheus
metrics, /healthz, /readyz and /api/events.

A capture is complete when it was closed after writing, renamed into place,
or left unchanged for the input's settle time; a SigMF pair when both files
are (the metadata last). Captures already recorded in the event log are not
analysed again; after a crash, those without a capture record are. A capture
that cannot be read is recorded as quarantined with the reason. What is done
is kept in state_dir/ledger.db, derived from the event log (caught up from it,
or rebuilt from it, at start); it also locks the state folder against a
second daemon.

Settings come from --config (YAML, see deploy/config.example.yaml); the flags
below override it. SIGHUP reopens the event log and reloads the log level and
the detection settings; SIGTERM or SIGINT stops after the capture in hand (or
abandons it after a few seconds; it is analysed again on the next start).`, errOut)
	configPath := fs.String("config", "", "YAML configuration file (default: none, built-in defaults)")
	var watch stringList
	fs.Var(&watch, "watch", "folder to watch, repeatable; replaces the configured inputs (raw files take --format, --rate, --center, --if, --lo-side, --pattern)")
	raw := addRawFlags(fs)
	logPath := fs.String("log", "", "event log file (default: state_dir/"+eventLogFileName+")")
	state := fs.String("state", "", "state folder: baseline, ledger, default event log location (default "+defaultStateDir+")")
	listen := fs.String("listen", "", "address of the HTTP endpoints (default "+metrics.DefaultListen+"; loopback only unless set)")
	webCfg := fs.String("web.config.file", "", "exporter-toolkit web configuration file for TLS and basic auth (default: plain HTTP)")
	level := fs.String("log-level", "", "diagnostic log level: debug, info, warn or error (default info)")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		fmt.Fprintf(errOut, "quietband run: unexpected arguments %q\n", fs.Args())
		return errUsage
	}
	rs, err := raw.settings()
	if err != nil {
		return err
	}
	over := runOverrides{watch: watch, raw: rs, log: *logPath, state: *state, listen: *listen, webCfg: *webCfg, logLevel: *level}
	cfg, err := loadRunConfig(*configPath, over)
	if err != nil {
		return err
	}
	d, err := newDaemon(cfg, *configPath, over, errOut)
	if err != nil {
		return err
	}

	sigs := make(chan os.Signal, 4)
	signal.Notify(sigs, syscall.SIGHUP, syscall.SIGTERM, syscall.SIGINT)
	defer signal.Stop(sigs)
	ctx, stop := context.WithCancel(context.Background())
	defer stop()
	hup := make(chan struct{}, 1)
	done := make(chan struct{})
	defer close(done)
	go func() {
		stops := 0
		for {
			select {
			case <-done:
				return
			case s := <-sigs:
				if s == syscall.SIGHUP {
					select {
					case hup <- struct{}{}:
					default:
					}
					continue
				}
				stops++
				d.log.Info("quietband run: stopping", "signal", s.String())
				if stops == 1 {
					stop()
				} else {
					d.abandon()
				}
			}
		}
	}()
	return d.run(ctx, hup)
}

// daemon is one run of `quietband run`.
type daemon struct {
	cfg     *runConfig
	cfgPath string
	over    runOverrides
	log     *slog.Logger
	level   *slog.LevelVar
	elog    *eventlog.Log
	commit  *eventlog.Committer
	ledger  *ledger.Ledger
	state   *detect.State
	pipe    *detect.Pipeline
	set     *metrics.Set
	recent  *metrics.Recent
	watcher *ingest.Watcher
	server  *metrics.Server
	inputs  map[string]inputConfig

	grace       time.Duration
	sweepEvery  time.Duration // retentionEvery; shorter in tests
	procCtx     context.Context
	baseDirty   bool
	baseSaved   time.Time
	behind      atomic.Bool
	abandonProc context.CancelFunc
	lastAnchor  time.Time
	lastSweep   time.Time
	processed   atomic.Int64 // captures recorded by this run
	hashes      atomic.Int64 // data files read whole to hash them (not by analysis)
	anchorEvery uint64       // records between anchors; 0: none
}

// newDaemon opens the ledger (taking its lock) and the event log, brings
// the ledger up to date with the log, loads the baseline and sets up the
// watcher, metrics and HTTP server.
func newDaemon(cfg *runConfig, cfgPath string, over runOverrides, logOut io.Writer) (*daemon, error) {
	lv, _ := parseLevel(cfg.LogLevel)
	base, err := newLogger(logOut, slog.LevelDebug.String(), cfg.LogFormat == "json")
	if err != nil {
		return nil, err
	}
	level := new(slog.LevelVar)
	level.Set(lv)
	log := slog.New(levelHandler{base.Handler(), level})
	d := &daemon{cfg: cfg, cfgPath: cfgPath, over: over, log: log, level: level,
		grace: shutdownGrace, sweepEvery: retentionEvery, inputs: map[string]inputConfig{},
		anchorEvery: defaultAnchorEvery}
	if cfg.Log.AnchorEvery != nil {
		d.anchorEvery = *cfg.Log.AnchorEvery
	}
	// The capture in hand runs under procCtx: a stop signal cancels it
	// after the grace time, a second one at once (abandon).
	d.procCtx, d.abandonProc = context.WithCancel(context.Background())

	if err := os.MkdirAll(cfg.StateDir, 0o750); err != nil {
		return nil, fmt.Errorf("state_dir: %w", err)
	}
	if err := os.MkdirAll(filepath.Dir(cfg.Log.Path), 0o750); err != nil {
		return nil, fmt.Errorf("log.path: %w", err)
	}
	// The ledger first: its lock keeps a second daemon from opening (and
	// cutting a "torn" tail of) the log this one is writing.
	t0 := time.Now()
	lg, err := ledger.Open(cfg.StateDir, cfg.Log.Path, log)
	if err != nil {
		return nil, err
	}
	l, err := eventlog.Open(cfg.Log.Path, eventlog.Options{MaxBytes: cfg.Log.MaxBytes, Logger: log})
	if err != nil {
		lg.Close()
		return nil, err
	}
	d.elog, d.ledger = l, lg
	if err := lg.Sync(); err != nil {
		lg.Close()
		l.Close()
		return nil, err
	}
	d.recent = metrics.NewRecent(metrics.DefaultRecent)
	files, err := metrics.FillRecent(cfg.Log.Path, d.recent, metrics.DefaultRecent)
	if err != nil {
		lg.Close()
		l.Close()
		return nil, fmt.Errorf("reading the event log's newest records: %w", err)
	}
	applied, fullScan := lg.LastSync()
	log.Info("quietband run: ledger ready", "file", lg.Path(), "log", cfg.Log.Path, "records", l.LastSeq(), "captures_done", lg.Captures(),
		"applied", applied, "full_scan", fullScan, "log_files_read_for_recent", files, "head", l.Head(),
		"took", time.Since(t0).Round(time.Millisecond))
	d.state = detect.NewState()
	d.loadBaseline()
	d.pipe = d.newPipeline(cfg)

	var names []string
	var watch []ingest.WatchInput
	for _, in := range cfg.Inputs {
		if _, err := os.Stat(in.Path); errors.Is(err, os.ErrNotExist) {
			log.Warn("quietband run: watched folder missing; creating it", "input", in.Name, "path", in.Path)
			if err := os.MkdirAll(in.Path, 0o755); err != nil {
				lg.Close()
				l.Close()
				return nil, fmt.Errorf("input %s: %w", in.Name, err)
			}
		}
		d.inputs[in.Name] = in
		names = append(names, in.Name)
		watch = append(watch, ingest.WatchInput{Name: in.Name, Root: in.Path, Raw: in.rawSettings(), Settle: in.Settle})
	}
	d.watcher, err = ingest.NewWatcher(ingest.WatchConfig{Inputs: watch, RescanInterval: cfg.RescanInterval,
		QueueSize: cfg.QueueSize, Notify: cfg.notify(), Logger: log})
	if err != nil {
		lg.Close()
		l.Close()
		return nil, err
	}
	d.set = metrics.New(metrics.Options{Inputs: names, GoCollector: cfg.Metrics.GoCollector, Sources: metrics.Sources{
		QueueDepth:      func() int { return d.watcher.Stats().Backlog },
		EventLogLastSeq: d.elog.LastSeq,
		WatchRescans:    func() uint64 { return d.watcher.Stats().Rescans },
		WatchOverflows:  func() uint64 { return d.watcher.Stats().Overflows },
	}})
	d.commit = &eventlog.Committer{Log: l, Retry: appendRetry, Logger: log, Failed: d.set.EventLogWriteFailed, Writable: d.set.SetEventLogWritable}
	d.server, err = metrics.NewServer(metrics.ServerOptions{Listen: cfg.Listen, WebConfigFile: cfg.WebConfigFile,
		Gatherer: d.set.Registry(), Ready: d.notReady, Recent: d.recent, Logger: log.With("component", "http")})
	if err != nil {
		lg.Close()
		l.Close()
		return nil, err
	}
	return d, nil
}

// newPipeline makes the detection pipeline for cfg, with the GNSS meter
// when satellites are measured, on the daemon's shared state.
func (d *daemon) newPipeline(cfg *runConfig) *detect.Pipeline {
	p := detect.NewPipeline(cfg.Detect, d.state)
	if *cfg.Satellites {
		p.GNSS = &detect.GNSSMeter{}
	}
	return p
}

// levelHandler filters records by a level that can change at run time.
type levelHandler struct {
	slog.Handler
	level *slog.LevelVar
}

func (h levelHandler) Enabled(_ context.Context, l slog.Level) bool { return l >= h.level.Level() }
func (h levelHandler) WithAttrs(a []slog.Attr) slog.Handler {
	return levelHandler{h.Handler.WithAttrs(a), h.level}
}
func (h levelHandler) WithGroup(n string) slog.Handler {
	return levelHandler{h.Handler.WithGroup(n), h.level}
}

// notReady lists why the daemon is not ready: watcher not running, event
// log not writable, analysis falling behind.
func (d *daemon) notReady() []string {
	var why []string
	if !d.watcher.Running() {
		why = append(why, "folder watcher not running")
	}
	if err := d.elog.Err(); err != nil {
		why = append(why, "event log not writable: "+err.Error())
	} else if d.commit.Failing() {
		why = append(why, "event log append failing; retrying")
	}
	if d.behind.Load() {
		why = append(why, fmt.Sprintf("falling behind: captures wait longer than %v for analysis", d.cfg.FallingBehindAfter))
	}
	return why
}

// abandon cancels the capture in hand at once (second stop signal).
func (d *daemon) abandon() { d.abandonProc() }

// run serves until ctx is done, then stops cleanly.
func (d *daemon) run(ctx context.Context, hup <-chan struct{}) error {
	procCtx, cancelProc := d.procCtx, d.abandonProc
	defer cancelProc()
	stopGrace := context.AfterFunc(ctx, func() { time.AfterFunc(d.grace, cancelProc) })
	defer stopGrace()

	wctx, stopWatcher := context.WithCancel(context.Background())
	watchDone := make(chan error, 1)
	go func() { watchDone <- d.watcher.Run(wctx) }()
	serveDone := make(chan error, 1)
	go func() { serveDone <- d.server.Serve() }()
	var ins []string
	for _, in := range d.cfg.Inputs {
		ins = append(ins, in.Name+"="+in.Path)
	}
	d.log.Info("quietband run: started", "inputs", strings.Join(ins, " "), "log", d.cfg.Log.Path,
		"listen", d.server.Addr().String(), "last_seq", d.elog.LastSeq())
	d.lastAnchor = time.Now()

	tick := time.NewTicker(time.Second)
	defer tick.Stop()
	var err error
loop:
	for {
		select {
		case <-ctx.Done():
			break loop
		case <-hup:
			d.reload()
		case w := <-d.watcher.Work():
			if e := d.handle(procCtx, w); e != nil {
				if procCtx.Err() != nil {
					break loop
				}
				err = e
				break loop
			}
		case e := <-serveDone:
			err = fmt.Errorf("HTTP server: %w", e)
			break loop
		case <-tick.C:
			d.housekeeping(time.Now())
		}
	}
	stopWatcher()
	if e := <-watchDone; e != nil && err == nil {
		err = e
	}
	sctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
	d.server.Shutdown(sctx)
	cancel()
	d.saveBaseline()
	if e := d.elog.Close(); e != nil && err == nil {
		err = e
	}
	if e := d.ledger.Close(); e != nil && err == nil {
		err = e
	}
	d.log.Info("quietband run: stopped", "captures_recorded", d.processed.Load(), "last_seq", d.elog.LastSeq(), "head", d.elog.Head())
	return err
}

// housekeeping runs between captures, about once a second.
func (d *daemon) housekeeping(now time.Time) {
	d.set.SetWatcherRunning(d.watcher.Running())
	d.set.SetEventLogWritable(d.elog.Err() == nil && !d.commit.Failing())
	if d.watcher.Stats().Backlog == 0 {
		d.setBehind(false)
	}
	if d.baseDirty && now.Sub(d.baseSaved) >= baselineEvery {
		d.saveBaseline()
	}
	d.ledger.Save() // identities remembered, or records a failed write left
	if now.Sub(d.lastAnchor) >= anchorEvery {
		d.lastAnchor = now
		d.log.Info("quietband run: event log head", "last_seq", d.elog.LastSeq(), "head", d.elog.Head())
	}
	if d.cfg.Retention.Days > 0 && now.Sub(d.lastSweep) >= d.sweepEvery {
		d.lastSweep = now
		d.sweep(now)
	}
}

// anchor logs the event log's chain head, at Info with msg "quietband run:
// event log anchor" and the members seq and head, each time the records
// just written pass a multiple of d.anchorEvery. The head is
// hex(SHA-256(line_seq)), the value record seq+1 will carry as its prev.
// An auditor compares these anchors, kept elsewhere (a log collector), with
// the event log: eventlog.Verify over the log cut after record seq must
// give Summary.Head == head; a log altered, cut or rewritten before seq
// since the anchor was shipped does not.
func (d *daemon) anchor(recs []eventlog.Record) {
	if d.anchorEvery == 0 || len(recs) == 0 {
		return
	}
	last := recs[len(recs)-1].Seq
	if first := recs[0].Seq - 1; last/d.anchorEvery > first/d.anchorEvery {
		d.log.Info("quietband run: event log anchor", "seq", last, "head", d.elog.Head())
	}
}

func (d *daemon) setBehind(b bool) {
	if d.behind.Swap(b) != b {
		if b {
			d.log.Warn("quietband run: falling behind: captures wait longer than the limit for analysis",
				"limit", d.cfg.FallingBehindAfter, "backlog", d.watcher.Stats().Backlog)
		} else {
			d.log.Info("quietband run: caught up")
		}
	}
	d.set.SetFallingBehind(b)
}

// handle analyses one capture and records it. It returns an error only
// when the capture was abandoned (procCtx done) or the daemon cannot go on.
func (d *daemon) handle(ctx context.Context, w ingest.Found) error {
	d.setBehind(time.Since(w.Ready) > d.cfg.FallingBehindAfter)
	name := w.Name
	if w.Problem != nil {
		if st, err := os.Lstat(w.Path); err == nil && st.IsDir() {
			// A folder that cannot be read is no capture: nothing is
			// recorded (nor moved), and its captures are found by a rescan
			// once it can be read again.
			d.log.Error("quietband run: cannot read folder; the captures in it are picked up once it is readable again",
				"folder", w.Path, "input", w.Input, "err", w.Problem)
			return nil
		}
	}
	// The data file is read through a link (within the watched folder)
	// when the capture opened; a capture with a problem is hashed as the
	// file the name is, links not followed.
	follow := w.Problem == nil
	// The identity of the file about to be read: what the ledger keeps
	// with the record, so that the next sighting of the unchanged file
	// needs no hashing.
	id, idOK := ledger.Identify(w.DataPath, follow)
	sha, hashed := "", false
	prevReason, retrying := "", false
	ent, known, err := d.ledger.Lookup(name)
	if err != nil {
		return err
	}
	if known {
		var ok bool
		if sha, ok = ent.SHAFor(id, idOK); !ok {
			var stable bool
			sha, stable = d.hashData(w.DataPath, follow, id, idOK)
			if _, recorded := ent.Outcome(sha); recorded && stable {
				d.ledger.Remember(name, id, sha)
			}
		}
		hashed = true
		if reason, ok := ent.Outcome(sha); ok {
			if reason == "" {
				d.log.Debug("quietband run: already analysed", "capture", name, "input", w.Input)
				return nil
			}
			prevReason, retrying = reason, true
		}
	}

	out, err := replay.Analyse(ctx, d.pipe, w)
	if err != nil {
		d.log.Info("quietband run: capture abandoned; it is analysed again on the next start", "capture", name)
		return err
	}
	res, rec := out.Result, out.Record
	if rec.Status == detect.StatusQuarantined {
		if !hashed {
			sha, _ = d.hashData(w.DataPath, follow, id, idOK)
			hashed = true
		}
		rec.SHA256 = sha
		if retrying && rec.Error == prevReason {
			d.log.Debug("quietband run: still quarantined for the recorded reason", "capture", name)
			return nil
		}
	}

	var items []eventlog.Item
	var events []detect.Event
	if res != nil {
		events = res.Events
		for _, e := range res.Events {
			dup, err := d.ledger.HasEvent(e.ID)
			if err != nil {
				return err
			}
			if dup {
				// A capture redone after a crash, or the same data under
				// another name (the id comes from the data's SHA-256).
				d.log.Info("quietband run: event already in the log (capture redone after a restart, or the same data recorded before)",
					"capture", name, "id", e.ID)
				continue
			}
			items = append(items, eventlog.Item{Kind: eventlog.KindEvent, Body: e})
		}
	}
	items = append(items, eventlog.Item{Kind: eventlog.KindCapture, Body: rec})
	recs, err := d.commit.Commit(ctx, items)
	if err != nil && ctx.Err() == nil {
		// The record cannot be encoded (a value JSON has no form for):
		// record the capture as quarantined with that reason instead.
		d.log.Error("quietband run: cannot record the analysis; quarantining the capture", "capture", name, "err", err)
		if rec.SHA256 != "" {
			sha = rec.SHA256
		} else if !hashed {
			sha, _ = d.hashData(w.DataPath, follow, id, idOK)
		}
		res, events = nil, nil
		rec = detect.CaptureRecord{Capture: name, SHA256: sha, Status: detect.StatusQuarantined,
			Error: "analysis could not be recorded: " + err.Error()}
		recs, err = d.commit.Commit(ctx, []eventlog.Item{{Kind: eventlog.KindCapture, Body: rec}})
	}
	if err != nil {
		d.log.Info("quietband run: capture abandoned before it was recorded; it is analysed again on the next start", "capture", name)
		return err
	}
	d.processed.Add(1)
	// Keep the identity only if the file still has it: one that changed
	// while it was analysed is hashed at its next sighting.
	var stamps []ledger.Stamp
	if idOK && rec.SHA256 != "" {
		if now, ok := ledger.Identify(w.DataPath, follow); ok && now == id {
			stamps = append(stamps, ledger.Stamp{Name: name, ID: id})
		}
	}
	if err := d.ledger.Note(recs, stamps...); err != nil {
		// The record is in the log; the ledger retries (save), and a
		// restart catches it up from the log in any case.
		d.log.Debug("quietband run: ledger not updated yet", "capture", name, "err", err)
	}
	d.anchor(recs)
	d.recent.Add(recs...)

	mc := metrics.Capture{Input: w.Input, Record: rec, Events: events, At: time.Now(), Satellites: d.pipe.GNSS != nil}
	if res != nil {
		mc.Bytes = w.Capture.DataBytes
		mc.Duration = w.Capture.Duration()
		mc.Elapsed = res.Elapsed
		if len(events) == 0 {
			// A clean capture taught the baseline: save it now, right
			// after the capture's record, so that a crash loses at most
			// the capture in hand (which is then analysed again against
			// the same baseline as it would have been).
			d.baseDirty = true
			d.saveBaseline()
		}
	}
	d.set.ObserveCapture(mc)

	if rec.Status == detect.StatusQuarantined {
		d.log.Warn("quietband run: capture quarantined", "capture", name, "input", w.Input, "reason", rec.Error)
		if d.cfg.QuarantineDir != "" {
			d.moveAway(w, filepath.Join(d.cfg.QuarantineDir, w.Input), "quarantine")
		}
		return nil
	}
	classes := make([]string, 0, len(events))
	for _, e := range events {
		classes = append(classes, e.Class)
	}
	d.log.Info("quietband run: capture analysed", "capture", name, "input", w.Input, "events", len(events),
		"classes", strings.Join(classes, ","), "took", res.Elapsed.Round(time.Microsecond))
	return nil
}

// hashData hashes a capture's data file (counted in d.hashes) and reports
// whether the file kept identity id while it was read, so that the SHA-256
// is that of the file with this identity.
func (d *daemon) hashData(path string, follow bool, id ledger.FileID, idOK bool) (sha string, stable bool) {
	d.hashes.Add(1)
	sha = ledger.HashFile(path, follow)
	if !idOK || sha == "" {
		return sha, false
	}
	now, ok := ledger.Identify(path, follow)
	return sha, ok && now == id
}

// loadBaseline reads state_dir/baseline.json if there is one. A file that
// does not parse is set aside (renamed) and learning starts afresh.
func (d *daemon) loadBaseline() {
	path := filepath.Join(d.cfg.StateDir, baseline.FileName)
	b, err := baseline.Load(path)
	var unusable *baseline.UnusableError
	switch {
	case errors.Is(err, os.ErrNotExist):
		return
	case errors.As(err, &unusable):
		aside, _ := baseline.SetAside(path, time.Now())
		d.log.Error("quietband run: baseline file unusable; set aside, learning afresh", "file", path, "moved_to", aside, "err", unusable.Err)
		return
	case err != nil:
		d.log.Error("quietband run: cannot read the baseline; learning afresh", "file", path, "err", err)
		return
	}
	d.state.Baselines = b
	d.log.Info("quietband run: baseline loaded", "file", path, "inputs", b.Len())
}

// saveBaseline writes the baseline atomically if it changed.
func (d *daemon) saveBaseline() {
	if !d.baseDirty {
		return
	}
	path := filepath.Join(d.cfg.StateDir, baseline.FileName)
	if err := baseline.Save(path, d.state.Baselines); err != nil {
		d.log.Error("quietband run: saving the baseline", "file", path, "err", err)
		return
	}
	d.baseDirty, d.baseSaved = false, time.Now()
}

// reload re-reads the configuration on SIGHUP: the log level and the
// detection settings take effect for later captures; other changes need a
// restart. The event log is reopened.
func (d *daemon) reload() {
	d.log.Info("quietband run: SIGHUP: reopening the event log and reloading the configuration")
	if err := d.elog.Reopen(); err != nil {
		d.log.Error("quietband run: reopening the event log", "err", err)
	} else {
		d.log.Info("quietband run: event log reopened", "last_seq", d.elog.LastSeq(), "head", d.elog.Head())
	}
	cfg, err := loadRunConfig(d.cfgPath, d.over)
	if err != nil {
		d.log.Error("quietband run: configuration not reloaded", "err", err)
		return
	}
	if lv, err := parseLevel(cfg.LogLevel); err == nil && lv != d.level.Level() {
		d.level.Set(lv)
		d.log.Info("quietband run: log level changed", "level", cfg.LogLevel)
	}
	oldDetect, _ := json.Marshal(d.cfg.Detect)
	newDetect, _ := json.Marshal(cfg.Detect)
	if !bytes.Equal(oldDetect, newDetect) || *cfg.Satellites != *d.cfg.Satellites {
		d.pipe = d.newPipeline(cfg)
		d.log.Info("quietband run: detection settings reloaded; they apply from the next capture")
	}
	var restart []string
	if !slices.EqualFunc(cfg.Inputs, d.cfg.Inputs, sameInput) {
		restart = append(restart, "inputs")
	}
	for key, changed := range map[string]bool{"log": cfg.Log != d.cfg.Log, "state_dir": cfg.StateDir != d.cfg.StateDir,
		"listen": cfg.Listen != d.cfg.Listen, "web_config_file": cfg.WebConfigFile != d.cfg.WebConfigFile,
		"queue_size": cfg.QueueSize != d.cfg.QueueSize, "rescan_interval": cfg.RescanInterval != d.cfg.RescanInterval,
		"notify": cfg.Notify != d.cfg.Notify, "log_format": cfg.LogFormat != d.cfg.LogFormat,
		"metrics": cfg.Metrics != d.cfg.Metrics} {
		if changed {
			restart = append(restart, key)
		}
	}
	if len(restart) > 0 {
		slices.Sort(restart)
		d.log.Warn("quietband run: these settings changed but take effect only after a restart", "keys", strings.Join(restart, ","))
	}
	// Settings read per capture follow the new file.
	keep := *d.cfg
	keep.Detect, keep.Satellites, keep.LogLevel = cfg.Detect, cfg.Satellites, cfg.LogLevel
	keep.QuarantineDir, keep.Retention, keep.FallingBehindAfter = cfg.QuarantineDir, cfg.Retention, cfg.FallingBehindAfter
	d.cfg = &keep
}

// moveAway moves a capture's files (metadata first, so that the watcher
// never sees a lone metadata file) to dir, keeping their path below the
// watched folder.
func (d *daemon) moveAway(w ingest.Found, dir, why string) {
	in := d.inputs[w.Input]
	files := w.Files()
	slices.SortStableFunc(files, func(a, b string) int {
		ma, mb := strings.HasSuffix(a, ingest.MetaExt), strings.HasSuffix(b, ingest.MetaExt)
		switch {
		case ma && !mb:
			return -1
		case mb && !ma:
			return 1
		}
		return 0
	})
	root, _ := filepath.Abs(in.Path)
	for _, f := range files {
		rel, err := filepath.Rel(root, f)
		if err != nil || strings.HasPrefix(rel, "..") {
			rel = filepath.Base(f)
		}
		dst := filepath.Join(dir, rel)
		if err := moveFile(f, dst); err != nil {
			d.log.Error("quietband run: cannot move capture file", "why", why, "file", f, "to", dst, "err", err)
			return
		}
		d.log.Info("quietband run: capture file moved", "why", why, "file", f, "to", dst)
	}
}

// moveFile moves src to dst (not replacing an existing file: a suffix is
// added), copying across file systems, and syncs the folders involved.
func moveFile(src, dst string) error {
	if err := os.MkdirAll(filepath.Dir(dst), 0o750); err != nil {
		return err
	}
	for n := 1; ; n++ {
		if _, err := os.Lstat(dst); errors.Is(err, os.ErrNotExist) {
			break
		}
		ext := filepath.Ext(dst)
		dst = strings.TrimSuffix(dst, ext) + fmt.Sprintf(".%d", n) + ext
		if n > 1 {
			dst = strings.Replace(dst, fmt.Sprintf(".%d.%d", n-1, n), fmt.Sprintf(".%d", n), 1)
		}
	}
	err := os.Rename(src, dst)
	if errors.Is(err, syscall.EXDEV) {
		err = copyFile(src, dst)
		if err == nil {
			err = os.Remove(src)
		}
	}
	if err != nil {
		return err
	}
	if err := ingest.SyncDir(filepath.Dir(dst)); err != nil {
		return err
	}
	return ingest.SyncDir(filepath.Dir(src))
}

// copyFile copies a regular file or recreates a symbolic link, durably.
func copyFile(src, dst string) error {
	st, err := os.Lstat(src)
	if err != nil {
		return err
	}
	if st.Mode()&os.ModeSymlink != 0 {
		target, err := os.Readlink(src)
		if err != nil {
			return err
		}
		return os.Symlink(target, dst)
	}
	in, err := os.Open(src)
	if err != nil {
		return err
	}
	defer in.Close()
	tmp, err := os.CreateTemp(filepath.Dir(dst), "."+filepath.Base(dst)+".tmp*")
	if err != nil {
		return err
	}
	_, err = io.Copy(tmp, in)
	if err == nil {
		err = tmp.Sync()
	}
	if cerr := tmp.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = os.Chmod(tmp.Name(), st.Mode().Perm())
	}
	if err == nil {
		err = os.Rename(tmp.Name(), dst)
	}
	if err != nil {
		os.Remove(tmp.Name())
	}
	return err
}

// sweep applies retention: captures analysed (recorded ok with their
// present content) whose files are all older than retention.days are
// deleted or moved. The record is durable by then: it is in the ledger,
// which holds only records read back from or fsynced to the log.
func (d *daemon) sweep(now time.Time) {
	cutoff := now.Add(-time.Duration(d.cfg.Retention.Days) * 24 * time.Hour)
	n := 0
	for _, in := range d.cfg.Inputs {
		found, err := ingest.FindRaw(in.rawSettings(), in.Path)
		if err != nil {
			d.log.Error("quietband run: retention: cannot scan", "input", in.Name, "err", err)
			continue
		}
		root, _ := filepath.Abs(in.Path)
		for _, f := range found {
			if f.Problem != nil {
				continue
			}
			path, _ := filepath.Abs(f.Path)
			rel, err := filepath.Rel(root, path)
			if err != nil {
				continue
			}
			name := filepath.ToSlash(rel)
			ent, ok, err := d.ledger.Lookup(name)
			if err != nil {
				d.log.Error("quietband run: retention: ledger", "capture", name, "err", err)
				return
			}
			if !ok {
				continue
			}
			w := f
			w.Input, w.Path, w.Name = in.Name, path, name
			w.DataPath, _ = filepath.Abs(f.DataPath)
			old := true
			for _, p := range w.Files() {
				if st, err := os.Lstat(p); err != nil || st.ModTime().After(cutoff) {
					old = false
				}
			}
			if !old {
				continue
			}
			// Links are left alone (as the files they point to are not
			// the daemon's to retire); the SHA-256 of an unchanged file
			// comes from the ledger.
			id, idOK := ledger.Identify(w.DataPath, false)
			if !idOK {
				continue
			}
			sha, known := ent.SHAFor(id, idOK)
			if !known {
				var stable bool
				sha, stable = d.hashData(w.DataPath, false, id, idOK)
				if _, recorded := ent.Outcome(sha); recorded && stable {
					d.ledger.Remember(name, id, sha)
				}
			}
			if reason, ok := ent.Outcome(sha); !ok || reason != "" {
				continue
			}
			n++
			if d.cfg.Retention.Action == "move" {
				d.moveAway(w, filepath.Join(d.cfg.Retention.Dir, in.Name), "retention")
				continue
			}
			files := w.Files()
			slices.SortStableFunc(files, func(a, b string) int {
				return boolCmp(strings.HasSuffix(b, ingest.MetaExt), strings.HasSuffix(a, ingest.MetaExt))
			})
			for _, p := range files {
				if err := os.Remove(p); err != nil {
					d.log.Error("quietband run: retention: cannot delete", "file", p, "err", err)
				}
			}
			d.log.Info("quietband run: retention: capture deleted", "capture", name, "input", in.Name)
		}
	}
	if n > 0 {
		d.log.Info("quietband run: retention sweep", "captures", n, "action", d.cfg.Retention.Action, "older_than_days", d.cfg.Retention.Days)
	}
}

func boolCmp(a, b bool) int {
	switch {
	case a == b:
		return 0
	case a:
		return 1
	}
	return -1
}
