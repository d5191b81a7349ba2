package metrics

import (
	"fmt"
	"math"
	"strings"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/testutil"

	"quietband/detect"
	"quietband/metrics/eventlog"
)

func ptr[T any](v T) *T { return &v }

// okRecord is a capture record of 100 000 samples with the given stats.
func okRecord(name string, sats ...float64) detect.CaptureRecord {
	st := &detect.Stats{PowerDBFS: -29.5, NoiseFloorDBFS: -66.25, AGCDeviationDB: 0.75, SKMax: 1.5, ClipFraction: 0.001,
		Baseline: "learned", Satellites: []detect.Satellite{}}
	for i, c := range sats {
		st.Satellites = append(st.Satellites, detect.Satellite{System: "GPS", PRN: i*4 + 3, CN0DBHz: c})
	}
	return detect.CaptureRecord{Capture: name, SHA256: strings.Repeat("ab", 32), Format: "ci8", SampleRate: 1e6,
		Start: &detect.Time{Time: time.Date(2026, 5, 1, 6, 0, 0, 0, time.UTC)}, Samples: 100000,
		Status: detect.StatusOK, Stats: st}
}

// event is an event that ended before its capture did; openEvent one the
// pipeline found still present at the end (detect.Event.OpenAtEnd).
func event(class string, start, count int64, jn float64) detect.Event {
	return detect.Event{ID: fmt.Sprintf("%s-%d", class, start), Class: class, SampleStart: start, SampleCount: count, JNDB: jn}
}

func openEvent(class string, start, count int64, jn float64) detect.Event {
	e := event(class, start, count, jn)
	e.OpenAtEnd = true
	return e
}

const block = 16384

func newTestSet(t *testing.T, goCollector bool) *Set {
	t.Helper()
	return New(Options{Inputs: []string{"roof", "mast"}, GoCollector: goCollector, Sources: Sources{
		QueueDepth:      func() int { return 3 },
		EventLogLastSeq: func() uint64 { return 42 },
		WatchRescans:    func() uint64 { return 2 },
		WatchOverflows:  func() uint64 { return 0 },
	}})
}

// observeSequence feeds the captures of the exposition test: an open cw
// tone and a sweep that stopped before the end, then a clean capture on the
// same input, and a quarantined capture.
func observeSequence(s *Set) {
	at := time.Unix(1780000000, 0)
	s.ObserveCapture(Capture{Input: "roof", Record: okRecord("a.ci8", 46, 44, 42, 45, 40),
		Events: []detect.Event{
			openEvent(detect.ClassCW, 0, 100000, 12.5),               // whole capture: open at the end
			openEvent(detect.ClassCW, 60000, 100000-60000-block, 14), // seen in the last block: open
			event(detect.ClassSwept, 1000, 100000-1000-block-1, 9),   // stopped before it: closed
		},
		Bytes: 200000, Duration: 125 * time.Millisecond, Elapsed: 15625 * time.Microsecond,
		Satellites: true, At: at})
	s.ObserveCapture(Capture{Input: "mast", Record: okRecord("b.ci8", 41),
		Events: []detect.Event{openEvent(detect.ClassWidebandNoise, 0, 100000, 6)},
		Bytes:  200000, Duration: 125 * time.Millisecond, Elapsed: 62500 * time.Microsecond,
		Satellites: true, At: at.Add(time.Second)})
	s.ObserveCapture(Capture{Input: "mast", Record: okRecord("c.ci8", 39.5, 38),
		Bytes: 200000, Duration: 125 * time.Millisecond, Elapsed: 31250 * time.Microsecond,
		Satellites: true, At: at.Add(2 * time.Second)})
	s.ObserveCapture(Capture{Input: "mast", Record: detect.CaptureRecord{Capture: "bad.ci8", Status: detect.StatusQuarantined,
		Error: "bad.ci8: data file is empty (zero length)"}, At: at.Add(3 * time.Second)})
}

