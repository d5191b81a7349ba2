package main

import (
	"errors"
	"fmt"
	"io"
	"log/slog"
	"math"
	"net"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"time"

	"go.yaml.in/yaml/v3"

	"quietband/detect"
	"quietband/ingest"
	"quietband/metrics"
	"quietband/metrics/monitor"
)

// runConfig is the daemon's configuration file (YAML; deploy/config.example.yaml
// documents every key). Every value has a default; unknown keys are errors.
type runConfig struct {
	Inputs             []inputConfig   `yaml:"inputs"`
	Log                logConfig       `yaml:"log"`
	StateDir           string          `yaml:"state_dir"`
	Listen             string          `yaml:"listen"`
	WebConfigFile      string          `yaml:"web_config_file"`
	QuarantineDir      string          `yaml:"quarantine_dir"`
	Retention          retentionConfig `yaml:"retention"`
	QueueSize          int             `yaml:"queue_size"`
	RescanInterval     time.Duration   `yaml:"rescan_interval"`
	FallingBehindAfter time.Duration   `yaml:"falling_behind_after"`
	Notify             string          `yaml:"notify"`
	Detect             detect.Config   `yaml:"detect"`
	Satellites         *bool           `yaml:"satellites"`
	LogLevel           string          `yaml:"log_level"`
	LogFormat          string          `yaml:"log_format"`
	Metrics            metricsConfig   `yaml:"metrics"`
}

// inputConfig is one watched folder. The raw-file keys (format,
// sample_rate, center_hz, if_hz, lo_side, pattern) have no defaults: a raw
// file whose rate is not given is quarantined with that reason, one
// without a centre is analysed with the centre unknown.
type inputConfig struct {
	Name       string   `yaml:"name"`
	Path       string   `yaml:"path"`
	Format     string   `yaml:"format"`
	SampleRate float64  `yaml:"sample_rate"`
	CenterHz   *float64 `yaml:"center_hz"`
	IFHz       float64  `yaml:"if_hz"`
	LOSide     string   `yaml:"lo_side"`
	Pattern    string   `yaml:"pattern"`
	// Spectrum is the orientation of the input's captures, raw and SigMF:
	// auto (the default: decided from the satellites), upright, or
	// inverted (I and Q swapped: conjugated before analysis).
	Spectrum string        `yaml:"spectrum"`
	Settle   time.Duration `yaml:"settle"`
	// MetadataWait is how long half of a SigMF pair waits for the other
	// half before it is recorded as quarantined (never moved away; the
	// pair is analysed when it is whole). 0: ingest.DefaultOrphanAfter.
	MetadataWait time.Duration `yaml:"metadata_wait"`
}

type logConfig struct {
	Path     string `yaml:"path"`
	MaxBytes int64  `yaml:"max_bytes"`
	// AnchorEvery is how many records pass between two anchors (the
	// chain head logged for an auditor to keep); nil: the default, 0: none.
	AnchorEvery *uint64 `yaml:"anchor_every"`
}

type retentionConfig struct {
	Days   int    `yaml:"days"`
	Action string `yaml:"action"`
	Dir    string `yaml:"dir"`
}

type metricsConfig struct {
	GoCollector bool `yaml:"go_collector"`
}

// Defaults of the configuration.
const (
	defaultStateDir       = "quietband-state"
	defaultInputPath      = "captures"
	detectCheckRate       = 4e6 // the rate at which the detect section is checked when no input states one
	defaultMaxLogBytes    = 128 << 20
	defaultFallingBehind  = 5 * time.Minute
	defaultLogLevel       = "info"
	defaultLogFormat      = "text"
	defaultRetentionVerb  = "delete"
	eventLogFileName      = "events.jsonl"
	maxInputNameLen       = 64
	notifyAutomaticChoice = "auto"
)

var inputNamePattern = regexp.MustCompile(`^[A-Za-z0-9_.-]+$`)

// runOverrides are the command-line settings that override the file.
type runOverrides struct {
	watch    []string
	raw      ingest.RawSettings
	log      string
	state    string
	listen   string
	webCfg   string
	logLevel string
}

