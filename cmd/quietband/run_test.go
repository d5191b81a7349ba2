package main

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus/testutil"

	"quietband/detect"
	"quietband/ingest"
	"quietband/metrics/eventlog"
)

// TestMain lets the test binary stand in for the quietband binary: with
// QUIETBAND_TEST_MAIN=1 it runs the command line instead of the tests, so
// the crash test can kill -9 a real daemon process without a separate
// build.
func TestMain(m *testing.M) {
	if os.Getenv("QUIETBAND_TEST_MAIN") == "1" {
		os.Exit(runMain(os.Args[1:], os.Stdout, os.Stderr))
	}
	os.Exit(m.Run())
}

// Test captures are raw ci8 at 1 MS/s, 20 000 samples (20 ms): complex
// white Gaussian noise of power 2σ² = 0.02 of full scale and, in "tone"
// captures, a CW tone of amplitude 0.1 at +187.5 kHz (J/N = 0.01/0.02,
// −3 dB, but 21 dB above the noise in its bin of a 256-point FFT).
const (
	runRate    = 1e6
	runSamples = 20000
	runToneHz  = 187.5e3
)

func ci8Capture(seed uint64, tone bool) []byte {
	rng := rand.New(rand.NewPCG(seed, 99))
	b := make([]byte, 2*runSamples)
	q := func(v float64) byte { return byte(int8(max(-127, min(127, math.Round(v*128))))) }
	for n := range runSamples {
		i, qv := 0.1*rng.NormFloat64(), 0.1*rng.NormFloat64()
		if tone {
			s, c := math.Sincos(2 * math.Pi * runToneHz / runRate * float64(n))
			i, qv = i+0.1*c, qv+0.1*s
		}
		b[2*n], b[2*n+1] = q(i), q(qv)
	}
	return b
}

// dropCapture writes a capture the way a recorder that renames into place
// does.
func dropCapture(t testing.TB, path string, data []byte) {
	t.Helper()
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		t.Fatal(err)
	}
	tmp := filepath.Join(filepath.Dir(path), "."+filepath.Base(path)+".part")
	if err := os.WriteFile(tmp, data, 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.Rename(tmp, path); err != nil {
		t.Fatal(err)
	}
}

// syncBuffer collects a daemon's diagnostic log.
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

type site struct {
	dir, in, state, logPath, cfgPath string
}

// newSite makes a folder tree and a configuration for a daemon; extra
// YAML is appended to the configuration.
func newSite(t testing.TB, extra string) site {
	t.Helper()
	dir := t.TempDir()
	s := site{dir: dir, in: filepath.Join(dir, "captures"), state: filepath.Join(dir, "state")}
	s.logPath = filepath.Join(s.state, "events.jsonl")
	s.cfgPath = filepath.Join(dir, "config.yaml")
	os.MkdirAll(s.in, 0o755)
	cfg := fmt.Sprintf(`inputs:
  - name: roof
    path: %s
    format: ci8
    sample_rate: %g
    settle: 150ms
state_dir: %s
listen: 127.0.0.1:0
rescan_interval: 500ms
log_level: debug
`, s.in, runRate, s.state) + extra
	if err := os.WriteFile(s.cfgPath, []byte(cfg), 0o644); err != nil {
		t.Fatal(err)
	}
	return s
}

type runningDaemon struct {
	d    *daemon
	out  *syncBuffer
	base string
	stop func() error
}

// startDaemon runs a daemon in this process; tune may adjust it first.
func startDaemon(t testing.TB, s site, tune ...func(*daemon)) *runningDaemon {
	t.Helper()
	cfg, err := loadRunConfig(s.cfgPath, runOverrides{})
	if err != nil {
		t.Fatal(err)
	}
	out := &syncBuffer{}
	d, err := newDaemon(cfg, s.cfgPath, runOverrides{}, out)
	if err != nil {
		t.Fatal(err)
	}
	d.commit.Retry = 100 * time.Millisecond
	for _, f := range tune {
		f(d)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- d.run(ctx, nil) }()
	var once sync.Once
	var runErr error
	stop := func() error {
		once.Do(func() {
			cancel()
			runErr = <-done
		})
		return runErr
	}
	t.Cleanup(func() {
		if err := stop(); err != nil {
			t.Errorf("daemon: %v", err)
		}
		if t.Failed() || os.Getenv("QUIETBAND_TEST_LOG") != "" {
			t.Logf("daemon log:\n%s", tail(out.String(), 60))
		}
	})
	rd := &runningDaemon{d: d, out: out, base: "http://" + d.server.Addr().String(), stop: stop}
	waitFor(t, 10*time.Second, "watcher running", func() bool { return d.watcher.Running() })
	return rd
}

func tail(s string, n int) string {
	lines := strings.Split(strings.TrimRight(s, "\n"), "\n")
	if len(lines) > n {
		lines = lines[len(lines)-n:]
	}
	return strings.Join(lines, "\n")
}