func TestLintClean(t *testing.T) {
	// promlint is the linter of `promtool check metrics` (client_golang
	// prometheus/testutil/promlint): names, units, _total, HELP, labels.
	for _, goc := range []bool{false, true} {
		t.Run(fmt.Sprintf("go_collector=%v", goc), func(t *testing.T) {
			s := newTestSet(t, goc)
			observeSequence(s)
			s.EventLogWriteFailed()
			problems, err := testutil.GatherAndLint(s.Registry())
			if err != nil {
				t.Fatal(err)
			}
			for _, p := range problems {
				t.Errorf("lint: %s: %s", p.Metric, p.Text)
			}
			n, err := testutil.GatherAndCount(s.Registry(), "go_goroutines")
			if err != nil {
				t.Fatal(err)
			}
			if want := map[bool]int{false: 0, true: 1}[goc]; n != want {
				t.Errorf("go_goroutines series: %d, want %d", n, want)
			}
		})
	}
}

func TestExposition(t *testing.T) {
	// Expected values in the Prometheus text exposition format 0.0.4,
	// worked out by hand from the records fed in (times chosen as binary
	// fractions so that sums are exact).
	s := newTestSet(t, false)
	observeSequence(s)
	classes := func(input string, active map[string]bool) string {
		var b strings.Builder
		for _, c := range detect.Classes {
			v := 0
			if active[c] {
				v = 1
			}
			fmt.Fprintf(&b, "quietband_interference_active{class=%q,input=%q} %d\n", c, input, v)
		}
		return b.String()
	}
	want := `
# HELP quietband_interference_active 1 while an interference of the class is open at the end of the input's latest analysed capture, else 0. A C/N0 drop is no interference: its series (class cn0_drop) stays 0, see cn0_drop_active.
# TYPE quietband_interference_active gauge
` + classes("mast", nil) + classes("roof", map[string]bool{"cw": true}) + `
# HELP quietband_jn_db J/N of the open interference of the class (largest if several): interference over noise power in the capture bandwidth, in dB; absent while none is open.
# TYPE quietband_jn_db gauge
quietband_jn_db{class="cw",input="roof"} 14
# HELP quietband_cn0_dbhz C/N0 of the satellite in the latest capture, dB-Hz (absent when not acquired).
# TYPE quietband_cn0_dbhz gauge
quietband_cn0_dbhz{input="mast",prn="3"} 39.5
quietband_cn0_dbhz{input="mast",prn="7"} 38
quietband_cn0_dbhz{input="roof",prn="11"} 42
quietband_cn0_dbhz{input="roof",prn="15"} 45
quietband_cn0_dbhz{input="roof",prn="19"} 40
quietband_cn0_dbhz{input="roof",prn="3"} 46
quietband_cn0_dbhz{input="roof",prn="7"} 44
# HELP quietband_cn0_mean_dbhz Mean of the C/N0 values in dB-Hz of the (up to) four strongest satellites of the latest capture.
# TYPE quietband_cn0_mean_dbhz gauge
quietband_cn0_mean_dbhz{input="mast"} 38.75
quietband_cn0_mean_dbhz{input="roof"} 44.25
# HELP quietband_satellites_acquired Satellites acquired in the latest capture.
# TYPE quietband_satellites_acquired gauge
quietband_satellites_acquired{input="mast"} 2
quietband_satellites_acquired{input="roof"} 5
# HELP quietband_captures_total Captures recorded in the event log, by result (ok or quarantined).
# TYPE quietband_captures_total counter
quietband_captures_total{result="ok"} 3
quietband_captures_total{result="quarantined"} 1
# HELP quietband_events_total Events found in analysed captures, by class (interference, spoofing, and cn0_drop: a C/N0 drop, with or without interference).
# TYPE quietband_events_total counter
quietband_events_total{class="cn0_drop"} 0
quietband_events_total{class="cw"} 2
quietband_events_total{class="narrowband_noise"} 0
quietband_events_total{class="pulsed"} 0
quietband_events_total{class="spoofing"} 0
quietband_events_total{class="swept"} 1
quietband_events_total{class="wideband_noise"} 1
# HELP quietband_samples_total Complex samples analysed.
# TYPE quietband_samples_total counter
quietband_samples_total 300000
# HELP quietband_bytes_total Bytes of sample data analysed.
# TYPE quietband_bytes_total counter
quietband_bytes_total 600000
# HELP quietband_realtime_factor Signal duration of the latest capture over the time taken to analyse it (above 1: faster than real time).
# TYPE quietband_realtime_factor gauge
quietband_realtime_factor 4
# HELP quietband_last_capture_timestamp_seconds When the latest capture was analysed, Unix seconds (wall clock).
# TYPE quietband_last_capture_timestamp_seconds gauge
quietband_last_capture_timestamp_seconds 1.780000002e+09
# HELP quietband_noise_floor_dbfs Noise floor of the latest capture (robust to narrow interference), dB relative to full scale.
# TYPE quietband_noise_floor_dbfs gauge
quietband_noise_floor_dbfs{input="mast"} -66.25
quietband_noise_floor_dbfs{input="roof"} -66.25
# HELP quietband_queue_depth Captures found complete and waiting for analysis.
# TYPE quietband_queue_depth gauge
quietband_queue_depth 3
# HELP quietband_eventlog_last_seq Seq of the last record in the event log; compare with the log to detect a rewritten tail.
# TYPE quietband_eventlog_last_seq gauge
quietband_eventlog_last_seq 42
# HELP quietband_processing_seconds Time to analyse one capture.
# TYPE quietband_processing_seconds histogram
quietband_processing_seconds_bucket{le="0.005"} 0
quietband_processing_seconds_bucket{le="0.01"} 0
quietband_processing_seconds_bucket{le="0.025"} 1
quietband_processing_seconds_bucket{le="0.05"} 2
quietband_processing_seconds_bucket{le="0.1"} 3
quietband_processing_seconds_bucket{le="0.25"} 3
quietband_processing_seconds_bucket{le="0.5"} 3
quietband_processing_seconds_bucket{le="1"} 3
quietband_processing_seconds_bucket{le="2.5"} 3
quietband_processing_seconds_bucket{le="5"} 3
quietband_processing_seconds_bucket{le="10"} 3
quietband_processing_seconds_bucket{le="30"} 3
quietband_processing_seconds_bucket{le="60"} 3
quietband_processing_seconds_bucket{le="120"} 3
quietband_processing_seconds_bucket{le="+Inf"} 3
quietband_processing_seconds_sum 0.109375
quietband_processing_seconds_count 3
`
	names := []string{"quietband_interference_active", "quietband_jn_db", "quietband_cn0_dbhz", "quietband_cn0_mean_dbhz",
		"quietband_satellites_acquired", "quietband_captures_total", "quietband_events_total", "quietband_samples_total",
		"quietband_bytes_total", "quietband_realtime_factor", "quietband_last_capture_timestamp_seconds",
		"quietband_noise_floor_dbfs", "quietband_queue_depth", "quietband_eventlog_last_seq", "quietband_processing_seconds"}
	if err := testutil.GatherAndCompare(s.Registry(), strings.NewReader(want), names...); err != nil {
		t.Error(err)
	}
	for _, name := range []string{"quietband_build_info", "quietband_agc_deviation_db", "quietband_sk_max",
		"quietband_eventlog_write_errors_total", "quietband_eventlog_writable", "quietband_falling_behind",
		"quietband_capture_start_timestamp_seconds", "quietband_power_dbfs", "quietband_clip_ratio",
		"quietband_watcher_rescans_total", "quietband_watcher_overflows_total", "quietband_watcher_running"} {
		if n, err := testutil.GatherAndCount(s.Registry(), name); err != nil || n == 0 {
			t.Errorf("%s: %d series (%v), want at least one", name, n, err)
		}
	}
}

