package monitor

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"math"
	"net/http"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus/testutil"

	"quietband/detect"
	"quietband/ingest"
	"quietband/metrics/eventlog"
	"quietband/metrics/monitor/monitortest"
)

// The daemon in this process: bursts, quarantine, restarts, a full disk
// under the event log, retention, falling behind, a thousand captures and
// slow writers. The daemon as a process (kill -9, signals, an
// unprivileged user) is tested in cmd/quietband.

// site is a folder tree and a configuration for a monitor: one input,
// "roof", of raw ci8 captures at 1 MS/s (monitortest's), settled after
// 150 ms, rescanned every 500 ms, HTTP on a free loopback port.
type site struct {
	dir, in, state, logPath string
	cfg                     Config
	json                    bool // log as JSON lines (else text)
}

// newSite makes a site in a temporary folder; tweak, when set, adjusts
// its configuration.
func newSite(t testing.TB, tweak func(*Config)) site {
	t.Helper()
	dir := t.TempDir()
	s := site{dir: dir, in: filepath.Join(dir, "captures"), state: filepath.Join(dir, "state")}
	s.logPath = filepath.Join(s.state, "events.jsonl")
	os.MkdirAll(s.in, 0o755)
	s.cfg = Config{
		Inputs: []Input{{Name: "roof", Path: s.in, Raw: ingest.RawSettings{Format: ingest.CI8, SampleRate: monitortest.Rate},
			Settle: 150 * time.Millisecond}},
		LogPath: s.logPath, LogMaxBytes: 128 << 20, AnchorEvery: DefaultAnchorEvery, StateDir: s.state,
		Listen: "127.0.0.1:0", QueueSize: ingest.DefaultQueueSize, RescanInterval: 500 * time.Millisecond,
		FallingBehindAfter: 5 * time.Minute, Satellites: true, Retention: Retention{Action: "delete"},
	}
	if tweak != nil {
		tweak(&s.cfg)
		s.logPath = s.cfg.LogPath
	}
	return s
}

type runningDaemon struct {
	m    *Monitor
	out  *monitortest.Buffer
	base string
	stop func() error
}

// startDaemon runs a monitor on s in this process, logging at debug
// level into its out; tune may adjust it first.
func startDaemon(t testing.TB, s site, tune ...func(*Monitor)) *runningDaemon {
	t.Helper()
	out := &monitortest.Buffer{}
	opts := &slog.HandlerOptions{Level: slog.LevelDebug}
	log := slog.New(slog.NewTextHandler(out, opts))
	if s.json {
		log = slog.New(slog.NewJSONHandler(out, opts))
	}
	m, err := New(s.cfg, log)
	if err != nil {
		t.Fatal(err)
	}
	m.commit.Retry = 100 * time.Millisecond
	for _, f := range tune {
		f(m)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- m.Run(ctx, nil, nil) }()
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
			t.Logf("daemon log:\n%s", monitortest.Tail(out.String(), 60))
		}
	})
	rd := &runningDaemon{m: m, out: out, base: "http://" + m.Addr(), stop: stop}
	monitortest.WaitFor(t, 10*time.Second, "watcher running", func() bool { return m.watcher.Running() })
	return rd
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
	s := newSite(t, func(c *Config) { c.QueueSize = 16 })
	rd := startDaemon(t, s)
	const n = 200
	tone := func(i int) bool { return i%10 == 3 }
	for i := range n {
		name := filepath.Join(s.in, fmt.Sprintf("day%d", i%4), fmt.Sprintf("c%03d.ci8", i))
		monitortest.Drop(t, name, monitortest.CI8(uint64(i), tone(i)))
	}
	monitortest.WaitFor(t, 50*time.Second, "200 capture records", func() bool { return monitortest.CountCaptures(t, s.logPath) >= n })
	time.Sleep(700 * time.Millisecond) // a rescan more: nothing is analysed twice
	recs := monitortest.CheckLog(t, s.logPath)
	caps := monitortest.CaptureRecords(recs)
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
	reg := rd.m.set.Registry()
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
	var evs []monitortest.Record
	if err := json.Unmarshal([]byte(body), &evs); code != 200 || err != nil {
		t.Fatalf("/api/events: %d %v", code, err)
	}
	if len(evs) < n/10 {
		t.Errorf("/api/events: %d events, want at least %d", len(evs), n/10)
	}
}

