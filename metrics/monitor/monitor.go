// Package monitor is the monitoring daemon's work, without its command
// line: it watches the configured folders (ingest.Watcher), records every
// capture found complete exactly once (the ledger's check, the analysis,
// replay.Analyse as replay does it, the event log's commit, the ledger's
// note, the metrics), keeps its state between captures (baseline saves,
// ledger writes, anchors of the log's chain, retention sweeps, quarantine
// and retention moves) and serves the HTTP endpoints. cmd/quietband reads
// the configuration into a Config, makes the logger, runs a Monitor and
// turns signals into Run's context, hup and Abandon.
//
// The capture record is what makes a capture done: only once it is
// fsynced is the capture noted in the ledger (metrics/ledger), which the
// next sighting of the capture, a restart included, checks first.
package monitor

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"log/slog"
	"os"
	"path/filepath"
	"strings"
	"sync/atomic"
	"time"

	"quietband/detect"
	"quietband/ingest"
	"quietband/metrics"
	"quietband/metrics/baseline"
	"quietband/metrics/eventlog"
	"quietband/metrics/ledger"
)

// Timings of the daemon's housekeeping.
const (
	appendRetry    = 2 * time.Second  // first wait before reopening a failed event log
	baselineEvery  = 10 * time.Second // most frequent baseline save
	headEvery      = time.Hour        // log the event log's head this often
	retentionEvery = time.Hour        // retention sweep
	shutdownGrace  = 5 * time.Second  // time the capture in hand gets on a stop
)

// DefaultAnchorEvery is how many event-log records pass between two
// anchors by default (see Config.AnchorEvery).
const DefaultAnchorEvery = 100

// Input is one watched folder.
type Input struct {
	Name   string             // metric label and the records' input
	Path   string             // the folder, watched recursively
	Raw    ingest.RawSettings // what its raw files cannot say
	Settle time.Duration      // see ingest.WatchInput
	// MetadataWait: see ingest.WatchInput.
	MetadataWait time.Duration
}

// Retention retires analysed captures older than Days (0: never), deleted
// or, with Action "move", moved under Dir.
type Retention struct {
	Days   int
	Action string // "delete" or "move"
	Dir    string
}

// Config is what a Monitor runs with, every value given (cmd/quietband
// fills the defaults and checks the values).
type Config struct {
	Inputs      []Input
	LogPath     string // the event log's active file
	LogMaxBytes int64  // rotation size (eventlog.Options.MaxBytes)
	// AnchorEvery is how many records pass between two anchors, the
	// chain head logged for an auditor to keep (see anchor); 0: none.
	AnchorEvery        uint64
	StateDir           string // the ledger and the baseline
	Listen             string // address of the HTTP endpoints
	WebConfigFile      string // exporter-toolkit web configuration ("": plain HTTP)
	QuarantineDir      string // where quarantined captures are moved ("": left in place)
	Retention          Retention
	QueueSize          int           // see ingest.WatchConfig
	RescanInterval     time.Duration // see ingest.WatchConfig
	Notify             string        // see ingest.WatchConfig
	FallingBehindAfter time.Duration // a capture waiting longer makes the daemon not ready
	Detect             detect.Config
	Satellites         bool // measure the satellites (a GNSS meter)
	GoCollector        bool // the Go runtime's metrics beside quietband's
}

// Monitor is one run of the daemon.
type Monitor struct {
	cfg     Config
	log     *slog.Logger
	elog    *eventlog.Log
	commit  *eventlog.Committer
	ledger  *ledger.Ledger
	state   *detect.State
	pipe    *detect.Pipeline
	set     *metrics.Set
	recent  *metrics.Recent
	watcher *ingest.Watcher
	server  *metrics.Server
	inputs  map[string]Input

	grace       time.Duration
	sweepEvery  time.Duration // retentionEvery; shorter in tests
	procCtx     context.Context
	baseDirty   bool
	baseSaved   time.Time
	behind      atomic.Bool
	abandonProc context.CancelFunc
	lastHead    time.Time
	lastSweep   time.Time
	processed   atomic.Int64      // captures recorded by this run
	retries     map[string]*retry // captures to try again (transient failures), by input and name
	hashes      atomic.Int64      // data files read whole to hash them (not by analysis)
	baseFailing bool              // the last baseline save failed (logged once)
	ledgerOK    atomic.Bool       // the ledger's file can be written
	ledgerWhy   atomic.Value      // string: why not, while it cannot
	retried     atomic.Uint64     // captures scheduled to be tried again (transient failures)
}