func TestInterferenceFollowsCaptures(t *testing.T) {
	// The gauge follows the latest capture of the input: set while an event
	// reaches the last block, cleared by a capture without one, untouched
	// by a quarantined capture and by other inputs.
	s := newTestSet(t, false)
	active := func(input, class string) float64 {
		return testutil.ToFloat64(s.active.WithLabelValues(input, class))
	}
	steps := []struct {
		input  string
		events []detect.Event
		status string
		want   float64 // roof/pulsed afterwards
	}{
		{"roof", nil, detect.StatusOK, 0},
		{"roof", []detect.Event{openEvent(detect.ClassPulsed, 50000, 50000, 15)}, detect.StatusOK, 1},
		{"roof", nil, detect.StatusQuarantined, 1},
		{"mast", nil, detect.StatusOK, 1},
		{"roof", []detect.Event{event(detect.ClassPulsed, 0, 20000, 15)}, detect.StatusOK, 0}, // ended early
		{"roof", []detect.Event{openEvent(detect.ClassPulsed, 0, 100000, 15)}, detect.StatusOK, 1},
		{"roof", nil, detect.StatusOK, 0},
	}
	for i, st := range steps {
		rec := okRecord("x.ci8")
		rec.Status = st.status
		s.ObserveCapture(Capture{Input: st.input, Record: rec, Events: st.events, At: time.Now()})
		if got := active("roof", detect.ClassPulsed); got != st.want {
			t.Fatalf("step %d: roof pulsed active = %v, want %v", i, got, st.want)
		}
		n := testutil.CollectAndCount(s.jn)
		if want := int(st.want); n != want {
			t.Fatalf("step %d: %d jn_db series, want %d", i, n, want)
		}
	}
}

