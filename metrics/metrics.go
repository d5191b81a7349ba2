package metrics

import (
	"runtime"
	"runtime/debug"
	"sync"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/collectors"

	"quietband/detect"
)

// Namespace is the prefix of every metric name.
const Namespace = "quietband"

// Capture results, the values of the result label.
const (
	ResultOK          = "ok"
	ResultQuarantined = "quarantined"
)

// Sources are the live values read at each scrape. Nil functions leave
// their metric out.
type Sources struct {
	// QueueDepth is the number of captures found complete and waiting for
	// analysis.
	QueueDepth func() int
	// EventLogLastSeq is the seq of the event log's last record.
	EventLogLastSeq func() uint64
	// WatchRescans and WatchOverflows count the watcher's full rescans
	// and lost-event overflows.
	WatchRescans, WatchOverflows func() uint64
	// FolderReadable tells whether an input's watched folder exists and
	// can be read (watched_folder_readable).
	FolderReadable func(input string) bool
	// EventLogDamaged counts the event log's files set aside because
	// they failed verification (eventlog_damaged_files).
	EventLogDamaged func() int
	// LedgerWritable tells whether the ledger's file can be written
	// (ledger_writable); while not, the daemon runs from the event log.
	LedgerWritable func() bool
	// CaptureRetries counts captures scheduled to be tried again after a
	// transient failure (capture_retries_total).
	CaptureRetries func() uint64
	// EventLogOutsideChanges counts the event log's active file found
	// moved, deleted, replaced or cut outside the daemon
	// (eventlog_outside_changes_total).
	EventLogOutsideChanges func() uint64
}

// Options configure a Set.
type Options struct {
	// Inputs are the configured input names; their per-input series exist
	// from the start (interference gauges at 0), so alerts and dashboards
	// see them before the first capture.
	Inputs []string
	// GoCollector adds the Go runtime and process collectors.
	GoCollector bool
	Sources     Sources
}

// Set is the daemon's metrics, registered on a registry of its own. Its
// methods are safe for concurrent use.
type Set struct {
	reg *prometheus.Registry

	active      *prometheus.GaugeVec // input, class
	knownActive *prometheus.GaugeVec // input, class
	jn          *prometheus.GaugeVec // input, class
	power       *prometheus.GaugeVec // input
	noiseFloor  *prometheus.GaugeVec
	agc         *prometheus.GaugeVec
	overBase    *prometheus.GaugeVec
	skMax       *prometheus.GaugeVec
	clip        *prometheus.GaugeVec
	cn0         *prometheus.GaugeVec // input, prn
	cn0Mean     *prometheus.GaugeVec
	satellites  *prometheus.GaugeVec
	startTime   *prometheus.GaugeVec
	// Spoofing: per input and kind, the latest capture's spoofing event.
	spoofActive *prometheus.GaugeVec // input, kind
	spoofPRNs   *prometheus.GaugeVec // input
	spoofOver   *prometheus.GaugeVec // input
	spoofDelay  *prometheus.GaugeVec // input
	// A C/N0 drop: a statement about the satellites, with or without a
	// cause, apart from interference_active.
	cn0DropActive *prometheus.GaugeVec   // input, explained_by
	cn0DropDB     *prometheus.GaugeVec   // input
	events        *prometheus.CounterVec // class
	inputEvents   *prometheus.CounterVec // input, class
	captures      *prometheus.CounterVec // result
	samples       prometheus.Counter
	bytes         prometheus.Counter
	processing    prometheus.Histogram
	realtime      prometheus.Gauge
	lastCapture   prometheus.Gauge

	logErrors     prometheus.Counter
	logWritable   prometheus.Gauge
	fallingBehind prometheus.Gauge
	watcherUp     prometheus.Gauge

	progress *progress // the capture in progress, per input (progress.go)
	receiver *receiver // the recorder's fault, clock, orientation (receiver.go)

	mu     sync.Mutex
	prns   map[string]map[int]bool // PRNs exposed per input
	lastAt time.Time               // lastCapture's value
}