// New opens the ledger (taking its lock, so that a second daemon on the
// same state folder fails at once) and the event log, brings the ledger
// up to date with the log, fills /api/events' ring from the log's newest
// segments, loads the baseline and sets up the watcher, metrics and HTTP
// server (not yet serving: Run does).
func New(cfg Config, log *slog.Logger) (*Monitor, error) {
	m := &Monitor{cfg: cfg, log: log, grace: shutdownGrace, sweepEvery: retentionEvery, inputs: map[string]Input{}, retries: map[string]*retry{}}
	// The capture in hand runs under procCtx: a stop cancels it after the
	// grace time, a second one at once (Abandon).
	m.procCtx, m.abandonProc = context.WithCancel(context.Background())

	if err := os.MkdirAll(cfg.StateDir, 0o750); err != nil {
		return nil, fmt.Errorf("state_dir: %w", err)
	}
	if err := os.MkdirAll(filepath.Dir(cfg.LogPath), 0o750); err != nil {
		return nil, fmt.Errorf("log.path: %w", err)
	}
	// The ledger first: its lock keeps a second daemon from opening (and
	// cutting a "torn" tail of) the log this one is writing.
	t0 := time.Now()
	lg, err := ledger.Open(cfg.StateDir, cfg.LogPath, log)
	if err != nil {
		return nil, err
	}
	// A damaged file is set aside and the log goes on (issue 17, item 8).
	l, err := eventlog.Open(cfg.LogPath, eventlog.Options{MaxBytes: cfg.LogMaxBytes, Logger: log, SetAsideDamaged: true})
	if err != nil {
		lg.Close()
		return nil, err
	}
	fail := func(err error) (*Monitor, error) {
		lg.Close()
		l.Close()
		return nil, err
	}
	m.elog, m.ledger = l, lg
	if err := lg.Sync(); err != nil {
		return fail(err)
	}
	m.recent = metrics.NewRecent(metrics.DefaultRecent)
	files, err := metrics.FillRecent(cfg.LogPath, m.recent, metrics.DefaultRecent)
	if err != nil {
		return fail(fmt.Errorf("reading the event log's newest records: %w", err))
	}
	applied, fullScan := lg.LastSync()
	log.Info("quietband run: ledger ready", "file", lg.Path(), "log", cfg.LogPath, "records", l.LastSeq(), "captures_done", lg.Captures(),
		"applied", applied, "full_scan", fullScan, "log_files_read_for_recent", files, "head", l.Head(),
		"took", time.Since(t0).Round(time.Millisecond))
	m.noteLedger()
	m.state = detect.NewState()
	m.loadBaseline()
	m.pipe = m.newPipeline(cfg)

	var names []string
	var watch []ingest.WatchInput
	for _, in := range cfg.Inputs {
		// A mistyped folder is an error, not a healthy daemon watching
		// nothing (issue 18 item 4).
		if err := FolderProblem(in.Path); err != nil {
			return fail(fmt.Errorf("input %s: %w", in.Name, err))
		}
		m.inputs[in.Name] = in
		names = append(names, in.Name)
		watch = append(watch, ingest.WatchInput{Name: in.Name, Root: in.Path, Raw: in.Raw, Settle: in.Settle, MetadataWait: in.MetadataWait})
	}
	m.watcher, err = ingest.NewWatcher(ingest.WatchConfig{Inputs: watch, RescanInterval: cfg.RescanInterval,
		QueueSize: cfg.QueueSize, Notify: cfg.Notify, Logger: log})
	if err != nil {
		return fail(err)
	}
	m.set = metrics.New(metrics.Options{Inputs: names, GoCollector: cfg.GoCollector, Sources: metrics.Sources{
		QueueDepth:             func() int { return m.watcher.Stats().Backlog },
		EventLogLastSeq:        m.elog.LastSeq,
		WatchRescans:           func() uint64 { return m.watcher.Stats().Rescans },
		WatchOverflows:         func() uint64 { return m.watcher.Stats().Overflows },
		FolderReadable:         func(input string) bool { return FolderProblem(m.inputs[input].Path) == nil },
		EventLogDamaged:        func() int { d, _ := eventlog.Damaged(cfg.LogPath); return len(d) },
		LedgerWritable:         func() bool { return m.ledgerOK.Load() },
		CaptureRetries:         m.retried.Load,
		EventLogOutsideChanges: m.elog.OutsideChanges,
	}})
	// Restore each input's live state from its latest capture in the log
	// (issue 18: a restart kept no alert firing and made the stale-monitor
	// alert compute time() - 0).
	last, err := metrics.LastCaptures(cfg.LogPath, names)
	if err != nil {
		return fail(fmt.Errorf("reading the event log's latest captures: %w", err))
	}
	for _, c := range last {
		c.Satellites = m.pipe.GNSS != nil
		m.set.Restore(c)
		log.Info("quietband run: live state restored from the event log", "input", c.Input, "capture", c.Record.Capture, "written", c.At)
	}
	m.commit = &eventlog.Committer{Log: l, Retry: appendRetry, Logger: log, Failed: m.set.EventLogWriteFailed, Writable: m.set.SetEventLogWritable}
	m.server, err = metrics.NewServer(metrics.ServerOptions{Listen: cfg.Listen, WebConfigFile: cfg.WebConfigFile,
		Gatherer: m.set.Registry(), Ready: m.notReady, Degraded: m.degraded, Recent: m.recent, Logger: log.With("component", "http")})
	if err != nil {
		return fail(err)
	}
	return m, nil
}