// TestSpoofingMetrics: the spoofing series follow the input's latest
// analysed capture (values worked out from the events fed in: a meacon
// 1.5345 chips late is 1.5345/1.023 MHz = 1.5 µs, IS-GPS-200's chip rate),
// are cleared by a capture without a spoofing event, and pass the linter.
func TestSpoofingMetrics(t *testing.T) {
	s := newTestSet(t, false)
	spoof := func(kind string, prns []int, over float64, delay *float64) detect.Event {
		e := openEvent(detect.ClassSpoofing, 0, 100000, over)
		e.Params.Kind, e.Params.PRNs, e.Params.PowerOverAuthenticDB, e.Params.DelayChips = kind, prns, &over, delay
		return e
	}
	obs := func(input string, evs ...detect.Event) {
		s.ObserveCapture(Capture{Input: input, Record: okRecord("x.ci8", 45), Events: evs, Satellites: true, At: time.Now()})
	}
	obs("roof", spoof("meaconing", []int{3, 7, 11}, 4, ptr(1.5345)))
	obs("mast", spoof("counterfeit", []int{1, 2, 3, 4, 5}, 6.5, nil))
	want := `
# HELP quietband_spoofing_active 1 while the input's latest analysed capture has a spoofing event of the kind (counterfeit: false signals; meaconing: the band re-radiated), else 0.
# TYPE quietband_spoofing_active gauge
quietband_spoofing_active{input="mast",kind="counterfeit"} 1
quietband_spoofing_active{input="mast",kind="meaconing"} 0
quietband_spoofing_active{input="roof",kind="counterfeit"} 0
quietband_spoofing_active{input="roof",kind="meaconing"} 1
# HELP quietband_spoofing_prns Satellites (PRNs) named by the spoofing event of the input's latest analysed capture; 0 when it has none.
# TYPE quietband_spoofing_prns gauge
quietband_spoofing_prns{input="mast"} 5
quietband_spoofing_prns{input="roof"} 3
# HELP quietband_spoofing_power_over_authentic_db Power of the false signals over the authentic ones in the input's latest spoofing capture, dB (mean over its PRNs); absent while none.
# TYPE quietband_spoofing_power_over_authentic_db gauge
quietband_spoofing_power_over_authentic_db{input="mast"} 6.5
quietband_spoofing_power_over_authentic_db{input="roof"} 4
# HELP quietband_spoofing_delay_seconds Delay of a meacon's re-radiated copies after the authentic signals in the input's latest capture, seconds; absent unless meaconing.
# TYPE quietband_spoofing_delay_seconds gauge
quietband_spoofing_delay_seconds{input="roof"} 1.5e-06
# HELP quietband_interference_active 1 while an interference of the class is open at the end of the input's latest analysed capture, else 0. A C/N0 drop is no interference: its series (class cn0_drop) stays 0, see cn0_drop_active.
# TYPE quietband_interference_active gauge
`
	var b strings.Builder
	b.WriteString(want)
	for _, in := range []string{"mast", "roof"} {
		for _, c := range detect.Classes {
			fmt.Fprintf(&b, "quietband_interference_active{class=%q,input=%q} %d\n", c, in, map[bool]int{true: 1}[c == detect.ClassSpoofing])
		}
	}
	names := []string{"quietband_spoofing_active", "quietband_spoofing_prns", "quietband_spoofing_power_over_authentic_db",
		"quietband_spoofing_delay_seconds", "quietband_interference_active"}
	if err := testutil.GatherAndCompare(s.Registry(), strings.NewReader(b.String()), names...); err != nil {
		t.Error(err)
	}
	if problems, err := testutil.GatherAndLint(s.Registry()); err != nil || len(problems) > 0 {
		t.Errorf("lint: %v %v", problems, err)
	}
	obs("roof")
	if got := testutil.ToFloat64(s.spoofActive.WithLabelValues("roof", "meaconing")); got != 0 {
		t.Errorf("roof meaconing active %v after a clean capture", got)
	}
	if n := testutil.CollectAndCount(s.spoofDelay); n != 0 {
		t.Errorf("%d delay series after the clean capture, want 0", n)
	}
	if got := testutil.ToFloat64(s.spoofPRNs.WithLabelValues("roof")); got != 0 {
		t.Errorf("roof spoofing PRNs %v after a clean capture", got)
	}
}