func TestRunQuarantine(t *testing.T) {
	qdir := filepath.Join(t.TempDir(), "quarantine")
	s := newSite(t, func(c *Config) { c.QuarantineDir = qdir; c.Inputs[0].MetadataWait = 300 * time.Millisecond })
	rd := startDaemon(t, s)
	outside := filepath.Join(t.TempDir(), "elsewhere.ci8")
	os.WriteFile(outside, monitortest.CI8(7, false), 0o644)
	meta := `{"global":{"core:datatype":"ci8","core:version":"1.2.6","core:sample_rate":1000000},"captures":[{"core:sample_start":0}],"annotations":[]}`
	type bad struct {
		name   string
		make   func(path string)
		reason string // in the quarantine reason (ingest's error texts)
		moved  bool
	}
	cases := []bad{
		{"empty.ci8", func(p string) { monitortest.Drop(t, p, nil) }, "zero length", true},
		{"odd.ci8", func(p string) { monitortest.Drop(t, p, []byte{1, 2, 3}) }, "not a whole number of ci8 samples", true},
		{"badmeta.sigmf-meta", func(p string) {
			monitortest.Drop(t, strings.TrimSuffix(p, ".sigmf-meta")+".sigmf-data", monitortest.CI8(1, false))
			monitortest.Drop(t, p, []byte(`{"global": {`))
		}, "malformed JSON", true},
		// Half a pair is recorded once it waited MetadataWait, and left
		// in place for its other half (issue 17, item 2).
		{"nodata.sigmf-meta", func(p string) { monitortest.Drop(t, p, []byte(meta)) }, "without its data file", false},
		{"escape.ci8", func(p string) { os.Symlink(outside, p) }, "outside", true},
	}
	if os.Geteuid() != 0 {
		// Root reads any file, so the permission case runs only for others.
		cases = append(cases, bad{"locked.ci8", func(p string) {
			monitortest.Drop(t, p, monitortest.CI8(2, false))
			os.Chmod(p, 0)
		}, "permission denied", true})
	} else {
		t.Log("running as root: the unreadable-file case is skipped (root reads any file)")
	}
	monitortest.Drop(t, filepath.Join(s.in, "good.ci8"), monitortest.CI8(3, false))
	for _, c := range cases {
		c.make(filepath.Join(s.in, c.name))
	}
	want := len(cases) + 1
	monitortest.WaitFor(t, 20*time.Second, "every capture recorded", func() bool { return monitortest.CountCaptures(t, s.logPath) >= want })
	// The files are moved once their record is durable, so just after it.
	monitortest.WaitFor(t, 10*time.Second, "the quarantined files moved", func() bool {
		for _, c := range cases {
			if _, err := os.Lstat(filepath.Join(qdir, "roof", c.name)); c.moved && err != nil {
				return false
			}
		}
		return true
	})
	caps := monitortest.CaptureRecords(monitortest.CheckLog(t, s.logPath))
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
		} else if _, err := os.Lstat(filepath.Join(s.in, c.name)); err != nil {
			t.Errorf("%s: moved away from the watched folder: %v", c.name, err)
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
	monitortest.WaitFor(t, 10*time.Second, "the capture counters", func() bool {
		err = testutil.GatherAndCompare(rd.m.set.Registry(), strings.NewReader(wantMetrics), "quietband_captures_total")
		return err == nil
	})
}