// loadRunConfig reads the file at path ("" for none), applies the
// overrides, fills defaults and checks every value.
func loadRunConfig(path string, o runOverrides) (*runConfig, error) {
	var cfg runConfig
	if path != "" {
		f, err := os.Open(path)
		if err != nil {
			return nil, err
		}
		err = decodeRunConfig(f, &cfg)
		f.Close()
		if err != nil {
			return nil, fmt.Errorf("%s: %w", path, err)
		}
	}
	if len(o.watch) > 0 {
		cfg.Inputs = nil
		for _, dir := range o.watch {
			in := inputConfig{Path: dir, SampleRate: o.raw.SampleRate, IFHz: o.raw.IFHz, Pattern: o.raw.Pattern}
			c := o.raw.CenterHz
			if !o.raw.HasCenter {
				c = 0
			}
			in.CenterHz = &c
			if o.raw.Format != ingest.FormatUnknown {
				in.Format = o.raw.Format.String()
			}
			if o.raw.LOSide != ingest.LOSideUnknown {
				in.LOSide = o.raw.LOSide.String()
			}
			if o.raw.Spectrum != ingest.OrientationAuto {
				in.Spectrum = o.raw.Spectrum.String()
			}
			cfg.Inputs = append(cfg.Inputs, in)
		}
	}
	for dst, v := range map[*string]string{&cfg.Log.Path: o.log, &cfg.StateDir: o.state, &cfg.Listen: o.listen,
		&cfg.WebConfigFile: o.webCfg, &cfg.LogLevel: o.logLevel} {
		if v != "" {
			*dst = v
		}
	}
	if err := cfg.fill(); err != nil {
		if path != "" {
			return nil, fmt.Errorf("%s: %w", path, err)
		}
		return nil, err
	}
	return &cfg, nil
}

// decodeRunConfig decodes YAML strictly: an unknown key is an error that
// names it. An empty document leaves every default.
func decodeRunConfig(r io.Reader, cfg *runConfig) error {
	dec := yaml.NewDecoder(r)
	dec.KnownFields(true)
	if err := dec.Decode(cfg); err != nil && !errors.Is(err, io.EOF) {
		// "field x not found in type main.inputConfig" → unknown key "x";
		// a duration without a unit asks for one (issue 18: settle: 2).
		msg := unknownField.ReplaceAllString(err.Error(), `unknown key "$1"`)
		msg = unitlessDuration.ReplaceAllString(msg, "$1 is a duration without a unit: write it with one, e.g. ${1}s (units: ms, s, m, h)")
		msg = badDuration.ReplaceAllString(msg, "$1 is not a duration: write it like 500ms, 2s, 5m or 1h")
		return errors.New(msg)
	}
	return nil
}

var (
	unknownField     = regexp.MustCompile(`field (\S+) not found in type \S+`)
	unitlessDuration = regexp.MustCompile("cannot unmarshal !!(?:int|float) `([^`]*)` into time.Duration")
	badDuration      = regexp.MustCompile("cannot unmarshal !!\\w+ `([^`]*)` into time.Duration")
)