// newPipeline makes the detection pipeline for cfg, with the GNSS meter
// when satellites are measured, on the daemon's shared state.
func (m *Monitor) newPipeline(cfg Config) *detect.Pipeline {
	p := detect.NewPipeline(cfg.Detect, m.state)
	if cfg.Satellites {
		p.GNSS = detect.NewGNSSMeter(cfg.Detect)
	}
	return p
}

// notReady lists why the daemon is not ready: watcher not running, event
// log not writable, analysis falling behind.
func (m *Monitor) notReady() []string {
	var why []string
	if !m.watcher.Running() {
		why = append(why, "folder watcher not running")
	}
	if err := m.elog.Err(); err != nil {
		why = append(why, "event log not writable: "+err.Error())
	} else if m.commit.Failing() {
		why = append(why, "event log append failing; retrying")
	}
	for _, in := range m.cfg.Inputs {
		if err := FolderProblem(in.Path); err != nil {
			why = append(why, fmt.Sprintf("input %s: %v", in.Name, err))
		}
	}
	if m.behind.Load() {
		why = append(why, fmt.Sprintf("falling behind: captures wait longer than %v for analysis", m.cfg.FallingBehindAfter))
	}
	return why
}

// Abandon cancels the capture in hand at once (a second stop): it is not
// recorded, and is analysed again at the next start.
func (m *Monitor) Abandon() { m.abandonProc() }