func TestRunRestartIsIdempotent(t *testing.T) {
	s := newSite(t, nil)
	rd := startDaemon(t, s)
	monitortest.Drop(t, filepath.Join(s.in, "a.ci8"), monitortest.CI8(10, false))
	monitortest.Drop(t, filepath.Join(s.in, "b.ci8"), monitortest.CI8(11, false))
	monitortest.Drop(t, filepath.Join(s.in, "empty.ci8"), nil)
	monitortest.WaitFor(t, 20*time.Second, "3 records", func() bool { return monitortest.CountCaptures(t, s.logPath) == 3 })
	monitortest.Drop(t, filepath.Join(s.in, "tone.ci8"), monitortest.CI8(12, true))
	monitortest.WaitFor(t, 20*time.Second, "4 records", func() bool { return monitortest.CountCaptures(t, s.logPath) == 4 })
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
	before := monitortest.ReadLog(t, s.logPath)
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
	monitortest.WaitFor(t, 10*time.Second, "start scan handed out", func() bool {
		return rd.m.watcher.Stats().Rescans >= 1 && rd.m.watcher.Stats().Backlog == 0 && rd.m.watcher.Stats().Pending == 0
	})
	time.Sleep(700 * time.Millisecond)
	if err := rd.stop(); err != nil {
		t.Fatal(err)
	}
	if got := monitortest.ReadLog(t, s.logPath); len(got) != len(before) {
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
	monitortest.WaitFor(t, 20*time.Second, "tone.ci8 recorded again", func() bool { return monitortest.CountCaptures(t, s.logPath) == 4 })
	// A re-recorded file (same name, new content) is new work.
	monitortest.Drop(t, filepath.Join(s.in, "a.ci8"), monitortest.CI8(13, false))
	monitortest.WaitFor(t, 20*time.Second, "a.ci8 recorded again", func() bool { return monitortest.CountCaptures(t, s.logPath) == 5 })
	if err := rd.stop(); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(rd.out.String(), "event already in the log") {
		t.Error("the redone capture's events were not recognised as already written")
	}
	recs := monitortest.CheckLog(t, s.logPath)
	caps := monitortest.CaptureRecords(recs)
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
	s := newSite(t, func(c *Config) { c.LogPath = filepath.Join(logDir, "events.jsonl") })
	s.logPath = filepath.Join(logDir, "events.jsonl")
	rd := startDaemon(t, s)
	monitortest.Drop(t, filepath.Join(s.in, "before.ci8"), monitortest.CI8(20, false))
	monitortest.WaitFor(t, 20*time.Second, "the first capture", func() bool { return monitortest.CountCaptures(t, s.logPath) == 1 })

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
		monitortest.Drop(t, filepath.Join(s.in, fmt.Sprintf("full%d.ci8", i)), monitortest.CI8(uint64(30+i), i == 2))
	}
	monitortest.WaitFor(t, 20*time.Second, "/readyz to report the log", func() bool {
		code, body := httpGet(t, rd.base+"/readyz")
		return code == 503 && strings.Contains(body, "event log")
	})
	stuck := monitortest.CountCaptures(t, s.logPath)
	time.Sleep(500 * time.Millisecond) // retries meanwhile mark nothing done
	if got := monitortest.CountCaptures(t, s.logPath); got != stuck || got >= n+1 {
		t.Errorf("capture records while the disk is full: %d, then %d; want a constant count below %d", stuck, got, n+1)
	}
	_, body := httpGet(t, rd.base+"/metrics")
	if !strings.Contains(body, "quietband_eventlog_writable 0") || strings.Contains(body, "quietband_eventlog_write_errors_total 0") {
		t.Errorf("metrics while the log fails:\n%s", grepLines(body, "quietband_eventlog"))
	}
	if err := os.Remove(filler); err != nil {
		t.Fatal(err)
	}
	monitortest.WaitFor(t, 30*time.Second, "every capture once space is back", func() bool { return monitortest.CountCaptures(t, s.logPath) == n+1 })
	monitortest.WaitFor(t, 10*time.Second, "/readyz 200", func() bool { code, _ := httpGet(t, rd.base+"/readyz"); return code == 200 })
	caps := monitortest.CaptureRecords(monitortest.CheckLog(t, s.logPath))
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
			s := newSite(t, func(c *Config) { c.Retention = Retention{Days: 2, Action: action, Dir: keep} })
			rd := startDaemon(t, s, func(m *Monitor) { m.sweepEvery = 0 })
			meta := `{"global":{"core:datatype":"ci8","core:version":"1.2.6","core:sample_rate":1000000},"captures":[{"core:sample_start":0}],"annotations":[]}`
			monitortest.Drop(t, filepath.Join(s.in, "old.ci8"), monitortest.CI8(40, false))
			monitortest.Drop(t, filepath.Join(s.in, "d", "pair.sigmf-data"), monitortest.CI8(41, false))
			monitortest.Drop(t, filepath.Join(s.in, "d", "pair.sigmf-meta"), []byte(meta))
			monitortest.Drop(t, filepath.Join(s.in, "fresh.ci8"), monitortest.CI8(42, false))
			monitortest.Drop(t, filepath.Join(s.in, "empty.ci8"), nil)
			// A capture old already when it arrives: its identity when
			// recorded is the one the sweep sees, so it is not hashed.
			past := time.Now().Add(-72 * time.Hour)
			tmp := filepath.Join(s.in, ".aged.ci8.part")
			os.WriteFile(tmp, monitortest.CI8(43, false), 0o644)
			os.Chtimes(tmp, past, past)
			os.Rename(tmp, filepath.Join(s.in, "aged.ci8"))
			monitortest.WaitFor(t, 20*time.Second, "5 records", func() bool { return monitortest.CountCaptures(t, s.logPath) == 5 })
			hashed := rd.m.hashes.Load() // empty.ci8's, when quarantined
			// Age everything but fresh.ci8 past the two days.
			for _, p := range []string{"old.ci8", "d/pair.sigmf-data", "d/pair.sigmf-meta", "empty.ci8"} {
				os.Chtimes(filepath.Join(s.in, p), past, past)
			}
			gone := func(p string) bool { _, err := os.Lstat(filepath.Join(s.in, p)); return errors.Is(err, os.ErrNotExist) }
			monitortest.WaitFor(t, 20*time.Second, "old captures retired", func() bool {
				return gone("old.ci8") && gone("d/pair.sigmf-meta") && gone("d/pair.sigmf-data") && gone("aged.ci8")
			})
			time.Sleep(1200 * time.Millisecond) // another sweep
			// The sweep hashed the data files whose times changed after
			// they were recorded (old.ci8, the pair's, empty.ci8), once:
			// empty.ci8's new identity is remembered for later sweeps.
			if got := rd.m.hashes.Load() - hashed; got != 3 {
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
			if n := monitortest.CountCaptures(t, s.logPath); n != 5 {
				t.Errorf("%d capture records after retention, want 5 (retiring writes none)", n)
			}
		})
	}
}