// New makes a Set.
func New(opt Options) *Set {
	s := &Set{reg: prometheus.NewRegistry(), prns: map[string]map[int]bool{}, progress: newProgress(opt.Inputs)}
	gauge := func(name, help string, labels ...string) *prometheus.GaugeVec {
		g := prometheus.NewGaugeVec(prometheus.GaugeOpts{Namespace: Namespace, Name: name, Help: help}, labels)
		s.reg.MustRegister(g)
		return g
	}
	s.active = gauge("interference_active",
		"1 while an interference of the class is open at the end of the input's latest analysed capture, else 0. A C/N0 drop is no interference: its series (class cn0_drop) stays 0, see cn0_drop_active.", "input", "class")
	s.knownActive = gauge("known_emitter_active",
		"1 while an emitter the site's configuration lists as known (detect known_emitters) is open at the end of the input's latest analysed capture, else 0; such events raise no interference_active.", "input", "class")
	s.jn = gauge("jn_db",
		"J/N of the open interference of the class (largest if several): interference over noise power in the capture bandwidth, in dB; absent while none is open.", "input", "class")
	s.power = gauge("power_dbfs", "Mean power of the latest capture, dB relative to full scale.", "input")
	s.noiseFloor = gauge("noise_floor_dbfs", "Noise floor of the latest capture (robust to narrow interference), dB relative to full scale.", "input")
	s.agc = gauge("agc_deviation_db", "In-band power over baseline: the latest capture's total in-band power over the site baseline's, in dB (0 while the baseline is learned); kept for readers, the same as power_over_baseline_db.", "input")
	s.overBase = gauge("power_over_baseline_db", "In-band power over baseline: the latest capture's total in-band power over the site baseline's, in dB, what a receiver's AGC follows; absent while no baseline power is known.", "input")
	s.skMax = gauge("sk_max", "Largest spectral kurtosis estimate over the bins and blocks of the latest capture (1 for Gaussian noise).", "input")
	s.clip = gauge("clip_ratio", "Fraction of the latest capture's samples at a saturated code.", "input")
	s.cn0 = gauge("cn0_dbhz", "C/N0 of the satellite in the latest capture, dB-Hz (absent when not acquired).", "input", "prn")
	s.cn0Mean = gauge("cn0_mean_dbhz", "Mean of the C/N0 values in dB-Hz of the (up to) four strongest satellites of the latest capture.", "input")
	s.satellites = gauge("satellites_acquired", "Satellites acquired in the latest capture.", "input")
	s.startTime = gauge("capture_start_timestamp_seconds", "Start time of the latest analysed capture (its first sample), Unix seconds.", "input")
	s.cn0DropActive = gauge("cn0_drop_active",
		"1 while the input's latest analysed capture shows the satellites' C/N0 dropped below the site's baseline, else 0; explained_by names the class of the interference that explains the drop, or none (obstruction, antenna, cable: satellite signal degraded).", "input", "explained_by")
	s.cn0DropDB = gauge("cn0_drop_db",
		"C/N0 drop of the input's latest analysed capture below the site's baseline, dB (mean over the satellites); absent while none.", "input")
	s.spoofActive = gauge("spoofing_active",
		"1 while the input's latest analysed capture has a spoofing event of the kind (counterfeit: false signals; meaconing: the band re-radiated), else 0.", "input", "kind")
	s.spoofPRNs = gauge("spoofing_prns", "Satellites (PRNs) named by the spoofing event of the input's latest analysed capture; 0 when it has none.", "input")
	s.spoofOver = gauge("spoofing_power_over_authentic_db",
		"Power of the false signals over the authentic ones in the input's latest spoofing capture, dB (mean over its PRNs); absent while none.", "input")
	s.spoofDelay = gauge("spoofing_delay_seconds",
		"Delay of a meacon's re-radiated copies after the authentic signals in the input's latest capture, seconds; absent unless meaconing.", "input")

	counter := func(name, help string, labels ...string) *prometheus.CounterVec {
		c := prometheus.NewCounterVec(prometheus.CounterOpts{Namespace: Namespace, Name: name, Help: help}, labels)
		s.reg.MustRegister(c)
		return c
	}
	s.events = counter("events_total", "Events found in analysed captures, by class (interference, spoofing, and cn0_drop: a C/N0 drop, with or without interference).", "class")
	s.inputEvents = counter("events_by_input_total", "Events found in analysed captures, by input and class (events_total without the input, kept beside it for its readers; the alerts and the dashboard use this one).", "input", "class")
	s.captures = counter("captures_total", "Captures recorded in the event log, by result (ok or quarantined).", "result")
	s.samples = counter("samples_total", "Complex samples analysed.").WithLabelValues()
	s.bytes = counter("bytes_total", "Bytes of sample data analysed.").WithLabelValues()
	s.logErrors = counter("eventlog_write_errors_total", "Failed appends to the event log (disk full, I/O error).").WithLabelValues()

	s.processing = prometheus.NewHistogram(prometheus.HistogramOpts{Namespace: Namespace, Name: "processing_seconds",
		Help:    "Time to analyse one capture.",
		Buckets: []float64{0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5, 10, 30, 60, 120}})
	s.reg.MustRegister(s.processing)
	s.realtime = gauge("realtime_factor", "Signal duration of the latest capture over the time taken to analyse it (above 1: faster than real time).").WithLabelValues()
	s.lastCapture = gauge("last_capture_timestamp_seconds", "When the latest capture was analysed, Unix seconds (wall clock).").WithLabelValues()
	s.logWritable = gauge("eventlog_writable", "1 while the event log accepts appends, 0 after a failed write until it is reopened.").WithLabelValues()
	s.fallingBehind = gauge("falling_behind", "1 while captures wait longer for analysis than the configured limit, else 0.").WithLabelValues()
	s.watcherUp = gauge("watcher_running", "1 while the folder watcher runs.").WithLabelValues()
	s.logWritable.Set(1)

	src := opt.Sources
	if src.QueueDepth != nil {
		s.reg.MustRegister(prometheus.NewGaugeFunc(prometheus.GaugeOpts{Namespace: Namespace, Name: "queue_depth",
			Help: "Captures found complete and waiting for analysis."}, func() float64 { return float64(src.QueueDepth()) }))
	}
	if src.EventLogLastSeq != nil {
		s.reg.MustRegister(prometheus.NewGaugeFunc(prometheus.GaugeOpts{Namespace: Namespace, Name: "eventlog_last_seq",
			Help: "Seq of the last record in the event log; compare with the log to detect a rewritten tail."},
			func() float64 { return float64(src.EventLogLastSeq()) }))
	}
	if src.WatchRescans != nil {
		s.reg.MustRegister(prometheus.NewCounterFunc(prometheus.CounterOpts{Namespace: Namespace, Name: "watcher_rescans_total",
			Help: "Full rescans of the watched folders (start, periodic, after lost events)."},
			func() float64 { return float64(src.WatchRescans()) }))
	}
	if src.WatchOverflows != nil {
		s.reg.MustRegister(prometheus.NewCounterFunc(prometheus.CounterOpts{Namespace: Namespace, Name: "watcher_overflows_total",
			Help: "Times the kernel's file-event queue overflowed (events lost, rescan forced)."},
			func() float64 { return float64(src.WatchOverflows()) }))
	}

	if src.FolderReadable != nil {
		for _, in := range opt.Inputs {
			s.reg.MustRegister(prometheus.NewGaugeFunc(prometheus.GaugeOpts{Namespace: Namespace, Name: "watched_folder_readable",
				Help:        "1 while the input's watched folder exists and can be read, else 0 (the daemon is not ready then).",
				ConstLabels: prometheus.Labels{"input": in}}, func() float64 { return b2f(src.FolderReadable(in)) }))
		}
	}

	// Collectors of their own files (one each), registered in this list.
	for _, register := range []func(Options){s.registerDamaged, s.registerLedgerWritable, s.registerProgress,
		s.registerRetries, s.registerOutside, s.registerReceiver} {
		register(opt)
	}

	version, revision := buildVersion()
	info := gauge("build_info", "Build of the running quietband: always 1, the labels say which.", "version", "revision", "goversion")
	info.WithLabelValues(version, revision, runtime.Version()).Set(1)
	if opt.GoCollector {
		s.reg.MustRegister(collectors.NewGoCollector(), collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}))
	}

	for _, c := range detect.Classes {
		s.events.WithLabelValues(c)
	}
	s.captures.WithLabelValues(ResultOK)
	s.captures.WithLabelValues(ResultQuarantined)
	for _, in := range opt.Inputs {
		for _, c := range detect.Classes {
			s.inputEvents.WithLabelValues(in, c)
			s.active.WithLabelValues(in, c).Set(0)
			s.knownActive.WithLabelValues(in, c).Set(0)
		}
		for _, k := range SpoofingKinds {
			s.spoofActive.WithLabelValues(in, k).Set(0)
		}
		for _, c := range CN0DropCauses() {
			s.cn0DropActive.WithLabelValues(in, c).Set(0)
		}
		s.spoofPRNs.WithLabelValues(in).Set(0)
	}
	return s
}