// Run serves until ctx is done, then stops cleanly: the capture in hand
// gets the grace time (a second stop, Abandon, ends it at once; it is
// analysed again at the next start), the baseline is saved, the event log
// and the ledger are closed. Each value on hup reopens the event log and
// applies the configuration reload gives (nil: none): the detection
// settings, satellites, quarantine folder, retention and falling-behind
// limit take effect from the next capture; other settings need a
// restart, which reload says.
func (m *Monitor) Run(ctx context.Context, hup <-chan struct{}, reload func() (Config, error)) error {
	procCtx, cancelProc := m.procCtx, m.abandonProc
	defer cancelProc()
	stopGrace := context.AfterFunc(ctx, func() { time.AfterFunc(m.grace, cancelProc) })
	defer stopGrace()

	wctx, stopWatcher := context.WithCancel(context.Background())
	watchDone := make(chan error, 1)
	go func() { watchDone <- m.watcher.Run(wctx) }()
	serveDone := make(chan error, 1)
	go func() { serveDone <- m.server.Serve() }()
	var ins []string
	for _, in := range m.cfg.Inputs {
		ins = append(ins, in.Name+"="+in.Path)
	}
	m.log.Info("quietband run: started", "inputs", strings.Join(ins, " "), "log", m.cfg.LogPath,
		"listen", m.server.Addr().String(), "last_seq", m.elog.LastSeq())
	m.lastHead = time.Now()

	tick := time.NewTicker(time.Second)
	defer tick.Stop()
	var err error
loop:
	for {
		select {
		case <-ctx.Done():
			break loop
		case <-hup:
			m.reload(reload)
		case w := <-m.watcher.Work():
			if e := m.handle(procCtx, w); e != nil {
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
			m.housekeeping(time.Now())
			if e := m.retryDue(procCtx, time.Now()); e != nil {
				if procCtx.Err() == nil {
					err = e
				}
				break loop
			}
		}
	}
	stopWatcher()
	if e := <-watchDone; e != nil && err == nil {
		err = e
	}
	sctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
	m.server.Shutdown(sctx)
	cancel()
	m.saveBaseline()
	if e := m.elog.Close(); e != nil && err == nil {
		err = e
	}
	if e := m.ledger.Close(); e != nil && err == nil {
		err = e
	}
	m.log.Info("quietband run: stopped", "captures_recorded", m.processed.Load(), "last_seq", m.elog.LastSeq(), "head", m.elog.Head())
	return err
}

// housekeeping runs between captures, about once a second.
func (m *Monitor) housekeeping(now time.Time) {
	m.set.SetWatcherRunning(m.watcher.Running())
	// The active file moved away, deleted or cut outside the daemon:
	// keep its records and go on (eventlog.Log.Reattach logs what it did).
	if _, err := m.elog.Reattach(); err != nil {
		m.log.Error("quietband run: event log changed outside the daemon and cannot be taken up again", "err", err)
	}
	m.set.SetEventLogWritable(m.elog.Err() == nil && !m.commit.Failing())
	if m.watcher.Stats().Backlog == 0 {
		m.setBehind(false)
	}
	if m.baseDirty && now.Sub(m.baseSaved) >= baselineEvery {
		m.saveBaseline()
	}
	m.ledger.Save() // identities remembered, or records a failed write left
	m.noteLedger()
	if now.Sub(m.lastHead) >= headEvery {
		m.lastHead = now
		m.log.Info("quietband run: event log head", "last_seq", m.elog.LastSeq(), "head", m.elog.Head())
	}
	if m.cfg.Retention.Days > 0 && now.Sub(m.lastSweep) >= m.sweepEvery {
		m.lastSweep = now
		m.sweep(now)
	}
}

// anchor logs the event log's chain head, at Info with msg "quietband run:
// event log anchor" and the members seq and head, each time the records
// just written pass a multiple of Config.AnchorEvery. The head is
// hex(SHA-256(line_seq)), the value record seq+1 will carry as its prev.
// An auditor compares these anchors, kept elsewhere (a log collector), with
// the event log: eventlog.Verify over the log cut after record seq must
// give Summary.Head == head; a log altered, cut or rewritten before seq
// since the anchor was shipped does not.
func (m *Monitor) anchor(recs []eventlog.Record) {
	every := m.cfg.AnchorEvery
	if every == 0 || len(recs) == 0 {
		return
	}
	last := recs[len(recs)-1].Seq
	if first := recs[0].Seq - 1; last/every > first/every {
		m.log.Info("quietband run: event log anchor", "seq", last, "head", m.elog.Head())
	}
}

func (m *Monitor) setBehind(b bool) {
	if m.behind.Swap(b) != b {
		if b {
			m.log.Warn("quietband run: falling behind: captures wait longer than the limit for analysis",
				"limit", m.cfg.FallingBehindAfter, "backlog", m.watcher.Stats().Backlog)
		} else {
			m.log.Info("quietband run: caught up")
		}
	}
	m.set.SetFallingBehind(b)
}

// loadBaseline reads state_dir/baseline.json if there is one. A file that
// does not parse is set aside (renamed) and learning starts afresh.
func (m *Monitor) loadBaseline() {
	path := filepath.Join(m.cfg.StateDir, baseline.FileName)
	b, err := baseline.Load(path)
	var unusable *baseline.UnusableError
	switch {
	case errors.Is(err, os.ErrNotExist):
		return
	case errors.As(err, &unusable):
		aside, _ := baseline.SetAside(path, time.Now())
		m.log.Error("quietband run: baseline file unusable; set aside, learning afresh", "file", path, "moved_to", aside, "err", unusable.Err)
		return
	case err != nil:
		m.log.Error("quietband run: cannot read the baseline; learning afresh", "file", path, "err", err)
		return
	}
	m.state.Baselines = b
	m.log.Info("quietband run: baseline loaded", "file", path, "inputs", b.Len())
}

// saveBaseline writes the baseline atomically if it changed.
func (m *Monitor) saveBaseline() {
	if !m.baseDirty {
		return
	}
	path := filepath.Join(m.cfg.StateDir, baseline.FileName)
	// A failed save is tried again at the next interval, and logged once
	// per failing spell (issue 17, item 9: 29 lines in 30 s on a full
	// state disk).
	m.baseSaved = time.Now()
	if err := baseline.Save(path, m.state.Baselines); err != nil {
		if !m.baseFailing {
			m.baseFailing = true
			m.log.Error("quietband run: saving the baseline failed; kept in memory and tried again every "+baselineEvery.String()+" (logged once until it works)", "file", path, "err", err)
		}
		return
	}
	if m.baseFailing {
		m.baseFailing = false
		m.log.Info("quietband run: baseline saved again", "file", path)
	}
	m.baseDirty = false
}

// noteLedger publishes whether the ledger's file can be written, for the
// metric and /readyz (the ledger logs the change itself).
func (m *Monitor) noteLedger() {
	err := m.ledger.Unwritable()
	m.ledgerOK.Store(err == nil)
	if err != nil {
		m.ledgerWhy.Store(err.Error())
	}
}

// degraded lists what works in a slower way while the daemon is ready.
func (m *Monitor) degraded() []string {
	if m.ledgerOK.Load() {
		return nil
	}
	why, _ := m.ledgerWhy.Load().(string)
	return []string{"ledger " + m.ledger.Path() + " cannot be written (" + why + "): running from the event log; captures seen again are hashed"}
}

// reload reopens the event log and applies the configuration next gives
// (nil: none): the settings read per capture follow it.
func (m *Monitor) reload(next func() (Config, error)) {
	m.log.Info("quietband run: SIGHUP: reopening the event log and reloading the configuration")
	if err := m.elog.Reopen(); err != nil {
		m.log.Error("quietband run: reopening the event log", "err", err)
	} else {
		m.log.Info("quietband run: event log reopened", "last_seq", m.elog.LastSeq(), "head", m.elog.Head())
	}
	if next == nil {
		return
	}
	cfg, err := next()
	if err != nil {
		m.log.Error("quietband run: configuration not reloaded", "err", err)
		return
	}
	oldDetect, _ := json.Marshal(m.cfg.Detect)
	newDetect, _ := json.Marshal(cfg.Detect)
	if string(oldDetect) != string(newDetect) || cfg.Satellites != m.cfg.Satellites {
		m.pipe = m.newPipeline(cfg)
		m.log.Info("quietband run: detection settings reloaded; they apply from the next capture")
	}
	m.cfg.Detect, m.cfg.Satellites = cfg.Detect, cfg.Satellites
	m.cfg.QuarantineDir, m.cfg.Retention, m.cfg.FallingBehindAfter = cfg.QuarantineDir, cfg.Retention, cfg.FallingBehindAfter
}

// Addr is the address the HTTP endpoints listen on.
func (m *Monitor) Addr() string { return m.server.Addr().String() }