func TestRunFallingBehind(t *testing.T) {
	// With a limit of 1 ms every capture of a burst waits too long: the
	// daemon says so (log, metric, /readyz) and clears it once caught up.
	s := newSite(t, func(c *Config) { c.FallingBehindAfter, c.QueueSize = time.Millisecond, 2 })
	rd := startDaemon(t, s)
	for i := range 40 {
		monitortest.Drop(t, filepath.Join(s.in, fmt.Sprintf("b%02d.ci8", i)), monitortest.CI8(uint64(200+i), false))
	}
	monitortest.WaitFor(t, 30*time.Second, "the burst recorded", func() bool { return monitortest.CountCaptures(t, s.logPath) == 40 })
	monitortest.WaitFor(t, 10*time.Second, "caught up", func() bool { return strings.Contains(rd.out.String(), "caught up") })
	if !strings.Contains(rd.out.String(), "falling behind") {
		t.Error("no log line about falling behind")
	}
	monitortest.WaitFor(t, 10*time.Second, "/readyz 200 again", func() bool { code, _ := httpGet(t, rd.base+"/readyz"); return code == 200 })
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
	s := newSite(t, func(c *Config) { c.QueueSize = 64 })
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
			data := monitortest.CI8(uint64(5000+k), false)
			for off := 0; off < len(data); off += 64 {
				f.Write(data[off:min(off+64, len(data))])
				time.Sleep(500 * time.Microsecond)
			}
			f.Close()
		}
	}()
	for i := range n {
		monitortest.Drop(t, filepath.Join(s.in, fmt.Sprintf("burst%d", i%8), fmt.Sprintf("c%04d.ci8", i)), monitortest.CI8(uint64(i), false))
	}
	<-done
	monitortest.WaitFor(t, 120*time.Second, "1005 capture records", func() bool { return monitortest.CountCaptures(t, s.logPath) >= n+slow })
	time.Sleep(700 * time.Millisecond) // a rescan more: nothing is analysed twice
	caps := monitortest.CaptureRecords(monitortest.CheckLog(t, s.logPath))
	if len(caps) != n+slow {
		t.Fatalf("%d captures recorded, want %d", len(caps), n+slow)
	}
	for name, rs := range caps {
		if len(rs) != 1 || rs[0].Status != detect.StatusOK || rs[0].Samples != monitortest.Samples {
			t.Errorf("%s: %d records, first %+v (want one ok record of %d samples)", name, len(rs), rs[0], monitortest.Samples)
		}
	}
}