func TestSatellitesNotMeasured(t *testing.T) {
	// Without a GNSS meter an empty satellite list is no measurement: no
	// C/N0 or satellite series (else "0 satellites" would raise alerts).
	s := newTestSet(t, false)
	s.ObserveCapture(Capture{Input: "roof", Record: okRecord("a.ci8"), At: time.Now()})
	rec := okRecord("b.ci8", 44)
	rec.Stats.GNSSSkipped = "skipped: capture centre does not contain GPS L1"
	s.ObserveCapture(Capture{Input: "roof", Record: rec, Satellites: true, At: time.Now()})
	for _, name := range []string{"quietband_satellites_acquired", "quietband_cn0_dbhz", "quietband_cn0_mean_dbhz"} {
		if n, _ := testutil.GatherAndCount(s.Registry(), name); n != 0 {
			t.Errorf("%s: %d series, want none", name, n)
		}
	}
}

// TestCN0Mean: quietband_cn0_mean_dbhz is the arithmetic mean of the
// (up to) four largest C/N0 values of the latest capture (worked by hand),
// detect.StrongestMean with detect.Strongest, and absent without any.
func TestCN0Mean(t *testing.T) {
	cases := []struct {
		cn0  []float64
		want float64
		ok   bool
	}{
		{nil, 0, false},
		{[]float64{40}, 40, true},
		{[]float64{40, 30}, 35, true},
		{[]float64{46, 44, 42, 45, 40}, (46 + 45 + 44 + 42) / 4.0, true},
		{[]float64{30, 31, 32, 33, 50, 49}, (50 + 49 + 33 + 32) / 4.0, true},
	}
	s := newTestSet(t, false)
	for _, c := range cases {
		s.ObserveCapture(Capture{Input: "roof", Record: okRecord("a.ci8", c.cn0...), Satellites: true, At: time.Now()})
		n := testutil.CollectAndCount(s.cn0Mean)
		if !c.ok {
			if n != 0 {
				t.Errorf("%v: %d cn0_mean series, want none", c.cn0, n)
			}
			continue
		}
		if got := testutil.ToFloat64(s.cn0Mean.WithLabelValues("roof")); n != 1 || math.Abs(got-c.want) > 1e-12 {
			t.Errorf("%v: cn0_mean %v (%d series), want %v", c.cn0, got, n, c.want)
		}
	}
}