// fill sets defaults and checks the values.
func (c *runConfig) fill() error {
	if c.StateDir == "" {
		c.StateDir = defaultStateDir
	}
	if c.Log.Path == "" {
		c.Log.Path = filepath.Join(c.StateDir, eventLogFileName)
	}
	if c.Log.MaxBytes == 0 {
		c.Log.MaxBytes = defaultMaxLogBytes
	}
	if c.Log.MaxBytes < 0 {
		return fmt.Errorf("log.max_bytes %d must be positive", c.Log.MaxBytes)
	}
	if c.Listen == "" {
		c.Listen = metrics.DefaultListen
	}
	if _, _, err := net.SplitHostPort(c.Listen); err != nil {
		return fmt.Errorf("listen %q: want host:port (e.g. %s, or :7461 for every interface): %w", c.Listen, metrics.DefaultListen, err)
	}
	if c.QueueSize == 0 {
		c.QueueSize = ingest.DefaultQueueSize
	}
	if c.QueueSize < 1 {
		return fmt.Errorf("queue_size %d must be at least 1", c.QueueSize)
	}
	if c.RescanInterval == 0 {
		c.RescanInterval = ingest.DefaultRescanInterval
	}
	if c.RescanInterval < 0 {
		return fmt.Errorf("rescan_interval %v must be positive", c.RescanInterval)
	}
	if c.FallingBehindAfter == 0 {
		c.FallingBehindAfter = defaultFallingBehind
	}
	if c.FallingBehindAfter < 0 {
		return fmt.Errorf("falling_behind_after %v must be positive", c.FallingBehindAfter)
	}
	switch c.Notify {
	case "", notifyAutomaticChoice:
		c.Notify = notifyAutomaticChoice
	case ingest.NotifyInotify, ingest.NotifyFsnotify, ingest.NotifyPoll:
	default:
		return fmt.Errorf("notify %q: use auto, inotify, fsnotify or poll", c.Notify)
	}
	if c.Satellites == nil {
		on := true
		c.Satellites = &on
	}
	if c.LogLevel == "" {
		c.LogLevel = defaultLogLevel
	}
	if _, err := parseLevel(c.LogLevel); err != nil {
		return err
	}
	switch c.LogFormat {
	case "":
		c.LogFormat = defaultLogFormat
	case "text", "json":
	default:
		return fmt.Errorf("log_format %q: use text or json", c.LogFormat)
	}

	if len(c.Inputs) == 0 {
		c.Inputs = []inputConfig{{Path: defaultInputPath}}
	}
	names := map[string]bool{}
	for i := range c.Inputs {
		in := &c.Inputs[i]
		if in.Path == "" {
			return fmt.Errorf("inputs[%d]: path is missing", i)
		}
		if in.Name == "" {
			in.Name = inputNameFor(in.Path)
			for n := 2; names[in.Name]; n++ {
				in.Name = fmt.Sprintf("%s-%d", inputNameFor(in.Path), n)
			}
		}
		if len(in.Name) > maxInputNameLen || !inputNamePattern.MatchString(in.Name) {
			return fmt.Errorf("inputs[%d]: name %q: use up to %d letters, digits, '_', '.' or '-' (it becomes a metric label)", i, in.Name, maxInputNameLen)
		}
		if names[in.Name] {
			return fmt.Errorf("inputs[%d]: name %q is used twice", i, in.Name)
		}
		names[in.Name] = true
		if err := in.checkRaw(); err != nil {
			return fmt.Errorf("inputs[%d] (%s): %w", i, in.Name, err)
		}
		if in.Settle == 0 {
			in.Settle = ingest.DefaultSettle
		}
		if in.Settle < 0 {
			return fmt.Errorf("inputs[%d] (%s): settle %v must be positive", i, in.Name, in.Settle)
		}
		if in.MetadataWait == 0 {
			in.MetadataWait = ingest.DefaultOrphanAfter
		}
		if in.MetadataWait < 0 {
			return fmt.Errorf("inputs[%d] (%s): metadata_wait %v must be positive", i, in.Name, in.MetadataWait)
		}
		if fs := in.analysedRate(); fs > 0 {
			if err := c.Detect.Defaults(fs).Validate(); err != nil {
				return fmt.Errorf("detect (for input %s at %g samples/s): %w", in.Name, fs, err)
			}
		}
	}
	if err := c.Detect.Defaults(detectCheckRate).Validate(); err != nil {
		return fmt.Errorf("detect: %w", err)
	}
	inside := func(what, p string) error {
		for _, in := range c.Inputs {
			// Links resolved first: a link into a watched folder is in it.
			if monitor.Within(p, in.Path) {
				return fmt.Errorf("%s %s lies inside the watched folder of input %s (%s): files moved there would be found again", what, p, in.Name, in.Path)
			}
		}
		return nil
	}
	if c.QuarantineDir != "" {
		if err := inside("quarantine_dir", c.QuarantineDir); err != nil {
			return err
		}
	}
	if c.Retention.Days < 0 {
		return fmt.Errorf("retention.days %d must be 0 (keep captures) or more", c.Retention.Days)
	}
	switch c.Retention.Action {
	case "":
		c.Retention.Action = defaultRetentionVerb
	case "delete", "move":
	default:
		return fmt.Errorf("retention.action %q: use delete or move", c.Retention.Action)
	}
	if c.Retention.Days > 0 && c.Retention.Action == "move" {
		if c.Retention.Dir == "" {
			return errors.New("retention.action move needs retention.dir")
		}
		if err := inside("retention.dir", c.Retention.Dir); err != nil {
			return err
		}
	}
	for _, p := range []string{c.StateDir, c.Log.Path} {
		if err := inside("state_dir/log.path", p); err != nil {
			return err
		}
	}
	return nil
}

// parseLevel parses a log level name (debug, info, warn, error).
func parseLevel(s string) (slog.Level, error) {
	var lv slog.Level
	if err := lv.UnmarshalText([]byte(s)); err != nil {
		return lv, fmt.Errorf("log_level %q: use debug, info, warn or error", s)
	}
	return lv, nil
}

// inputNameFor derives an input name from a folder: its base name with
// characters outside the label alphabet replaced by '_'.
func inputNameFor(path string) string {
	base := filepath.Base(filepath.Clean(path))
	var b strings.Builder
	for _, r := range base {
		switch {
		case r >= 'a' && r <= 'z', r >= 'A' && r <= 'Z', r >= '0' && r <= '9', r == '_', r == '.', r == '-':
			b.WriteRune(r)
		default:
			b.WriteByte('_')
		}
	}
	s := b.String()
	if s == "" || s == "." || s == ".." || s == "/" || s == "_" {
		s = "input"
	}
	if len(s) > maxInputNameLen {
		s = s[:maxInputNameLen]
	}
	return s
}