// TestRunQuarantinesUnreadableRaw: a file in a watched folder that
// matches the folder's pattern (or has a raw-data ending) but cannot be
// read, here for want of a sample rate or of a format, is quarantined
// with the reason naming the setting (DESIGN.md "Inputs": never silently
// skipped, a rate never guessed).
func TestRunQuarantinesUnreadableRaw(t *testing.T) {
	// The input without a format or a rate, with a pattern.
	s := newSite(t, func(c *Config) { c.Inputs[0].Raw = ingest.RawSettings{Pattern: "cap_*"} })
	startDaemon(t, s)
	monitortest.Drop(t, filepath.Join(s.in, "cap_0001"), monitortest.CI8(1, false))
	monitortest.Drop(t, filepath.Join(s.in, "x.ci8"), monitortest.CI8(2, false))
	monitortest.Drop(t, filepath.Join(s.in, "notes.txt"), []byte("not a capture"))
	monitortest.WaitFor(t, 20*time.Second, "two capture records", func() bool { return monitortest.CountCaptures(t, s.logPath) >= 2 })
	caps := monitortest.CaptureRecords(monitortest.ReadLog(t, s.logPath))
	for name, want := range map[string][]string{"cap_0001": {"no sample format", "format"}, "x.ci8": {"no sample rate", "sample_rate"}} {
		rs := caps[name]
		if len(rs) != 1 || rs[0].Status != detect.StatusQuarantined {
			t.Errorf("%s: records %+v, want one quarantined", name, rs)
			continue
		}
		for _, w := range want {
			if !strings.Contains(rs[0].Error, w) {
				t.Errorf("%s: reason %q does not say %q", name, rs[0].Error, w)
			}
		}
	}
	if len(caps) != 2 {
		t.Errorf("records for %d captures, want 2 (notes.txt is no capture): %v", len(caps), caps)
	}
}

// liveLines returns the exposition's lines of the live-state gauges (what
// a restart must keep), by series.
func liveLines(t *testing.T, base string) map[string]string {
	t.Helper()
	code, body := httpGet(t, base+"/metrics")
	if code != http.StatusOK {
		t.Fatalf("/metrics: %d", code)
	}
	out := map[string]string{}
	for _, line := range strings.Split(body, "\n") {
		for _, p := range []string{"quietband_interference_active{", "quietband_jn_db{", "quietband_noise_floor_dbfs{",
			"quietband_satellites_acquired{", "quietband_cn0_dbhz{", "quietband_last_capture_timestamp_seconds "} {
			if strings.HasPrefix(line, p) {
				i := strings.LastIndexByte(line, ' ')
				out[line[:i]] = line[i+1:]
			}
		}
	}
	return out
}