func TestRecent(t *testing.T) {
	r := NewRecent(3)
	var seq uint64
	add := func(kind string) {
		seq++
		r.Add(eventlog.Record{Seq: seq, Kind: kind, Line: fmt.Appendf(nil, `{"seq":%d}`, seq)})
	}
	for range 5 {
		add(eventlog.KindEvent)
		add(eventlog.KindCapture)
	}
	// Kept: events 5, 7, 9 and captures 6, 8, 10.
	seqs := func(recs []eventlog.Record) string {
		var s []string
		for _, rec := range recs {
			s = append(s, fmt.Sprint(rec.Seq))
		}
		return strings.Join(s, ",")
	}
	cases := []struct {
		since       uint64
		limit       int
		ev, cp      bool
		want        string
		description string
	}{
		{0, 10, true, false, "5,7,9", "events only, the last three"},
		{0, 10, false, true, "6,8,10", "captures only"},
		{0, 10, true, true, "5,6,7,8,9,10", "merged in seq order"},
		{6, 10, true, true, "7,8,9,10", "since"},
		{0, 2, true, true, "5,6", "limit from the oldest"},
		{10, 10, true, true, "", "nothing newer"},
	}
	for _, c := range cases {
		if got := seqs(r.Since(c.since, c.limit, c.ev, c.cp)); got != c.want {
			t.Errorf("%s: %q, want %q", c.description, got, c.want)
		}
	}
}

// BenchmarkObserveCapture measures the metric updates of one analysed
// capture with two events and eight satellites.
func BenchmarkObserveCapture(b *testing.B) {
	s := New(Options{Inputs: []string{"roof"}})
	c := Capture{Input: "roof", Record: okRecord("a.ci8", 46, 44, 42, 45, 40, 39, 41, 43),
		Events: []detect.Event{openEvent(detect.ClassCW, 0, 100000, 12), event(detect.ClassPulsed, 0, 5000, 15)},
		Bytes:  200000, Duration: time.Second, Elapsed: time.Second / 5, Satellites: true, At: time.Now()}
	for b.Loop() {
		s.ObserveCapture(c)
	}
}

// TestKnownEmitterRaisesNoAlert: an event of an emitter the site lists as
// known (DESIGN: `known` … raises no alert) sets known_emitter_active, not
// interference_active; a new emitter of the same class beside it does.
func TestKnownEmitterRaisesNoAlert(t *testing.T) {
	s := newTestSet(t, false)
	spur := openEvent(detect.ClassCW, 0, 100000, -10)
	spur.Known, spur.KnownAs = true, "mast-head amplifier spur"
	s.ObserveCapture(Capture{Input: "roof", Record: okRecord("a.ci8"), Events: []detect.Event{spur}})
	get := func(name, class string) float64 {
		var g *prometheus.GaugeVec
		switch name {
		case "known":
			g = s.knownActive
		default:
			g = s.active
		}
		return testutil.ToFloat64(g.WithLabelValues("roof", class))
	}
	if get("active", detect.ClassCW) != 0 || get("known", detect.ClassCW) != 1 {
		t.Errorf("known spur: interference_active %v, known_emitter_active %v; want 0 and 1", get("active", detect.ClassCW), get("known", detect.ClassCW))
	}
	jammer := openEvent(detect.ClassCW, 0, 100000, 20)
	s.ObserveCapture(Capture{Input: "roof", Record: okRecord("b.ci8"), Events: []detect.Event{spur, jammer}})
	if get("active", detect.ClassCW) != 1 || get("known", detect.ClassCW) != 1 {
		t.Errorf("known spur and a new tone: interference_active %v, known_emitter_active %v; want 1 and 1", get("active", detect.ClassCW), get("known", detect.ClassCW))
	}
}