// Registry is the Set's registry (for promhttp and tests).
func (s *Set) Registry() *prometheus.Registry { return s.reg }

// Version and Revision are stamped at build time with
// -ldflags "-X quietband/metrics.Version=v1.2.3 -X quietband/metrics.Revision=abc123";
// unset, Build reads what the Go toolchain recorded.
var Version, Revision string

// Build is the version and VCS revision the binary was built from: the
// stamped Version and Revision, else the module version and the
// vcs.revision (with "+dirty" for a modified tree) that the toolchain
// recorded; "devel" for a version a local build does not have, "unknown"
// for a revision it did not record (a build with -buildvcs=false, as CI's).
func Build() (version, revision string) {
	version, revision = Version, Revision
	bi, ok := debug.ReadBuildInfo()
	if version == "" {
		version = "devel"
		if ok && bi.Main.Version != "" && bi.Main.Version != "(devel)" {
			version = bi.Main.Version
		}
	}
	if revision == "" {
		revision = "unknown"
		if ok {
			dirty := false
			for _, st := range bi.Settings {
				switch {
				case st.Key == "vcs.revision" && st.Value != "":
					revision = st.Value
				case st.Key == "vcs.modified" && st.Value == "true":
					dirty = true
				}
			}
			if dirty && revision != "unknown" {
				revision += "+dirty"
			}
		}
	}
	return version, revision
}

// buildVersion is Build, for build_info.
func buildVersion() (version, revision string) { return Build() }

// EventLogWriteFailed counts a failed append and marks the log unwritable.
func (s *Set) EventLogWriteFailed() {
	s.logErrors.Inc()
	s.logWritable.Set(0)
}

// SetEventLogWritable says whether the event log accepts appends.
func (s *Set) SetEventLogWritable(ok bool) { s.logWritable.Set(b2f(ok)) }

// SetFallingBehind says whether analysis is falling behind.
func (s *Set) SetFallingBehind(behind bool) { s.fallingBehind.Set(b2f(behind)) }

// SetWatcherRunning says whether the folder watcher runs.
func (s *Set) SetWatcherRunning(up bool) { s.watcherUp.Set(b2f(up)) }

func b2f(b bool) float64 {
	if b {
		return 1
	}
	return 0
}