// Issue 18 item 1: after a restart every interference_active read 0 and
// the last-capture timestamp 0 until new captures arrived (firing alerts
// resolved, the stale-monitor alert computed time() - 0). The live state
// is restored from the event log.
func TestRestartKeepsTheAlertFiringAndTheLastCaptureTime(t *testing.T) {
	s := newSite(t, nil)
	rd := startDaemon(t, s)
	monitortest.Drop(t, filepath.Join(s.in, "a.ci8"), monitortest.CI8(20, false))
	monitortest.WaitFor(t, 20*time.Second, "a.ci8", func() bool { return monitortest.CountCaptures(t, s.logPath) == 1 })
	monitortest.Drop(t, filepath.Join(s.in, "tone.ci8"), monitortest.CI8(21, true))
	monitortest.WaitFor(t, 20*time.Second, "tone.ci8", func() bool { return monitortest.CountCaptures(t, s.logPath) == 2 })
	before := liveLines(t, rd.base)
	if err := rd.stop(); err != nil {
		t.Fatal(err)
	}
	cw := `quietband_interference_active{class="cw",input="roof"}`
	if before[cw] != "1" {
		t.Fatalf("before the restart %s = %q, want 1 (the tone is open at the capture's end)", cw, before[cw])
	}

	rd = startDaemon(t, s)
	after := liveLines(t, rd.base)
	for k, v := range before {
		if k == "quietband_last_capture_timestamp_seconds" {
			continue
		}
		if after[k] != v {
			t.Errorf("after the restart %s = %q, want %q as before it", k, after[k], v)
		}
	}
	for k := range after {
		if _, ok := before[k]; !ok {
			t.Errorf("after the restart %s appeared", k)
		}
	}
	// The last capture's time: the log file's write, within a second of
	// the analysis' end (the record is written just before).
	b, _ := strconv.ParseFloat(before["quietband_last_capture_timestamp_seconds"], 64)
	a, _ := strconv.ParseFloat(after["quietband_last_capture_timestamp_seconds"], 64)
	if b == 0 || math.Abs(a-b) > 1 {
		t.Errorf("last_capture_timestamp_seconds: %v after the restart, %v before (want within 1 s)", a, b)
	}
}

// Issue 18 item 4: a mistyped --watch folder looked healthy (no warning,
// /readyz 200, watcher gauge 1; the folder was created). A watched folder
// that does not exist, or is not a folder, is an error at start naming it;
// one that goes away makes the daemon not ready while it lasts.
func TestMistypedWatchFolderIsAnError(t *testing.T) {
	for _, tc := range []struct {
		name string
		make func(p string)
		want string
	}{
		{"missing", func(string) {}, "does not exist"},
		{"a file", func(p string) { os.WriteFile(p, []byte("x"), 0o644) }, "is not a folder"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			s := newSite(t, nil)
			bad := filepath.Join(s.dir, "captrues")
			tc.make(bad)
			s.cfg.Inputs[0].Path = bad
			if _, err := New(s.cfg, slog.New(slog.NewTextHandler(io.Discard, nil))); err == nil {
				t.Fatal("New: no error")
			} else if !strings.Contains(err.Error(), bad) || !strings.Contains(err.Error(), tc.want) || !strings.Contains(err.Error(), "input roof") {
				t.Errorf("error %q does not name the input, the folder and %q", err, tc.want)
			}
			if _, err := os.Stat(bad); tc.name == "missing" && err == nil {
				t.Error("the mistyped folder was created")
			}
		})
	}

	s := newSite(t, nil)
	rd := startDaemon(t, s)
	if code, body := httpGet(t, rd.base+"/readyz"); code != http.StatusOK {
		t.Fatalf("/readyz: %d %s", code, body)
	}
	gone := s.in + ".away"
	if err := os.Rename(s.in, gone); err != nil {
		t.Fatal(err)
	}
	code, body := httpGet(t, rd.base+"/readyz")
	if code != http.StatusServiceUnavailable || !strings.Contains(body, "input roof") || !strings.Contains(body, s.in) {
		t.Errorf("/readyz with the folder gone: %d %s", code, body)
	}
	if _, m := httpGet(t, rd.base+"/metrics"); !strings.Contains(m, `quietband_watched_folder_readable{input="roof"} 0`) {
		t.Error("watched_folder_readable not 0 with the folder gone")
	}
	if err := os.Rename(gone, s.in); err != nil {
		t.Fatal(err)
	}
	if code, body := httpGet(t, rd.base+"/readyz"); code != http.StatusOK {
		t.Errorf("/readyz with the folder back: %d %s", code, body)
	}
	if _, m := httpGet(t, rd.base+"/metrics"); !strings.Contains(m, `quietband_watched_folder_readable{input="roof"} 1`) {
		t.Error("watched_folder_readable not 1 with the folder back")
	}
}