// Issue 18 item 2: a blocked sky was alerted as jamming (cn0_drop was a
// series of interference_active). A C/N0 drop has its own series, named by
// the interference that explains it (the event's related ids), or none:
// satellite signal degraded.
func TestBlockedSkyIsNotJamming(t *testing.T) {
	drop := func(db float64, related ...string) detect.Event {
		e := openEvent(detect.ClassCN0Drop, 0, 100000, 9)
		e.ID, e.Related, e.Params.DropDB = "drop", related, &db
		return e
	}
	cw := openEvent(detect.ClassCW, 0, 100000, 20)
	cw.ID = "cw1"
	band := openEvent(detect.ClassNarrowbandNoise, 0, 100000, 12)
	band.ID = "band1"
	for _, tc := range []struct {
		name   string
		events []detect.Event
		cause  string  // explained_by set to 1 ("" none at all)
		dropDB float64 // NaN: no series
		cw     float64 // interference_active{class="cw"}
	}{
		{"obstruction: drop alone", []detect.Event{drop(9.6)}, NoExplanation, 9.6, 0},
		{"drop with a jammer", []detect.Event{band, cw, drop(7, "cw1", "band1")}, detect.ClassCW, 7, 1},
		{"clean", nil, "", math.NaN(), 0},
	} {
		t.Run(tc.name, func(t *testing.T) {
			s := newTestSet(t, false)
			s.ObserveCapture(Capture{Input: "roof", Record: okRecord("a.ci8", 40), Events: tc.events, At: time.Unix(1, 0)})
			if v := testutil.ToFloat64(s.active.WithLabelValues("roof", detect.ClassCN0Drop)); v != 0 {
				t.Errorf("interference_active{class=cn0_drop} = %v, want 0 (a C/N0 drop is no interference)", v)
			}
			if hasSeries(t, s, "quietband_jn_db", "class", detect.ClassCN0Drop) {
				t.Error("jn_db{class=cn0_drop} present: a C/N0 drop has no J/N")
			}
			if v := testutil.ToFloat64(s.active.WithLabelValues("roof", detect.ClassCW)); v != tc.cw {
				t.Errorf("interference_active{class=cw} = %v, want %v", v, tc.cw)
			}
			for _, c := range CN0DropCauses() {
				want := b2f(c == tc.cause)
				if v := testutil.ToFloat64(s.cn0DropActive.WithLabelValues("roof", c)); v != want {
					t.Errorf("cn0_drop_active{explained_by=%q} = %v, want %v", c, v, want)
				}
			}
			n := testutil.CollectAndCount(s.cn0DropDB)
			if math.IsNaN(tc.dropDB) != (n == 0) {
				t.Fatalf("cn0_drop_db series: %d", n)
			}
			if n > 0 {
				if v := testutil.ToFloat64(s.cn0DropDB.WithLabelValues("roof")); v != tc.dropDB {
					t.Errorf("cn0_drop_db = %v, want %v", v, tc.dropDB)
				}
			}
		})
	}
}

// hasSeries tells whether the family name has a series with label = value.
func hasSeries(t *testing.T, s *Set, name, label, value string) bool {
	t.Helper()
	fams, err := s.Registry().Gather()
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range fams {
		if f.GetName() != name {
			continue
		}
		for _, m := range f.GetMetric() {
			for _, l := range m.GetLabel() {
				if l.GetName() == label && l.GetValue() == value {
					return true
				}
			}
		}
	}
	return false
}

// Issue 18 item 10: the interference-seen alert and the events-per-hour
// panel dropped the input label (events_total has none). Events are also
// counted by input and class.
func TestEventsKeepTheirInput(t *testing.T) {
	s := newTestSet(t, false)
	observeSequence(s)
	for _, tc := range []struct {
		input, class string
		want         float64
	}{{"roof", detect.ClassCW, 2}, {"roof", detect.ClassSwept, 1}, {"mast", detect.ClassWidebandNoise, 1}, {"mast", detect.ClassCW, 0}} {
		if v := testutil.ToFloat64(s.inputEvents.WithLabelValues(tc.input, tc.class)); v != tc.want {
			t.Errorf("events_by_input_total{input=%q,class=%q} = %v, want %v", tc.input, tc.class, v, tc.want)
		}
	}
}