func waitFor(t testing.TB, timeout time.Duration, what string, ok func() bool) {
	t.Helper()
	deadline := time.Now().Add(timeout)
	for !ok() {
		if time.Now().After(deadline) {
			t.Fatalf("timed out after %v waiting for %s", timeout, what)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// logRecord is a record of the event log, decoded.
type logRecord struct {
	Seq     uint64 `json:"seq"`
	Kind    string `json:"kind"`
	ID      string `json:"id"`
	Class   string `json:"class"`
	Capture string `json:"capture"`
	SHA256  string `json:"sha256"`
	Status  string `json:"status"`
	Error   string `json:"error"`
	Events  int    `json:"events"`
	Samples int64  `json:"samples"`
}

func readLog(t testing.TB, path string) []logRecord {
	t.Helper()
	var out []logRecord
	err := eventlog.Scan(path, func(rec eventlog.Record) error {
		var r logRecord
		if err := json.Unmarshal(rec.Line, &r); err != nil {
			return err
		}
		out = append(out, r)
		return nil
	})
	var ve *eventlog.VerifyError
	if err != nil && !errors.Is(err, os.ErrNotExist) && !errors.As(err, &ve) {
		t.Fatal(err)
	}
	// A malformed line ends the reading: while a daemon writes, that is a
	// torn tail it will cut. checkLog verifies the whole log strictly.
	return out
}

func captureRecords(recs []logRecord) map[string][]logRecord {
	m := map[string][]logRecord{}
	for _, r := range recs {
		if r.Kind == eventlog.KindCapture {
			m[r.Capture] = append(m[r.Capture], r)
		}
	}
	return m
}

func countCaptures(t testing.TB, path string) int {
	n := 0
	for _, r := range readLog(t, path) {
		if r.Kind == eventlog.KindCapture {
			n++
		}
	}
	return n
}

// checkLog verifies the hash chain over every segment (eventlog.Verify)
// and that no event id appears twice.
func checkLog(t *testing.T, path string) []logRecord {
	t.Helper()
	segs, err := eventlog.Segments(path)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := eventlog.Verify(segs...); err != nil {
		t.Fatalf("event log does not verify: %v", err)
	}
	recs := readLog(t, path)
	ids := map[string]bool{}
	for _, r := range recs {
		if r.Kind == eventlog.KindEvent {
			if ids[r.ID] {
				t.Errorf("event id %s written twice", r.ID)
			}
			ids[r.ID] = true
		}
	}
	return recs
}

func httpGet(t *testing.T, url string) (int, string) {
	t.Helper()
	resp, err := http.Get(url)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	b, _ := io.ReadAll(resp.Body)
	return resp.StatusCode, string(b)
}

func TestRunBurst(t *testing.T) {
	s := newSite(t, "queue_size: 16\n")
	rd := startDaemon(t, s)
	const n = 200
	tone := func(i int) bool { return i%10 == 3 }
	for i := range n {
		name := filepath.Join(s.in, fmt.Sprintf("day%d", i%4), fmt.Sprintf("c%03d.ci8", i))
		dropCapture(t, name, ci8Capture(uint64(i), tone(i)))
	}
	waitFor(t, 50*time.Second, "200 capture records", func() bool { return countCaptures(t, s.logPath) >= n })
	time.Sleep(700 * time.Millisecond) // a rescan more: nothing is analysed twice
	recs := checkLog(t, s.logPath)
	caps := captureRecords(recs)
	if len(caps) != n {
		t.Fatalf("%d captures recorded, want %d", len(caps), n)
	}
	cwByCapture := map[string]int{}
	for _, r := range recs {
		if r.Kind == eventlog.KindEvent && r.Class == detect.ClassCW {
			cwByCapture[r.Capture]++
		}
	}
	for i := range n {
		name := fmt.Sprintf("day%d/c%03d.ci8", i%4, i)
		rs := caps[name]
		if len(rs) != 1 {
			t.Errorf("%s: %d capture records, want exactly 1", name, len(rs))
			continue
		}
		if rs[0].Status != detect.StatusOK || len(rs[0].SHA256) != 64 {
			t.Errorf("%s: status %q sha %q", name, rs[0].Status, rs[0].SHA256)
		}
		// The tone is 21 dB above the noise in its bin: it must be found;
		// the noise-only captures must stay clean.
		if tone(i) != (cwByCapture[name] > 0) {
			t.Errorf("%s: tone %v but %d cw events", name, tone(i), cwByCapture[name])
		}
	}

	// Metrics: the linter of `promtool check metrics` finds nothing, and
	// the series are there with the burst's counts.
	reg := rd.d.set.Registry()
	problems, err := testutil.GatherAndLint(reg)
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range problems {
		t.Errorf("lint: %s: %s", p.Metric, p.Text)
	}
	if err := testutil.GatherAndCompare(reg, strings.NewReader(`
# HELP quietband_captures_total Captures recorded in the event log, by result (ok or quarantined).
# TYPE quietband_captures_total counter
quietband_captures_total{result="ok"} 200
quietband_captures_total{result="quarantined"} 0
# HELP quietband_samples_total Complex samples analysed.
# TYPE quietband_samples_total counter
quietband_samples_total 4e+06
# HELP quietband_bytes_total Bytes of sample data analysed.
# TYPE quietband_bytes_total counter
quietband_bytes_total 8e+06
# HELP quietband_queue_depth Captures found complete and waiting for analysis.
# TYPE quietband_queue_depth gauge
quietband_queue_depth 0
`), "quietband_captures_total", "quietband_samples_total", "quietband_bytes_total", "quietband_queue_depth"); err != nil {
		t.Error(err)
	}
	for _, name := range []string{"quietband_interference_active", "quietband_noise_floor_dbfs", "quietband_agc_deviation_db",
		"quietband_sk_max", "quietband_events_total", "quietband_processing_seconds", "quietband_realtime_factor",
		"quietband_last_capture_timestamp_seconds", "quietband_eventlog_write_errors_total", "quietband_eventlog_last_seq",
		"quietband_falling_behind", "quietband_build_info"} {
		if c, err := testutil.GatherAndCount(reg, name); err != nil || c == 0 {
			t.Errorf("%s: %d series (%v)", name, c, err)
		}
	}
	code, body := httpGet(t, rd.base+"/readyz")
	if code != 200 {
		t.Errorf("/readyz: %d %s", code, body)
	}
	code, body = httpGet(t, rd.base+"/api/events?since=0")
	var evs []logRecord
	if err := json.Unmarshal([]byte(body), &evs); code != 200 || err != nil {
		t.Fatalf("/api/events: %d %v", code, err)
	}
	if len(evs) < n/10 {
		t.Errorf("/api/events: %d events, want at least %d", len(evs), n/10)
	}
}

func TestRunQuarantine(t *testing.T) {
	s := newSite(t, "quarantine_dir: "+filepath.Join(t.TempDir(), "quarantine")+"\n")
	cfg, _ := loadRunConfig(s.cfgPath, runOverrides{})
	qdir := cfg.QuarantineDir
	rd := startDaemon(t, s)
	outside := filepath.Join(t.TempDir(), "elsewhere.ci8")
	os.WriteFile(outside, ci8Capture(7, false), 0o644)
	meta := `{"global":{"core:datatype":"ci8","core:version":"1.2.6","core:sample_rate":1000000},"captures":[{"core:sample_start":0}],"annotations":[]}`
	type bad struct {
		name   string
		make   func(path string)
		reason string // in the quarantine reason (ingest's error texts)
		moved  bool
	}
	cases := []bad{
		{"empty.ci8", func(p string) { dropCapture(t, p, nil) }, "zero length", true},
		{"odd.ci8", func(p string) { dropCapture(t, p, []byte{1, 2, 3}) }, "not a whole number of ci8 samples", true},
		{"badmeta.sigmf-meta", func(p string) {
			dropCapture(t, strings.TrimSuffix(p, ".sigmf-meta")+".sigmf-data", ci8Capture(1, false))
			dropCapture(t, p, []byte(`{"global": {`))
		}, "malformed JSON", true},
		{"nodata.sigmf-meta", func(p string) { dropCapture(t, p, []byte(meta)) }, "cannot read data", true},
		{"escape.ci8", func(p string) { os.Symlink(outside, p) }, "outside", true},
	}
	if os.Geteuid() != 0 {
		// Root reads any file, so the permission case runs only for others.
		cases = append(cases, bad{"locked.ci8", func(p string) {
			dropCapture(t, p, ci8Capture(2, false))
			os.Chmod(p, 0)
		}, "permission denied", true})
	} else {
		t.Log("running as root: the unreadable-file case is skipped (root reads any file)")
	}
	dropCapture(t, filepath.Join(s.in, "good.ci8"), ci8Capture(3, false))
	for _, c := range cases {
		c.make(filepath.Join(s.in, c.name))
	}
	want := len(cases) + 1
	waitFor(t, 20*time.Second, "every capture recorded", func() bool { return countCaptures(t, s.logPath) >= want })
	// The files are moved once their record is durable, so just after it.
	waitFor(t, 10*time.Second, "the quarantined files moved", func() bool {
		for _, c := range cases {
			if _, err := os.Lstat(filepath.Join(qdir, "roof", c.name)); c.moved && err != nil {
				return false
			}
		}
		return true
	})
	caps := captureRecords(checkLog(t, s.logPath))
	if r := caps["good.ci8"]; len(r) != 1 || r[0].Status != detect.StatusOK {
		t.Errorf("good.ci8: %+v", r)
	}
	for _, c := range cases {
		r := caps[c.name]
		if len(r) != 1 || r[0].Status != detect.StatusQuarantined || !strings.Contains(r[0].Error, c.reason) {
			t.Errorf("%s: records %+v, want one quarantined record with a reason containing %q", c.name, r, c.reason)
			continue
		}
		if c.moved {
			if _, err := os.Lstat(filepath.Join(qdir, "roof", c.name)); err != nil {
				t.Errorf("%s: not moved to the quarantine folder: %v", c.name, err)
			}
			if _, err := os.Lstat(filepath.Join(s.in, c.name)); err == nil {
				t.Errorf("%s: still in the watched folder", c.name)
			}
		}
	}
	if _, err := os.Stat(filepath.Join(qdir, "roof", "badmeta.sigmf-data")); err != nil {
		t.Errorf("data file of the bad SigMF pair not moved with it: %v", err)
	}
	if code, body := httpGet(t, rd.base+"/readyz"); code != 200 {
		t.Errorf("/readyz with quarantined captures: %d %s", code, body)
	}
	wantMetrics := fmt.Sprintf(`
# HELP quietband_captures_total Captures recorded in the event log, by result (ok or quarantined).
# TYPE quietband_captures_total counter
quietband_captures_total{result="ok"} 1
quietband_captures_total{result="quarantined"} %d
`, len(cases))
	var err error
	waitFor(t, 10*time.Second, "the capture counters", func() bool {
		err = testutil.GatherAndCompare(rd.d.set.Registry(), strings.NewReader(wantMetrics), "quietband_captures_total")
		return err == nil
	})
}

func TestRunRestartIsIdempotent(t *testing.T) {
	s := newSite(t, "")
	rd := startDaemon(t, s)
	dropCapture(t, filepath.Join(s.in, "a.ci8"), ci8Capture(10, false))
	dropCapture(t, filepath.Join(s.in, "b.ci8"), ci8Capture(11, false))
	dropCapture(t, filepath.Join(s.in, "empty.ci8"), nil)
	waitFor(t, 20*time.Second, "3 records", func() bool { return countCaptures(t, s.logPath) == 3 })
	dropCapture(t, filepath.Join(s.in, "tone.ci8"), ci8Capture(12, true))
	waitFor(t, 20*time.Second, "4 records", func() bool { return countCaptures(t, s.logPath) == 4 })
	if err := rd.stop(); err != nil {
		t.Fatal(err)
	}
	// The baseline learned from the clean captures was saved on stop.
	bf, err := os.Open(filepath.Join(s.state, "baseline.json"))
	if err != nil {
		t.Fatal(err)
	}
	bl, err := detect.ReadBaselines(bf)
	bf.Close()
	if err != nil || bl.Len() != 1 {
		t.Fatalf("baseline.json: %v, %d inputs (want 1)", err, bl.Len())
	}
	before := readLog(t, s.logPath)
	last := before[len(before)-1]
	if last.Kind != eventlog.KindCapture || last.Capture != "tone.ci8" || last.Events == 0 {
		t.Fatalf("last record %+v, want tone.ci8's capture record after its events", last)
	}

	// Restart: nothing is analysed again (the quarantined capture neither,
	// its reason is unchanged).
	rd = startDaemon(t, s)
	if !strings.Contains(rd.out.String(), "baseline loaded") {
		t.Error("the saved baseline was not loaded on restart")
	}
	waitFor(t, 10*time.Second, "start scan handed out", func() bool {
		return rd.d.watcher.Stats().Rescans >= 1 && rd.d.watcher.Stats().Backlog == 0 && rd.d.watcher.Stats().Pending == 0
	})
	time.Sleep(700 * time.Millisecond)
	if err := rd.stop(); err != nil {
		t.Fatal(err)
	}
	if got := readLog(t, s.logPath); len(got) != len(before) {
		t.Fatalf("restart wrote %d records, want none", len(got)-len(before))
	}

	// A crash that left tone.ci8's events but not its capture record (a
	// torn batch cut after the events): cut the last line.
	raw, err := os.ReadFile(s.logPath)
	if err != nil {
		t.Fatal(err)
	}
	cut := bytes.LastIndexByte(raw[:len(raw)-1], '\n') + 1
	if err := os.WriteFile(s.logPath, raw[:cut], 0o640); err != nil {
		t.Fatal(err)
	}
	rd = startDaemon(t, s)
	waitFor(t, 20*time.Second, "tone.ci8 recorded again", func() bool { return countCaptures(t, s.logPath) == 4 })
	// A re-recorded file (same name, new content) is new work.
	dropCapture(t, filepath.Join(s.in, "a.ci8"), ci8Capture(13, false))
	waitFor(t, 20*time.Second, "a.ci8 recorded again", func() bool { return countCaptures(t, s.logPath) == 5 })
	if err := rd.stop(); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(rd.out.String(), "event already in the log") {
		t.Error("the redone capture's events were not recognised as already written")
	}
	recs := checkLog(t, s.logPath)
	caps := captureRecords(recs)
	for name, want := range map[string]int{"a.ci8": 2, "b.ci8": 1, "empty.ci8": 1, "tone.ci8": 1} {
		if len(caps[name]) != want {
			t.Errorf("%s: %d capture records, want %d", name, len(caps[name]), want)
		}
	}
	if a := caps["a.ci8"]; len(a) == 2 && a[0].SHA256 == a[1].SHA256 {
		t.Error("re-recorded a.ci8 has the same sha256 twice")
	}
	nEvents := 0
	for _, r := range recs {
		if r.Kind == eventlog.KindEvent {
			nEvents++
		}
	}
	if nEvents != last.Events {
		t.Errorf("%d event records, want %d (tone.ci8's, once)", nEvents, last.Events)
	}
}

func TestRunConfig(t *testing.T) {
	dir := t.TempDir()
	in := filepath.Join(dir, "in")
	write := func(body string) string {
		p := filepath.Join(dir, fmt.Sprintf("c%d.yaml", time.Now().UnixNano()))
		os.WriteFile(p, []byte(body), 0o644)
		return p
	}
	bad := []struct {
		name, yaml, want string
	}{
		{"unknown key", "inptus: []\n", "inptus"},
		{"unknown nested key", "inputs:\n  - path: " + in + "\n    sample_rte: 2e6\n", "sample_rte"},
		{"unknown detect key", "detect:\n  fft_sise: 512\n", "fft_sise"},
		{"bad duration", "rescan_interval: soon\n", "soon"},
		{"bad format", "inputs:\n  - path: " + in + "\n    format: ci12\n", "format"},
		{"bad name", "inputs:\n  - path: " + in + "\n    name: roof antenna\n", "roof antenna"},
		{"same name", "inputs:\n  - {path: " + in + ", name: a}\n  - {path: " + dir + "/x, name: a}\n", "used twice"},
		{"bad listen", "listen: 9464\n", "listen"},
		{"bad level", "log_level: loud\n", "loud"},
		{"bad notify", "notify: smoke-signals\n", "smoke-signals"},
		{"move without dir", "retention: {days: 3, action: move}\n", "retention.dir"},
		{"bad action", "retention: {days: 3, action: shred}\n", "shred"},
		{"quarantine inside input", "inputs: [{path: " + in + "}]\nquarantine_dir: " + in + "/q\n", "inside the watched folder"},
		{"state inside input", "inputs: [{path: " + in + "}]\nstate_dir: " + in + "/state\n", "inside the watched folder"},
		{"bad detect value", "detect: {sk_pfa: 0.5}\n", "sk_pfa"},
		{"negative settle", "inputs: [{path: " + in + ", settle: -1s}]\n", "settle"},
	}
	for _, c := range bad {
		t.Run(c.name, func(t *testing.T) {
			_, err := loadRunConfig(write(c.yaml), runOverrides{})
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("error %v, want one naming %q", err, c.want)
			}
		})
	}
	t.Run("defaults", func(t *testing.T) {
		cfg, err := loadRunConfig(write(""), runOverrides{})
		if err != nil {
			t.Fatal(err)
		}
		if len(cfg.Inputs) != 1 || cfg.Inputs[0].Path != defaultInputPath || cfg.Inputs[0].Name != "captures" ||
			cfg.Inputs[0].SampleRate != 0 || cfg.Inputs[0].CenterHz != nil ||
			cfg.Inputs[0].Settle != ingest.DefaultSettle {
			t.Errorf("default input %+v", cfg.Inputs)
		}
		if cfg.Listen != "127.0.0.1:9464" || cfg.StateDir != defaultStateDir ||
			cfg.Log.Path != filepath.Join(defaultStateDir, "events.jsonl") || cfg.QueueSize != 64 ||
			cfg.RescanInterval != time.Minute || cfg.LogLevel != "info" || cfg.LogFormat != "text" ||
			cfg.Retention.Days != 0 || cfg.Retention.Action != "delete" || cfg.Metrics.GoCollector {
			t.Errorf("defaults %+v", cfg)
		}
	})
	t.Run("file and flags", func(t *testing.T) {
		p := write("inputs:\n  - {name: roof, path: " + in + ", settle: 3s, center_hz: 0}\nlisten: 127.0.0.1:1\n" +
			"detect: {fft_size: 512, masks: [{low_hz: 1e3, high_hz: 2e3}]}\nmetrics: {go_collector: true}\n")
		cfg, err := loadRunConfig(p, runOverrides{})
		if err != nil {
			t.Fatal(err)
		}
		if in := cfg.Inputs[0]; in.Settle != 3*time.Second || *in.CenterHz != 0 || in.rawSettings().HasCenter {
			t.Errorf("input %+v", in)
		}
		if cfg.Detect.FFTSize != 512 || len(cfg.Detect.Masks) != 1 || !cfg.Metrics.GoCollector {
			t.Errorf("detect %+v", cfg.Detect)
		}
		cfg, err = loadRunConfig(p, runOverrides{watch: []string{dir + "/w1", dir + "/x/w1"}, listen: "0.0.0.0:9999",
			state: dir + "/st", raw: ingest.RawSettings{SampleRate: 2e6, CenterHz: 1e9, HasCenter: true}})
		if err != nil {
			t.Fatal(err)
		}
		if len(cfg.Inputs) != 2 || cfg.Inputs[0].Name != "w1" || cfg.Inputs[1].Name != "w1-2" ||
			cfg.Inputs[0].SampleRate != 2e6 || *cfg.Inputs[1].CenterHz != 1e9 {
			t.Errorf("--watch inputs %+v", cfg.Inputs)
		}
		if cfg.Listen != "0.0.0.0:9999" || cfg.Log.Path != dir+"/st/events.jsonl" {
			t.Errorf("overrides: listen %s log %s", cfg.Listen, cfg.Log.Path)
		}
	})
	t.Run("example config", func(t *testing.T) {
		// The documented example in deploy/ must load as it is.
		if _, err := loadRunConfig("../../deploy/config.example.yaml", runOverrides{}); err != nil {
			t.Error(err)
		}
	})
}

func TestRunHelp(t *testing.T) {
	var out, errOut bytes.Buffer
	if code := runMain([]string{"run", "--help"}, &out, &errOut); code != 0 {
		t.Fatalf("run --help: exit %d", code)
	}
	for _, flag := range []string{"-config", "-watch", "-log", "-state", "-listen", "-web.config.file", "-rate", "-center", "-format"} {
		if !strings.Contains(errOut.String(), flag) {
			t.Errorf("--help lacks %s", flag)
		}
	}
	if code := runMain([]string{"run", "--config", filepath.Join(t.TempDir(), "none.yaml")}, &out, &errOut); code != 1 {
		t.Errorf("missing config file: exit %d, want 1", code)
	}
}

// daemonProcess is the test binary running `quietband run` (see TestMain).
type daemonProcess struct {
	cmd  *exec.Cmd
	out  *syncBuffer
	done chan error
}

func startProcess(t *testing.T, args ...string) *daemonProcess {
	t.Helper()
	p, err := startProcessAs(t, os.Args[0], nil, args...)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

// startProcessAs runs the test binary bin as `quietband` with the user and
// group of cred (nil: the test's own).
func startProcessAs(t *testing.T, bin string, cred *syscall.Credential, args ...string) (*daemonProcess, error) {
	t.Helper()
	cmd := exec.Command(bin, args...)
	cmd.Env = append(os.Environ(), "QUIETBAND_TEST_MAIN=1")
	if cred != nil {
		cmd.SysProcAttr = &syscall.SysProcAttr{Credential: cred}
	}
	out := &syncBuffer{}
	cmd.Stdout, cmd.Stderr = out, out
	if err := cmd.Start(); err != nil {
		return nil, err
	}
	p := &daemonProcess{cmd: cmd, out: out, done: make(chan error, 1)}
	go func() { p.done <- cmd.Wait() }()
	t.Cleanup(func() {
		if cmd.ProcessState == nil {
			cmd.Process.Kill()
			<-p.done
		}
		if t.Failed() {
			t.Logf("daemon output:\n%s", tail(out.String(), 40))
		}
	})
	return p, nil
}

// wait waits for the process to exit and returns its exit code.
func (p *daemonProcess) wait(t *testing.T, timeout time.Duration) int {
	t.Helper()
	select {
	case <-p.done:
		return p.cmd.ProcessState.ExitCode()
	case <-time.After(timeout):
		t.Fatalf("daemon did not exit within %v", timeout)
		return -1
	}
}

func TestRunCrashRecovery(t *testing.T) {
	// A real daemon process is killed with SIGKILL in the middle of a
	// burst, restarted, and must end with every capture recorded exactly
	// once, no event id twice, and a log that verifies (with rotation:
	// 16 KiB segments).
	s := newSite(t, "log:\n  max_bytes: 16384\nlog_format: json\n")
	p := startProcess(t, "run", "--config", s.cfgPath)
	const n = 200
	tone := func(i int) bool { return i%5 == 0 }
	go func() {
		for i := range n {
			dropCapture(t, filepath.Join(s.in, fmt.Sprintf("c%03d.ci8", i)), ci8Capture(uint64(1000+i), tone(i)))
		}
	}()
	waitFor(t, 30*time.Second, "a first part of the burst recorded", func() bool { return countCaptures(t, s.logPath) >= 25 })
	if err := p.cmd.Process.Signal(syscall.SIGKILL); err != nil {
		t.Fatal(err)
	}
	p.wait(t, 10*time.Second)
	atKill := countCaptures(t, s.logPath)
	if atKill >= n {
		t.Fatalf("all %d captures were done before the kill; the test did not kill mid-burst", n)
	}
	t.Logf("killed after %d of %d captures", atKill, n)

	p = startProcess(t, "run", "--config", s.cfgPath)
	waitFor(t, 40*time.Second, "the rest of the burst", func() bool { return countCaptures(t, s.logPath) >= n })
	// SIGHUP reopens the log and reloads; the daemon carries on.
	os.WriteFile(s.cfgPath, bytes.Replace(mustRead(t, s.cfgPath), []byte("log_level: debug"), []byte("log_level: info"), 1), 0o644)
	p.cmd.Process.Signal(syscall.SIGHUP)
	waitFor(t, 10*time.Second, "the reload", func() bool { return strings.Contains(p.out.String(), "log level changed") })
	dropCapture(t, filepath.Join(s.in, "after-hup.ci8"), ci8Capture(5000, false))
	waitFor(t, 20*time.Second, "a capture after SIGHUP", func() bool { return countCaptures(t, s.logPath) >= n+1 })
	// SIGTERM: a clean stop, exit status 0.
	p.cmd.Process.Signal(syscall.SIGTERM)
	if code := p.wait(t, 20*time.Second); code != 0 {
		t.Errorf("exit status %d after SIGTERM, want 0", code)
	}

	recs := checkLog(t, s.logPath)
	caps := captureRecords(recs)
	if len(caps) != n+1 {
		t.Errorf("%d captures recorded, want %d", len(caps), n+1)
	}
	for name, rs := range caps {
		if len(rs) != 1 {
			t.Errorf("%s: %d capture records, want exactly 1", name, len(rs))
		}
	}
	segs, _ := eventlog.Segments(s.logPath)
	if len(segs) < 2 {
		t.Errorf("%d log files, want rotated segments", len(segs))
	}
	byCapture := map[string]int{}
	for _, r := range recs {
		if r.Kind == eventlog.KindEvent {
			byCapture[r.Capture]++
		}
	}
	for i := range n {
		name := fmt.Sprintf("c%03d.ci8", i)
		if rs := caps[name]; len(rs) == 1 && rs[0].Events != byCapture[name] {
			t.Errorf("%s: capture record counts %d events, the log holds %d", name, rs[0].Events, byCapture[name])
		}
	}
}

func mustRead(t *testing.T, path string) []byte {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func TestRunEventLogFull(t *testing.T) {
	// The event log on a full file system (a 256 KiB tmpfs, filled up):
	// appends fail with ENOSPC, nothing is marked done, /readyz says why,
	// and once space is back the daemon resumes by itself and records
	// every capture once.
	logDir := filepath.Join(t.TempDir(), "small")
	os.MkdirAll(logDir, 0o755)
	if err := syscall.Mount("tmpfs", logDir, "tmpfs", 0, "size=256k"); err != nil {
		t.Skipf("cannot mount a tmpfs to fill up (needs root and CAP_SYS_ADMIN): %v", err)
	}
	t.Cleanup(func() { syscall.Unmount(logDir, syscall.MNT_DETACH) })
	s := newSite(t, "log:\n  path: "+filepath.Join(logDir, "events.jsonl")+"\n")
	s.logPath = filepath.Join(logDir, "events.jsonl")
	rd := startDaemon(t, s)
	dropCapture(t, filepath.Join(s.in, "before.ci8"), ci8Capture(20, false))
	waitFor(t, 20*time.Second, "the first capture", func() bool { return countCaptures(t, s.logPath) == 1 })

	filler := filepath.Join(logDir, "filler")
	f, err := os.Create(filler)
	if err != nil {
		t.Fatal(err)
	}
	chunk := make([]byte, 4096)
	for {
		if _, err := f.Write(chunk); err != nil {
			break
		}
	}
	for _, n := range []int{512, 64, 1} {
		for {
			if _, err := f.Write(chunk[:n]); err != nil {
				break
			}
		}
	}
	f.Close()

	// tmpfs allocates whole pages, so the appends fill the log's last
	// page first: a dozen captures (about 7 KiB of records) run past it.
	const n = 12
	for i := range n {
		dropCapture(t, filepath.Join(s.in, fmt.Sprintf("full%d.ci8", i)), ci8Capture(uint64(30+i), i == 2))
	}
	waitFor(t, 20*time.Second, "/readyz to report the log", func() bool {
		code, body := httpGet(t, rd.base+"/readyz")
		return code == 503 && strings.Contains(body, "event log")
	})
	stuck := countCaptures(t, s.logPath)
	time.Sleep(500 * time.Millisecond) // retries meanwhile mark nothing done
	if got := countCaptures(t, s.logPath); got != stuck || got >= n+1 {
		t.Errorf("capture records while the disk is full: %d, then %d; want a constant count below %d", stuck, got, n+1)
	}
	_, body := httpGet(t, rd.base+"/metrics")
	if !strings.Contains(body, "quietband_eventlog_writable 0") || strings.Contains(body, "quietband_eventlog_write_errors_total 0") {
		t.Errorf("metrics while the log fails:\n%s", grepLines(body, "quietband_eventlog"))
	}
	if err := os.Remove(filler); err != nil {
		t.Fatal(err)
	}
	waitFor(t, 30*time.Second, "every capture once space is back", func() bool { return countCaptures(t, s.logPath) == n+1 })
	waitFor(t, 10*time.Second, "/readyz 200", func() bool { code, _ := httpGet(t, rd.base+"/readyz"); return code == 200 })
	caps := captureRecords(checkLog(t, s.logPath))
	for i := range n {
		if rs := caps[fmt.Sprintf("full%d.ci8", i)]; len(rs) != 1 || rs[0].Status != detect.StatusOK {
			t.Errorf("full%d.ci8: %+v", i, rs)
		}
	}
	if !strings.Contains(rd.out.String(), "event log append failed") {
		t.Error("no log line about the failed append")
	}
}

func grepLines(s, sub string) string {
	var out []string
	for _, l := range strings.Split(s, "\n") {
		if strings.Contains(l, sub) {
			out = append(out, l)
		}
	}
	return strings.Join(out, "\n")
}

func TestRunRetention(t *testing.T) {
	for _, action := range []string{"delete", "move"} {
		t.Run(action, func(t *testing.T) {
			keep := filepath.Join(t.TempDir(), "archive")
			s := newSite(t, fmt.Sprintf("retention: {days: 2, action: %s, dir: %s}\n", action, keep))
			rd := startDaemon(t, s, func(d *daemon) { d.sweepEvery = 0 })
			meta := `{"global":{"core:datatype":"ci8","core:version":"1.2.6","core:sample_rate":1000000},"captures":[{"core:sample_start":0}],"annotations":[]}`
			dropCapture(t, filepath.Join(s.in, "old.ci8"), ci8Capture(40, false))
			dropCapture(t, filepath.Join(s.in, "d", "pair.sigmf-data"), ci8Capture(41, false))
			dropCapture(t, filepath.Join(s.in, "d", "pair.sigmf-meta"), []byte(meta))
			dropCapture(t, filepath.Join(s.in, "fresh.ci8"), ci8Capture(42, false))
			dropCapture(t, filepath.Join(s.in, "empty.ci8"), nil)
			// A capture old already when it arrives: its identity when
			// recorded is the one the sweep sees, so it is not hashed.
			past := time.Now().Add(-72 * time.Hour)
			tmp := filepath.Join(s.in, ".aged.ci8.part")
			os.WriteFile(tmp, ci8Capture(43, false), 0o644)
			os.Chtimes(tmp, past, past)
			os.Rename(tmp, filepath.Join(s.in, "aged.ci8"))
			waitFor(t, 20*time.Second, "5 records", func() bool { return countCaptures(t, s.logPath) == 5 })
			hashed := rd.d.hashes.Load() // empty.ci8's, when quarantined
			// Age everything but fresh.ci8 past the two days.
			for _, p := range []string{"old.ci8", "d/pair.sigmf-data", "d/pair.sigmf-meta", "empty.ci8"} {
				os.Chtimes(filepath.Join(s.in, p), past, past)
			}
			gone := func(p string) bool { _, err := os.Lstat(filepath.Join(s.in, p)); return errors.Is(err, os.ErrNotExist) }
			waitFor(t, 20*time.Second, "old captures retired", func() bool {
				return gone("old.ci8") && gone("d/pair.sigmf-meta") && gone("d/pair.sigmf-data") && gone("aged.ci8")
			})
			time.Sleep(1200 * time.Millisecond) // another sweep
			// The sweep hashed the data files whose times changed after
			// they were recorded (old.ci8, the pair's, empty.ci8), once:
			// empty.ci8's new identity is remembered for later sweeps.
			if got := rd.d.hashes.Load() - hashed; got != 3 {
				t.Errorf("the sweeps hashed %d files, want 3 (not aged.ci8, each other once)", got)
			}
			if gone("fresh.ci8") {
				t.Error("a capture younger than retention.days was retired")
			}
			if gone("empty.ci8") {
				t.Error("a quarantined capture was retired (only analysed ones are)")
			}
			for _, p := range []string{"old.ci8", "d/pair.sigmf-meta", "d/pair.sigmf-data", "aged.ci8"} {
				_, err := os.Stat(filepath.Join(keep, "roof", p))
				if moved := err == nil; moved != (action == "move") {
					t.Errorf("%s in %s: %v (action %s)", p, keep, err, action)
				}
			}
			if n := countCaptures(t, s.logPath); n != 5 {
				t.Errorf("%d capture records after retention, want 5 (retiring writes none)", n)
			}
		})
	}
}

func TestRunFallingBehind(t *testing.T) {
	// With a limit of 1 ms every capture of a burst waits too long: the
	// daemon says so (log, metric, /readyz) and clears it once caught up.
	s := newSite(t, "falling_behind_after: 1ms\nqueue_size: 2\n")
	rd := startDaemon(t, s)
	for i := range 40 {
		dropCapture(t, filepath.Join(s.in, fmt.Sprintf("b%02d.ci8", i)), ci8Capture(uint64(200+i), false))
	}
	waitFor(t, 30*time.Second, "the burst recorded", func() bool { return countCaptures(t, s.logPath) == 40 })
	waitFor(t, 10*time.Second, "caught up", func() bool { return strings.Contains(rd.out.String(), "caught up") })
	if !strings.Contains(rd.out.String(), "falling behind") {
		t.Error("no log line about falling behind")
	}
	waitFor(t, 10*time.Second, "/readyz 200 again", func() bool { code, _ := httpGet(t, rd.base+"/readyz"); return code == 200 })
	_, body := httpGet(t, rd.base+"/metrics")
	if !strings.Contains(body, "quietband_falling_behind 0") {
		t.Errorf("falling behind not cleared:\n%s", grepLines(body, "falling"))
	}
}

// TestRunThousandAndSlowWriters: a burst of 1000 small captures dropped at
// once, and five more written slowly, 64 bytes at a time, while the
// burst is analysed: every one is analysed exactly once, and none before it
// was complete (each capture record holds all its samples; a capture taken
// early would hold fewer, or be quarantined as shrinking or growing).
func TestRunThousandAndSlowWriters(t *testing.T) {
	s := newSite(t, "queue_size: 64\n")
	startDaemon(t, s)
	const n, slow = 1000, 5
	done := make(chan struct{})
	go func() {
		defer close(done)
		for k := range slow {
			path := filepath.Join(s.in, "slow", fmt.Sprintf("s%d.ci8", k))
			os.MkdirAll(filepath.Dir(path), 0o755)
			f, err := os.Create(path)
			if err != nil {
				t.Error(err)
				return
			}
			data := ci8Capture(uint64(5000+k), false)
			for off := 0; off < len(data); off += 64 {
				f.Write(data[off:min(off+64, len(data))])
				time.Sleep(500 * time.Microsecond)
			}
			f.Close()
		}
	}()
	for i := range n {
		dropCapture(t, filepath.Join(s.in, fmt.Sprintf("burst%d", i%8), fmt.Sprintf("c%04d.ci8", i)), ci8Capture(uint64(i), false))
	}
	<-done
	waitFor(t, 120*time.Second, "1005 capture records", func() bool { return countCaptures(t, s.logPath) >= n+slow })
	time.Sleep(700 * time.Millisecond) // a rescan more: nothing is analysed twice
	caps := captureRecords(checkLog(t, s.logPath))
	if len(caps) != n+slow {
		t.Fatalf("%d captures recorded, want %d", len(caps), n+slow)
	}
	for name, rs := range caps {
		if len(rs) != 1 || rs[0].Status != detect.StatusOK || rs[0].Samples != runSamples {
			t.Errorf("%s: %d records, first %+v (want one ok record of %d samples)", name, len(rs), rs[0], runSamples)
		}
	}
}