// checkRaw checks the raw-file keys of an input: a known format, a rate
// in range when given, an IF and LO side that a real format can use, a
// valid pattern.
func (in inputConfig) checkRaw() error {
	var f ingest.Format
	if in.Format != "" {
		var err error
		if f, err = ingest.ParseFormat(in.Format); err != nil {
			return fmt.Errorf("format: %w", err)
		}
	}
	if in.SampleRate != 0 && !(in.SampleRate > 0 && in.SampleRate <= ingest.MaxSampleRate) {
		return fmt.Errorf("sample_rate %g must be in (0, %g] (or absent: raw files are then quarantined for want of it)", in.SampleRate, float64(ingest.MaxSampleRate))
	}
	if in.CenterHz != nil && (math.IsNaN(*in.CenterHz) || math.IsInf(*in.CenterHz, 0)) {
		return fmt.Errorf("center_hz %g is not a frequency", *in.CenterHz)
	}
	if in.IFHz < 0 || math.IsNaN(in.IFHz) || math.IsInf(in.IFHz, 0) {
		return fmt.Errorf("if_hz %g must be a positive number of Hz", in.IFHz)
	}
	side := ingest.LOSideUnknown
	if in.LOSide != "" {
		var err error
		if side, err = ingest.ParseLOSide(in.LOSide); err != nil {
			return fmt.Errorf("lo_side: %w", err)
		}
	}
	if in.Pattern != "" {
		if _, err := filepath.Match(in.Pattern, ""); err != nil {
			return fmt.Errorf("pattern %q: %w", in.Pattern, err)
		}
	}
	if _, err := ingest.ParseOrientation(in.Spectrum); err != nil {
		return err
	}
	if f.IsReal() && in.SampleRate > 0 {
		if err := (ingest.IFConversion{IFHz: in.IFHz, Side: side}).Check(in.SampleRate); err != nil {
			return fmt.Errorf("format %s: %w", f, err)
		}
	}
	return nil
}

// analysedRate is the rate the detectors see for the input's raw files:
// half the file's for a real format; 0 when not given.
func (in inputConfig) analysedRate() float64 {
	if f, err := ingest.ParseFormat(in.Format); err == nil && f.IsReal() {
		return in.SampleRate / 2
	}
	return in.SampleRate
}

// rawSettings are the raw-file settings of an input.
func (in inputConfig) rawSettings() ingest.RawSettings {
	s := ingest.RawSettings{SampleRate: in.SampleRate, IFHz: in.IFHz, Pattern: in.Pattern}
	if in.CenterHz != nil && *in.CenterHz != 0 {
		s.CenterHz, s.HasCenter = *in.CenterHz, true
	}
	if in.Format != "" {
		s.Format, _ = ingest.ParseFormat(in.Format)
	}
	if in.LOSide != "" {
		s.LOSide, _ = ingest.ParseLOSide(in.LOSide)
	}
	s.Spectrum, _ = ingest.ParseOrientation(in.Spectrum)
	return s
}

// sameInput reports whether two inputs watch the same folder the same way
// (a change needs a restart).
func sameInput(a, b inputConfig) bool {
	return a.Name == b.Name && a.Path == b.Path && a.Settle == b.Settle && a.MetadataWait == b.MetadataWait && a.rawSettings() == b.rawSettings()
}

// notify is the watcher's event source for the configuration.
func (c *runConfig) notify() string {
	if c.Notify == notifyAutomaticChoice {
		return ingest.NotifyAuto
	}
	return c.Notify
}

// monitor is the configuration as the monitor takes it (defaults filled
// in by fill).
func (c *runConfig) monitor() monitor.Config {
	m := monitor.Config{LogPath: c.Log.Path, LogMaxBytes: c.Log.MaxBytes, AnchorEvery: monitor.DefaultAnchorEvery,
		StateDir: c.StateDir, Listen: c.Listen, WebConfigFile: c.WebConfigFile, QuarantineDir: c.QuarantineDir,
		Retention: monitor.Retention{Days: c.Retention.Days, Action: c.Retention.Action, Dir: c.Retention.Dir},
		QueueSize: c.QueueSize, RescanInterval: c.RescanInterval, Notify: c.notify(), FallingBehindAfter: c.FallingBehindAfter,
		Detect: c.Detect, Satellites: *c.Satellites, GoCollector: c.Metrics.GoCollector}
	if c.Log.AnchorEvery != nil {
		m.AnchorEvery = *c.Log.AnchorEvery
	}
	for _, in := range c.Inputs {
		m.Inputs = append(m.Inputs, monitor.Input{Name: in.Name, Path: in.Path, Raw: in.rawSettings(), Settle: in.Settle, MetadataWait: in.MetadataWait})
	}
	return m
}
