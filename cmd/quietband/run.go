package main

import (
	"context"
	"fmt"
	"io"
	"log/slog"
	"os"
	"os/signal"
	"slices"
	"strings"
	"syscall"

	"quietband/metrics"
	"quietband/metrics/monitor"
)

func init() {
	register("run", "the monitoring daemon: watch folders, analyse each capture, log events, serve metrics", runRun)
}

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

A capture is complete when it was renamed into place, closed after writing
and then left unchanged for the input's settle time (at most 2 s: a recorder
may append in several rounds), or left unchanged for the settle time; a SigMF
pair when both files are (the metadata last). A capture is its input and its
name (two inputs may hold the same names): one already recorded in the event
log is not analysed again unless its data or its SigMF metadata changed since,
when its new record replaces the earlier one; after a crash, those without a
capture record are analysed. A capture that cannot be read is recorded as
quarantined with the reason. What is done is kept in state_dir/ledger.db,
derived from the event log (caught up from it, or rebuilt from it, at start);
it also locks the state folder against a second daemon.

Settings come from --config (YAML, see deploy/config.example.yaml); the flags
below override it. SIGHUP reopens the event log and reloads the log level and
the detection settings; SIGTERM or SIGINT stops after the capture in hand (or
abandons it after a few seconds; it is analysed again on the next start).`, errOut)
	configPath := fs.String("config", "", "YAML configuration file (default: none, built-in defaults)")
	var watch stringList
	fs.Var(&watch, "watch", "folder to watch, repeatable; replaces the configured inputs (raw files take --format, --rate, --center, --if, --lo-side, --pattern)")
	raw := addRawFlags(fs)
	logPath := fs.String("event-log", "", "event log file (default: state_dir/"+eventLogFileName+")")
	fs.StringVar(logPath, "log", "", "the same as --event-log (the older name; --log-level is the diagnostic log's)")
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
	m := d.m

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
					m.Abandon()
				}
			}
		}
	}()
	return m.Run(ctx, hup, d.reload)
}

// daemon is the wiring of one `quietband run`: the configuration it was
// started with and its overrides (for SIGHUP), the log level, and the
// monitor (metrics/monitor) that does the work.
type daemon struct {
	cfg     *runConfig
	cfgPath string
	over    runOverrides
	log     *slog.Logger
	level   *slog.LevelVar
	m       *monitor.Monitor
}

// newDaemon makes the diagnostic logger (its level changeable on SIGHUP)
// and the monitor for cfg.
func newDaemon(cfg *runConfig, cfgPath string, over runOverrides, logOut io.Writer) (*daemon, error) {
	lv, err := parseLevel(cfg.LogLevel)
	if err != nil {
		return nil, err
	}
	level := new(slog.LevelVar)
	level.Set(lv)
	opts := &slog.HandlerOptions{Level: level} // a SIGHUP may change it
	h := slog.Handler(slog.NewTextHandler(logOut, opts))
	if cfg.LogFormat == "json" {
		h = slog.NewJSONHandler(logOut, opts)
	}
	d := &daemon{cfg: cfg, cfgPath: cfgPath, over: over, log: slog.New(h), level: level}
	d.m, err = monitor.New(cfg.monitor(), d.log)
	if err != nil {
		return nil, err
	}
	return d, nil
}

// reload re-reads the configuration on SIGHUP for the monitor: the log
// level changes at once, the settings read per capture follow the file
// (monitor.Monitor.Run), and a change to any other needs a restart, which
// is logged.
func (d *daemon) reload() (monitor.Config, error) {
	cfg, err := loadRunConfig(d.cfgPath, d.over)
	if err != nil {
		return monitor.Config{}, err
	}
	if lv, err := parseLevel(cfg.LogLevel); err == nil && lv != d.level.Level() {
		d.level.Set(lv)
		d.log.Info("quietband run: log level changed", "level", cfg.LogLevel)
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
	return keep.monitor(), nil
}
