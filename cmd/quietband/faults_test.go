package main

// Fault injection against the daemon: SIGKILL at random points, a state
// folder that cannot be made, hostile and broken captures, a watched folder
// that disappears or floods its event queue, sustained load while /metrics
// is scraped, and the chain-head anchors an auditor keeps. Each test logs
// the figures it measured (t.Logf) for the README's "Reliability" section.
//
// QUIETBAND_LONG=1 runs the long variants (more crash trials, a 10 min
// load).

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"io"
	"io/fs"
	"math"
	"math/rand/v2"
	"net/http"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"testing"
	"time"
	"unicode/utf8"

	"quietband/detect"
	"quietband/ingest"
	"quietband/metrics/eventlog"
)

func longFaults() bool { return os.Getenv("QUIETBAND_LONG") == "1" }

// eventKeys returns the log's events as "capture|class|sample_start".
func eventKeys(t *testing.T, path string) map[string]int {
	t.Helper()
	keys := map[string]int{}
	err := eventlog.Scan(path, func(rec eventlog.Record) error {
		if rec.Kind != eventlog.KindEvent {
			return nil
		}
		var e detect.Event
		if err := json.Unmarshal(rec.Line, &e); err != nil {
			return err
		}
		keys[fmt.Sprintf("%s|%s|%d", e.Capture, e.Class, e.SampleStart)]++
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return keys
}

// crashBurst is the burst of every crash trial: 20 ci8 captures, a tone in
// every fourth (the same seeds in every trial, so one clean run is the
// reference for all).
const crashBurst = 20

func dropCrashBurst(t *testing.T, in string) {
	for i := range crashBurst {
		dropCapture(t, filepath.Join(in, fmt.Sprintf("k%02d.ci8", i)), ci8Capture(uint64(7000+i), i%4 == 1))
		time.Sleep(5 * time.Millisecond)
	}
}

// TestFaultsCrashAnywhere kills a real daemon process (the test binary, see
// TestMain) with SIGKILL after a seeded random delay while a burst arrives,
// restarts it, and checks the result against a clean run over the same
// captures: one capture record each, no event id twice, a log that
// verifies, and the same (capture, class, sample_start) events.
func TestFaultsCrashAnywhere(t *testing.T) {
	trials := 50
	if longFaults() {
		trials = 500
	}
	// The clean reference: one run, no kill.
	ref := newSite(t, "log_format: json\nlog:\n  max_bytes: 8192\n")
	t0 := time.Now()
	p := startProcess(t, "run", "--config", ref.cfgPath)
	dropCrashBurst(t, ref.in)
	waitFor(t, 30*time.Second, "the clean run", func() bool { return countCaptures(t, ref.logPath) >= crashBurst })
	clean := time.Since(t0)
	p.cmd.Process.Signal(syscall.SIGTERM)
	if code := p.wait(t, 20*time.Second); code != 0 {
		t.Fatalf("clean run: exit %d", code)
	}
	checkLog(t, ref.logPath)
	want := eventKeys(t, ref.logPath)
	if len(want) == 0 {
		t.Fatal("the clean run found no events; the comparison would be empty")
	}
	t.Logf("clean run: %d captures, %d events, %v from start to the last record", crashBurst, len(want), clean.Round(time.Millisecond))

	// Kill points spread from before the daemon is up to after the burst
	// is done: delays uniform in [0, 1.25·clean).
	rng := rand.New(rand.NewPCG(2026, 9))
	delays := make([]time.Duration, trials)
	for i := range delays {
		delays[i] = time.Duration(rng.Int64N(int64(clean * 5 / 4)))
	}
	var atKill [crashBurst + 1]atomic.Int32 // trials by captures recorded at the kill
	t.Run("trials", func(t *testing.T) {
		for k := range trials {
			k2 := k
			t.Run(strconv.Itoa(k), func(t *testing.T) {
				t.Parallel()
				s := newSite(t, "log_format: json\nlog:\n  max_bytes: 8192\n")
				p := startProcess(t, "run", "--config", s.cfgPath)
				dropped := make(chan struct{})
				go func() { defer close(dropped); dropCrashBurst(t, s.in) }()
				time.Sleep(delays[k])
				p.cmd.Process.Signal(syscall.SIGKILL)
				p.wait(t, 10*time.Second)
				<-dropped
				atKill[min(countCaptures(t, s.logPath), crashBurst)].Add(1)

				p = startProcess(t, "run", "--config", s.cfgPath)
				waitFor(t, 30*time.Second, "every capture after the restart", func() bool { return countCaptures(t, s.logPath) >= crashBurst })
				// SIGTERM once the signal handler is installed (the start line).
				waitFor(t, 10*time.Second, "the daemon up", func() bool { return strings.Contains(p.out.String(), "quietband run: started") })
				p.cmd.Process.Signal(syscall.SIGTERM)
				if code := p.wait(t, 20*time.Second); code != 0 {
					t.Errorf("exit %d after SIGTERM", code)
				}
				caps := captureRecords(checkLog(t, s.logPath)) // Verify and unique ids
				for i := range crashBurst {
					name := fmt.Sprintf("k%02d.ci8", i)
					if rs := caps[name]; len(rs) != 1 || rs[0].Status != detect.StatusOK {
						t.Errorf("%s: %d capture records %+v, want one ok record", name, len(rs), rs)
					}
				}
				got := eventKeys(t, s.logPath)
				for k, n := range got {
					if want[k] == 0 || n != want[k] {
						t.Errorf("event %s: %d times, the clean run has it %d times (killed after %d delay)", k, n, want[k], delays[k2])
					}
				}
				for k := range want {
					if got[k] == 0 {
						t.Errorf("event %s of the clean run is missing", k)
					}
				}
			})
		}
	})
	var hist []string
	for n := range atKill {
		if c := atKill[n].Load(); c > 0 {
			hist = append(hist, fmt.Sprintf("%d:%d", n, c))
		}
	}
	t.Logf("crash trials: %d (seed PCG(2026, 9)), kill delays 0–%v; trials by captures recorded at the kill (recorded:trials) %s",
		trials, (clean * 5 / 4).Round(time.Millisecond), strings.Join(hist, " "))
}

// TestFaultsStateUnwritable: a state folder or log path that cannot be
// made (below a regular file, which fails for root too: ENOTDIR) stops
// `quietband run` at start with an error naming the path.
func TestFaultsStateUnwritable(t *testing.T) {
	dir := t.TempDir()
	afile := filepath.Join(dir, "afile")
	if err := os.WriteFile(afile, []byte("not a folder\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	in := filepath.Join(dir, "in")
	cases := []struct {
		name, yaml, path string
	}{
		// The error names the key and the path that cannot be made.
		{"state_dir", "state_dir: " + afile + "/state\n", "state_dir: mkdir " + afile + ": not a directory"},
		{"log.path", "state_dir: " + dir + "/st\nlog: {path: " + afile + "/logs/events.jsonl}\n", "log.path: mkdir " + afile + ": not a directory"},
		{"log file is a folder", "state_dir: " + dir + "/st2\nlog: {path: " + dir + "/st2}\n", dir + "/st2: is a directory"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			cfg := filepath.Join(t.TempDir(), "config.yaml")
			os.WriteFile(cfg, []byte("inputs: [{path: "+in+", format: ci8, sample_rate: 1e6}]\nlisten: 127.0.0.1:0\n"+c.yaml), 0o644)
			var out, errOut bytes.Buffer
			code := runMain([]string{"run", "--config", cfg}, &out, &errOut)
			if code == 0 || !strings.Contains(errOut.String(), c.path) {
				t.Errorf("exit %d, stderr %q; want a failure naming %s", code, errOut.String(), c.path)
			}
			t.Logf("exit %d: %s", code, strings.TrimSpace(tail(errOut.String(), 1)))
		})
	}
}

// heapWatch samples HeapInuse every 10 ms until stopped and keeps the peak.
type heapWatch struct {
	peak atomic.Uint64
	stop chan struct{}
	done chan struct{}
}

func watchHeap() *heapWatch {
	h := &heapWatch{stop: make(chan struct{}), done: make(chan struct{})}
	go func() {
		defer close(h.done)
		var ms runtime.MemStats
		for {
			runtime.ReadMemStats(&ms)
			if ms.HeapInuse > h.peak.Load() {
				h.peak.Store(ms.HeapInuse)
			}
			select {
			case <-h.stop:
				return
			case <-time.After(10 * time.Millisecond):
			}
		}
	}()
	return h
}

func (h *heapWatch) end() uint64 { close(h.stop); <-h.done; return h.peak.Load() }

const goodMeta = `{"global":{"core:datatype":"ci8","core:version":"1.2.6","core:sample_rate":1000000},"captures":[{"core:sample_start":0}],"annotations":[]}`

// meta returns SigMF metadata with global members replaced or added (a
// value of "" deletes the member) and the given captures array.
func meta(global map[string]any, captures string) []byte {
	g := map[string]any{"core:datatype": "ci8", "core:version": "1.2.6", "core:sample_rate": 1e6}
	for k, v := range global {
		if v == "" {
			delete(g, k)
		} else {
			g[k] = v
		}
	}
	gb, _ := json.Marshal(g)
	if captures == "" {
		captures = `[{"core:sample_start":0}]`
	}
	return []byte(`{"global":` + string(gb) + `,"captures":` + captures + `,"annotations":[]}`)
}

func cf32(n int, bad float64, at int) []byte {
	b := make([]byte, 8*n)
	for i := range n {
		v := float32(0.01 * float64(i%7))
		if i == at {
			v = float32(bad)
		}
		binary.LittleEndian.PutUint32(b[8*i:], math.Float32bits(v))
		binary.LittleEndian.PutUint32(b[8*i+4:], math.Float32bits(0.02))
	}
	return b
}

// TestFaultsHostileInput drops a corpus of broken and hostile captures into
// a running daemon. Each is recorded once as quarantined with a reason
// (asserted by substring: ingest's error texts, in SigMF's terms), analysed
// when it is valid after all (all-zero, saturated, odd names), or skipped
// when it is no capture at all. Throughout, /readyz stays 200 and the
// daemon's heap stays bounded (its metadata reader refuses more than
// 16 MiB, so a 50 MB metadata file must not be read whole).
func TestFaultsHostileInput(t *testing.T) {
	s := newSite(t, "")
	outside := filepath.Join(t.TempDir(), "outside.ci8")
	os.WriteFile(outside, ci8Capture(1, false), 0o644)
	heap := watchHeap()
	rd := startDaemon(t, s)

	pair := func(name string, m, data []byte) func(string) {
		return func(p string) {
			base := strings.TrimSuffix(p, ingest.MetaExt)
			if data != nil {
				dropCapture(t, base+ingest.DataExt, data)
			}
			if m != nil {
				dropCapture(t, p, m)
			}
		}
	}
	raw := func(data []byte) func(string) { return func(p string) { dropCapture(t, p, data) } }
	data := ci8Capture(2, false)
	saturated := make([]byte, 2*runSamples)
	for i := range saturated {
		saturated[i] = byte(0x7f + (i%2)*1) // 127 and -128 alternately: both full-scale codes
	}

	type hostile struct {
		name   string // capture name (relative to the root); "" for skipped ones
		make   func(root string)
		status string // quarantined, ok, or "" for no record at all
		reason string // substring of the quarantine reason
	}
	at := func(name string, f func(string)) func(string) {
		return func(root string) { f(filepath.Join(root, name)) }
	}
	q := func(name string, f func(string), reason string) hostile {
		return hostile{name, at(name, f), detect.StatusQuarantined, reason}
	}
	ok := func(name string, f func(string)) hostile { return hostile{name, at(name, f), detect.StatusOK, ""} }

	cases := []hostile{
		// Raw files (format ci8 from the input's configuration).
		q("empty.ci8", raw(nil), "zero length"),
		q("odd.ci8", raw(data[:2*runSamples-1]), "not a whole number of ci8 samples"),
		q("three.ci8", raw([]byte{1, 2, 3}), "1 stray bytes from byte offset 2"),
		ok("zero.ci8", raw(make([]byte, 2*runSamples))),
		ok("saturated.ci8", raw(saturated)),
		ok("upper.CI8", raw(data)),
		ok("a..b.ci8", raw(data)),
		ok("new\nline.ci8", raw(data)),
		ok("tab\tand space .ci8", raw(data)),
		ok("bad\xff\xfename.ci8", raw(data)),
		ok("dir.ci8/inner.ci8", raw(data)), // a folder named like a capture is a folder
		q("loop.ci8", func(p string) { os.Symlink(p, p) }, "symbolic link cannot be resolved"),
		q("escape.ci8", func(p string) { os.Symlink(outside, p) }, "points outside"),
		q("dangling.ci8", func(p string) { os.Symlink(filepath.Join(filepath.Dir(p), "nowhere.ci8"), p) }, "symbolic link cannot be resolved"),
		ok("links/up.ci8", func(p string) {
			os.MkdirAll(filepath.Dir(p), 0o755)
			os.MkdirAll(filepath.Join(filepath.Dir(p), "..", "targets"), 0o755)
			os.WriteFile(filepath.Join(filepath.Dir(p), "..", "targets", "t.ci8.bin"), data, 0o644)
			os.Symlink("../links/../targets/./t.ci8.bin", p) // `..` segments, staying inside the root
		}),
		// SigMF pairs.
		// A data file waits ingest.DefaultOrphanAfter (60 s) for its
		// metadata: no record in the short run; in the long one, waited for.
		{"lonely.sigmf-data", at("lonely.sigmf-data", raw(data)), "waiting", ""},
		q("nodata.sigmf-meta", pair("", []byte(goodMeta), nil), "cannot read data"),
		q("emptymeta.sigmf-meta", pair("", []byte{}, data), "metadata file is empty"),
		q("zerodata.sigmf-meta", pair("", []byte(goodMeta), []byte{}), "zero length"),
		q("truncated.sigmf-meta", pair("", meta(nil, `[{"core:sample_start":0},{"core:sample_start":30000}]`), data),
			"data shorter than the metadata claims"),
		q("oddcf32.sigmf-meta", pair("", meta(map[string]any{"core:datatype": "cf32_le"}, ""), cf32(100, 0, 0)[:797]),
			"not a whole number of cf32_le samples"),
		q("nan.sigmf-meta", pair("", meta(map[string]any{"core:datatype": "cf32_le"}, ""), cf32(1000, math.NaN(), 37)),
			"sample 37 is NaN or infinite"),
		q("inf.sigmf-meta", pair("", meta(map[string]any{"core:datatype": "cf32_le"}, ""), cf32(1000, math.Inf(-1), 512)),
			"sample 512 is NaN or infinite"),
		q("real.sigmf-meta", pair("", meta(map[string]any{"core:datatype": "rf32_le"}, ""), data), "real-valued"),
		q("ci12.sigmf-meta", pair("", meta(map[string]any{"core:datatype": "ci12_le"}, ""), data), `unknown datatype "ci12_le"`),
		q("noendian.sigmf-meta", pair("", meta(map[string]any{"core:datatype": "ci16"}, ""), data), "lacks the _le/_be endianness suffix"),
		q("nodatatype.sigmf-meta", pair("", meta(map[string]any{"core:datatype": ""}, ""), data), "core:datatype is missing"),
		q("hugerate.sigmf-meta", pair("", meta(map[string]any{"core:sample_rate": 1e15}, ""), data), "core:sample_rate 1e+15 is out of range"),
		q("norate.sigmf-meta", pair("", meta(map[string]any{"core:sample_rate": ""}, ""), data), "core:sample_rate is missing"),
		q("negstart.sigmf-meta", pair("", meta(nil, `[{"core:sample_start":-5}]`), data), "core:sample_start must be a non-negative integer"),
		q("disorder.sigmf-meta", pair("", meta(nil, `[{"core:sample_start":100},{"core:sample_start":50}]`), data),
			"is not after the previous segment's"),
		q("v2.sigmf-meta", pair("", meta(map[string]any{"core:version": "2.0.0"}, ""), data), "not a SigMF 1.x.y version"),
		q("twochan.sigmf-meta", pair("", meta(map[string]any{"core:num_channels": 2}, ""), data), "single-channel"),
		q("sha.sigmf-meta", pair("", meta(map[string]any{"core:sha512": strings.Repeat("ab", 64)}, ""), data), "SHA-512 of the data"),
		q("noglobal.sigmf-meta", pair("", []byte(`{"captures":[],"annotations":[]}`), data), `missing the "global" object`),
		q("garbage.sigmf-meta", pair("", []byte("\x00\x01PK\x03\x04 not json"), data), "malformed JSON"),
		q("array.sigmf-meta", pair("", []byte(`[1,2,3]`), data), "malformed JSON"),
		q("nested.sigmf-meta", pair("", []byte(`{"global":`+strings.Repeat("[", 100000)+strings.Repeat("]", 100000)+`}`), data),
			"malformed JSON"),
		{"huge.sigmf-meta", func(root string) {
			// 50 MB of metadata, written in pieces (the test holds little
			// of it): a valid start and an endless annotations array.
			p := filepath.Join(root, "huge.sigmf-meta")
			dropCapture(t, filepath.Join(root, "huge.sigmf-data"), data)
			tmp := filepath.Join(root, ".huge.part")
			f, _ := os.Create(tmp)
			w := bufio.NewWriterSize(f, 1<<16)
			w.WriteString(`{"global":{"core:datatype":"ci8","core:version":"1.2.6","core:sample_rate":1000000},"captures":[{"core:sample_start":0}],"annotations":[`)
			ann := []byte(`{"core:sample_start":0,"core:sample_count":1,"core:comment":"` + strings.Repeat("x", 400) + `"},`)
			for n := 0; n < 50<<20; n += len(ann) {
				w.Write(ann)
			}
			w.WriteString(`{"core:sample_start":0}]}`)
			w.Flush()
			f.Close()
			os.Rename(tmp, p)
		}, detect.StatusQuarantined, "larger than 16 MiB"},
		// Not captures at all: no record.
		{"", func(root string) { os.WriteFile(filepath.Join(root, "cap.iq"), data, 0o644) }, "", ""},
		{"", func(root string) { os.WriteFile(filepath.Join(root, "cap.ci8.txt"), data, 0o644) }, "", ""},
		{"", func(root string) { os.MkdirAll(filepath.Join(root, "empty.sigmf-meta"), 0o755) }, "", ""},
		{"", func(root string) { os.WriteFile(filepath.Join(root, ".hidden.ci8"), data, 0o644) }, "", ""},
	}

	readyDown := atomic.Int32{}
	stopPoll := make(chan struct{})
	polled := make(chan struct{})
	go func() {
		defer close(polled)
		for {
			select {
			case <-stopPoll:
				return
			case <-time.After(50 * time.Millisecond):
			}
			resp, err := http.Get(rd.base + "/readyz")
			if err != nil || resp.StatusCode != 200 {
				readyDown.Add(1)
			}
			if err == nil {
				io.Copy(io.Discard, resp.Body)
				resp.Body.Close()
			}
		}
	}()
	for _, c := range cases {
		c.make(s.in)
	}
	nRecords := 0
	for i, c := range cases {
		switch {
		case c.status == "waiting" && longFaults():
			cases[i].status, cases[i].reason = detect.StatusQuarantined, "SigMF data file without its metadata"
			nRecords++
		case c.status != "" && c.status != "waiting":
			nRecords++
		}
	}
	wait := 20 * time.Second
	if longFaults() {
		wait = ingest.DefaultOrphanAfter + 20*time.Second
	}
	// Not waitFor: on a timeout the checks below name what is missing.
	for deadline := time.Now().Add(wait); countCaptures(t, s.logPath) < nRecords && time.Now().Before(deadline); {
		time.Sleep(50 * time.Millisecond)
	}
	time.Sleep(1200 * time.Millisecond) // two rescans more: nothing is recorded twice
	close(stopPoll)
	<-polled
	peak := heap.end()

	recs := checkLog(t, s.logPath)
	caps := captureRecords(recs)
	// The name as the log holds it: JSON carries UTF-8 only.
	// encoding/json writes U+FFFD for each invalid byte.
	logName := func(n string) string {
		var b strings.Builder
		for i, r := range n {
			if r == utf8.RuneError && !strings.HasPrefix(n[i:], "\uFFFD") {
				r = '\uFFFD'
			}
			b.WriteRune(r)
		}
		return b.String()
	}
	quarantined, analysed, skipped, waiting := 0, 0, 0, 0
	for _, c := range cases {
		if c.status == "" {
			skipped++
			continue
		}
		rs := caps[logName(c.name)]
		if c.status == "waiting" {
			waiting++
			if len(rs) != 0 {
				t.Errorf("%q: recorded %+v before the orphan time (%v)", c.name, rs, ingest.DefaultOrphanAfter)
			}
			continue
		}
		if len(rs) != 1 || rs[0].Status != c.status || !strings.Contains(rs[0].Error, c.reason) {
			t.Errorf("%q: records %+v, want one %s record (reason containing %q)", c.name, rs, c.status, c.reason)
			continue
		}
		if c.status == detect.StatusOK {
			analysed++
		} else {
			quarantined++
		}
	}
	for name := range caps {
		if !slices.ContainsFunc(cases, func(c hostile) bool { return c.status != "" && c.status != "waiting" && logName(c.name) == name }) {
			t.Errorf("unexpected capture record %q", name)
		}
	}
	if len(recs) > 0 {
		var sat struct {
			Stats detect.Stats `json:"stats"`
		}
		eventlog.Scan(s.logPath, func(rec eventlog.Record) error {
			var h struct{ Capture string }
			if json.Unmarshal(rec.Line, &h); rec.Kind == eventlog.KindCapture && h.Capture == "saturated.ci8" {
				json.Unmarshal(rec.Line, &sat)
			}
			return nil
		})
		if sat.Stats.ClipFraction != 1 {
			t.Errorf("saturated.ci8: clip_fraction %g, want 1 (every sample at a full-scale code)", sat.Stats.ClipFraction)
		}
	}
	if n := readyDown.Load(); n != 0 {
		t.Errorf("/readyz not 200 on %d polls", n)
	}
	if code, body := httpGet(t, rd.base+"/readyz"); code != 200 {
		t.Errorf("/readyz after the corpus: %d %s", code, body)
	}
	const heapLimit = 200 << 20
	if peak > heapLimit {
		t.Errorf("peak HeapInuse %d MiB, want below %d MiB", peak>>20, heapLimit>>20)
	}
	t.Logf("hostile corpus: %d inputs: %d quarantined with the expected reason, %d analysed, %d skipped (no record), %d waiting for metadata; peak HeapInuse %.1f MiB (50 MB metadata among them); /readyz never down",
		len(cases), quarantined, analysed, skipped, waiting, float64(peak)/(1<<20))
}

// TestFaultsFIFO: a FIFO named like a capture is quarantined as "not a
// regular file" without the daemon ever opening it for reading (an open of
// a FIFO blocks until a writer comes), and a capture after it is analysed.
// Should the daemon block anyway, the test opens the FIFO's write end to
// free it, so that it fails instead of hanging.
func TestFaultsFIFO(t *testing.T) {
	s := newSite(t, "")
	startDaemon(t, s)
	fifo := filepath.Join(s.in, "fifo.ci8")
	if err := syscall.Mkfifo(fifo, 0o644); err != nil {
		t.Skipf("cannot make a FIFO: %v", err)
	}
	t.Cleanup(func() {
		// Runs before the daemon's stop (cleanups run last-in first-out).
		for range 50 {
			f, err := os.OpenFile(fifo, os.O_WRONLY|syscall.O_NONBLOCK, 0)
			if err != nil {
				return // no reader blocked on it
			}
			f.Close()
			time.Sleep(20 * time.Millisecond)
		}
	})
	time.Sleep(300 * time.Millisecond)
	dropCapture(t, filepath.Join(s.in, "after.ci8"), ci8Capture(5, false))
	deadline := time.Now().Add(10 * time.Second)
	for countCaptures(t, s.logPath) < 2 && time.Now().Before(deadline) {
		time.Sleep(50 * time.Millisecond)
	}
	caps := captureRecords(readLog(t, s.logPath))
	if rs := caps["fifo.ci8"]; len(rs) != 1 || rs[0].Status != detect.StatusQuarantined || !strings.Contains(rs[0].Error, "not a regular file") {
		t.Errorf("fifo.ci8: %+v, want one quarantined record, reason \"not a regular file\" (daemon blocked opening the FIFO?)", rs)
	}
	if rs := caps["after.ci8"]; len(rs) != 1 || rs[0].Status != detect.StatusOK {
		t.Errorf("after.ci8: %+v, want one ok record: the daemon must not stall behind a FIFO", rs)
	}
}

// TestFaultsWatcher: the watched folder deleted and recreated, or moved
// away and back, loses the kernel's watches on it: the periodic rescan
// (rescan_interval, 500 ms here) must find every capture, each once. A
// flood that overflows the kernel's inotify queue, with the periodic rescan
// off (1 h), must be caught by the watcher's overflow rescan alone.
func TestFaultsWatcher(t *testing.T) {
	noRescan := func(t *testing.T) site {
		s := newSite(t, "")
		os.WriteFile(s.cfgPath, bytes.Replace(mustRead(t, s.cfgPath), []byte("rescan_interval: 500ms"), []byte("rescan_interval: 1h"), 1), 0o644)
		return s
	}
	t.Run("deleted and recreated", func(t *testing.T) {
		s := newSite(t, "")
		startDaemon(t, s)
		dropCapture(t, filepath.Join(s.in, "before.ci8"), ci8Capture(300, false))
		waitFor(t, 20*time.Second, "the first capture", func() bool { return countCaptures(t, s.logPath) == 1 })
		if err := os.RemoveAll(s.in); err != nil {
			t.Fatal(err)
		}
		time.Sleep(300 * time.Millisecond)
		for i := range 5 {
			dropCapture(t, filepath.Join(s.in, "again", fmt.Sprintf("r%d.ci8", i)), ci8Capture(uint64(301+i), false))
		}
		waitFor(t, 20*time.Second, "the captures in the recreated folder", func() bool { return countCaptures(t, s.logPath) == 6 })
		checkOnce(t, s, 6)
	})
	t.Run("moved away and back", func(t *testing.T) {
		s := newSite(t, "")
		startDaemon(t, s)
		away := s.in + ".away"
		dropCapture(t, filepath.Join(s.in, "m0.ci8"), ci8Capture(310, false))
		waitFor(t, 20*time.Second, "the first capture", func() bool { return countCaptures(t, s.logPath) == 1 })
		if err := os.Rename(s.in, away); err != nil {
			t.Fatal(err)
		}
		dropCapture(t, filepath.Join(away, "while-away.ci8"), ci8Capture(311, false))
		time.Sleep(300 * time.Millisecond)
		if err := os.Rename(away, s.in); err != nil {
			t.Fatal(err)
		}
		time.Sleep(300 * time.Millisecond)
		dropCapture(t, filepath.Join(s.in, "back.ci8"), ci8Capture(312, false))
		waitFor(t, 20*time.Second, "the captures after the move back", func() bool { return countCaptures(t, s.logPath) == 3 })
		checkOnce(t, s, 3)
	})
	t.Run("permission flipped", func(t *testing.T) {
		// The daemon must not read as root, for whom permission bits do
		// not count: as root the test runs it as nobody (65534).
		for _, c := range []struct{ name, sub string }{
			{"watched folder", ""},
			{"folder below it", "locked"},
		} {
			t.Run(c.name, func(t *testing.T) { permissionFlip(t, c.sub) })
		}
	})
	t.Run("queue overflow", func(t *testing.T) {
		const knob = "/proc/sys/fs/inotify/max_queued_events"
		old, err := os.ReadFile(knob)
		if err != nil {
			t.Skipf("cannot read %s: %v", knob, err)
		}
		// The limit is read when an inotify instance is made: lower it only
		// while the daemon starts, and restore it at once.
		if err := os.WriteFile(knob, []byte("32\n"), 0o644); err != nil {
			t.Skipf("cannot lower %s (needs root): %v", knob, err)
		}
		s := noRescan(t)
		os.WriteFile(s.cfgPath, append(mustRead(t, s.cfgPath), []byte("notify: inotify\nqueue_size: 512\n")...), 0o644)
		rd := func() *runningDaemon {
			defer os.WriteFile(knob, old, 0o644)
			return startDaemon(t, s)
		}()
		if now, _ := os.ReadFile(knob); !bytes.Equal(now, old) {
			t.Fatalf("%s not restored: %q, was %q", knob, now, old)
		}
		const n = 300
		for i := range n {
			dropCapture(t, filepath.Join(s.in, fmt.Sprintf("f%d", i%10), fmt.Sprintf("o%03d.ci8", i)), ci8Capture(uint64(400+i), false))
		}
		waitFor(t, 60*time.Second, "every capture of the flood", func() bool { return countCaptures(t, s.logPath) == n })
		st := rd.d.watcher.Stats()
		if st.Overflows == 0 {
			t.Errorf("no overflow with a 32-event queue and %d captures (%d events or more); stats %+v", n, 2*n, st)
		}
		checkOnce(t, s, n)
		t.Logf("inotify queue 32 events: %d captures dropped, %d overflows, %d rescans, all %d recorded once", n, st.Overflows, st.Rescans, n)
	})
}

// unprivileged is the user the daemon runs as when the tests run as root
// (nobody and nogroup on Debian).
const unprivileged = 65534

// startUnprivileged starts `quietband run` on s as a user for whom
// permission bits count: when the test runs as root, as uid and gid
// unprivileged (the test's temporary tree is given to that user and the
// test binary copied into it, since the build folder is root's alone);
// otherwise as the test's own user. It reports how it ran the daemon, or
// why it could not.
func startUnprivileged(t *testing.T, s site) (*daemonProcess, string, error) {
	if os.Geteuid() != 0 {
		p, err := startProcessAs(t, os.Args[0], nil, "run", "--config", s.cfgPath)
		return p, fmt.Sprintf("as the test's own uid %d", os.Geteuid()), err
	}
	bin := filepath.Join(s.dir, "quietband.test")
	if err := copyFile(os.Args[0], bin); err != nil {
		return nil, "", fmt.Errorf("copying the test binary: %w", err)
	}
	if err := os.Chmod(bin, 0o755); err != nil {
		return nil, "", err
	}
	// The tree from the test's own temporary folder down (t.TempDir's
	// parent is made 0700).
	root := filepath.Dir(s.dir)
	err := filepath.WalkDir(root, func(p string, _ fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		return os.Lchown(p, unprivileged, unprivileged)
	})
	if err != nil {
		return nil, "", fmt.Errorf("giving the test folder to uid %d: %w", unprivileged, err)
	}
	p, err := startProcessAs(t, bin, &syscall.Credential{Uid: unprivileged, Gid: unprivileged}, "run", "--config", s.cfgPath)
	return p, fmt.Sprintf("as uid/gid %d (the test runs as root)", unprivileged), err
}

// permissionFlip: the folder sub below the watched folder ("" for the
// watched folder itself) is made unreadable (mode 000) while captures
// arrive in it: the daemon logs an error naming the folder, records
// nothing for it and stays ready; once the mode is back, a rescan finds
// every capture written meanwhile, each analysed once.
func permissionFlip(t *testing.T, sub string) {
	s := newSite(t, "log_format: json\n")
	dir := filepath.Join(s.in, sub)
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	p, how, err := startUnprivileged(t, s)
	if err != nil {
		t.Skipf("cannot run the daemon as a user for whom permission bits count (%v); as root they do not stop reads", err)
	}
	t.Logf("daemon runs %s", how)
	var listen string
	waitFor(t, 20*time.Second, "the daemon up", func() bool {
		for l := range strings.Lines(p.out.String()) {
			var m struct{ Msg, Listen string }
			if json.Unmarshal([]byte(l), &m) == nil && m.Msg == "quietband run: started" {
				listen = m.Listen
				return true
			}
		}
		return false
	})
	ready := func() bool {
		resp, err := http.Get("http://" + listen + "/readyz")
		if err != nil {
			return false
		}
		resp.Body.Close()
		return resp.StatusCode == 200
	}
	dropCapture(t, filepath.Join(dir, "before.ci8"), ci8Capture(320, false))
	waitFor(t, 20*time.Second, "the first capture", func() bool { return countCaptures(t, s.logPath) == 1 })

	if err := os.Chmod(dir, 0); err != nil {
		t.Fatal(err)
	}
	chmodded := true
	t.Cleanup(func() {
		if chmodded {
			os.Chmod(dir, 0o755)
		}
	})
	// Captures written while the folder is unreadable: only a test run as
	// root can write into a folder of mode 000; otherwise they are written
	// just before the flip (and may or may not be seen before it).
	const meanwhile = 4
	if os.Geteuid() == 0 {
		for i := range meanwhile {
			dropCapture(t, filepath.Join(dir, fmt.Sprintf("locked%d.ci8", i)), ci8Capture(uint64(321+i), false))
		}
	} else {
		os.Chmod(dir, 0o755)
		for i := range meanwhile {
			dropCapture(t, filepath.Join(dir, fmt.Sprintf("locked%d.ci8", i)), ci8Capture(uint64(321+i), false))
		}
		os.Chmod(dir, 0)
	}
	// The error names the folder; a rescan (500 ms) runs into it.
	waitFor(t, 20*time.Second, "an error naming the unreadable folder", func() bool {
		for l := range strings.Lines(p.out.String()) {
			var m struct{ Level, Msg, Folder string }
			if json.Unmarshal([]byte(l), &m) == nil && m.Level == "ERROR" && strings.Contains(m.Msg, "cannot read folder") &&
				m.Folder == dir {
				return true
			}
		}
		return false
	})
	for range 10 { // a second and more of rescans while it stays unreadable
		if !ready() {
			t.Errorf("/readyz not 200 while %s is unreadable", dir)
			break
		}
		time.Sleep(100 * time.Millisecond)
	}
	if err := os.Chmod(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	chmodded = false
	dropCapture(t, filepath.Join(dir, "after.ci8"), ci8Capture(330, false))
	waitFor(t, 20*time.Second, "every capture once the folder is readable", func() bool {
		return countCaptures(t, s.logPath) == meanwhile+2
	})
	time.Sleep(1200 * time.Millisecond) // two rescans more: nothing is recorded twice
	if !ready() {
		t.Error("/readyz not 200 after the folder came back")
	}
	p.cmd.Process.Signal(syscall.SIGTERM)
	if code := p.wait(t, 20*time.Second); code != 0 {
		t.Errorf("exit %d after SIGTERM", code)
	}
	checkOnce(t, s, meanwhile+2) // no record for the folder itself
}

// checkOnce: n captures recorded, each once and ok.
func checkOnce(t *testing.T, s site, n int) {
	t.Helper()
	caps := captureRecords(checkLog(t, s.logPath))
	if len(caps) != n {
		t.Errorf("%d captures recorded, want %d", len(caps), n)
	}
	for name, rs := range caps {
		if len(rs) != 1 || rs[0].Status != detect.StatusOK {
			t.Errorf("%s: %+v, want one ok record", name, rs)
		}
	}
}

// TestFaultsLoad: captures arrive every 50 ms (60 s; 10 min with
// QUIETBAND_LONG=1) while /metrics is scraped 50 times a second. The
// backlog stays bounded (every capture recorded within a few seconds of
// the last arrival), the heap is flat (median HeapInuse of the last
// quarter against the first), and the p99 scrape time is below 50 ms. The
// scrape time is a measurement of a server under load, taken around each
// GET.
func TestFaultsLoad(t *testing.T) {
	dur := 60 * time.Second
	if longFaults() {
		dur = 10 * time.Minute
	}
	const every, scrape = 50 * time.Millisecond, 20 * time.Millisecond
	s := newSite(t, "queue_size: 256\n")
	rd := startDaemon(t, s)
	client := &http.Client{Timeout: 5 * time.Second}

	var mu sync.Mutex
	var lat []time.Duration
	var heaps []uint64
	scrapeErrs := 0
	stop := make(chan struct{})
	var wg sync.WaitGroup
	wg.Add(2)
	go func() {
		defer wg.Done()
		tick := time.NewTicker(scrape)
		defer tick.Stop()
		for {
			select {
			case <-stop:
				return
			case <-tick.C:
			}
			t0 := time.Now()
			resp, err := client.Get(rd.base + "/metrics")
			if err == nil {
				_, err = io.Copy(io.Discard, resp.Body)
				resp.Body.Close()
				if resp.StatusCode != 200 {
					err = fmt.Errorf("status %d", resp.StatusCode)
				}
			}
			d := time.Since(t0)
			mu.Lock()
			if err != nil {
				scrapeErrs++
			}
			lat = append(lat, d)
			mu.Unlock()
		}
	}()
	go func() {
		defer wg.Done()
		var ms runtime.MemStats
		tick := time.NewTicker(250 * time.Millisecond)
		defer tick.Stop()
		for {
			select {
			case <-stop:
				return
			case <-tick.C:
			}
			runtime.ReadMemStats(&ms)
			mu.Lock()
			heaps = append(heaps, ms.HeapInuse)
			mu.Unlock()
		}
	}()
	tick := time.NewTicker(every)
	n := 0
	maxBacklog := 0
	for end := time.Now().Add(dur); time.Now().Before(end); n++ {
		<-tick.C
		dropCapture(t, filepath.Join(s.in, fmt.Sprintf("h%03d", n/1000), fmt.Sprintf("l%05d.ci8", n)), ci8Capture(uint64(n%64), n%16 == 5))
		if n%20 == 0 {
			maxBacklog = max(maxBacklog, n+1-countCaptures(t, s.logPath))
		}
	}
	tick.Stop()
	last := time.Now()
	waitFor(t, 5*time.Second, "every capture recorded within 5 s of the last arrival", func() bool { return countCaptures(t, s.logPath) >= n })
	catchUp := time.Since(last)
	close(stop)
	wg.Wait()
	checkOnce(t, s, n)

	slices.Sort(lat)
	p := func(q float64) time.Duration { return lat[min(len(lat)-1, int(q*float64(len(lat))))] }
	if len(lat) < int(dur/scrape)/2 {
		t.Errorf("%d scrapes in %v, want about %d", len(lat), dur, dur/scrape)
	}
	if p99 := p(0.99); p99 >= 50*time.Millisecond {
		t.Errorf("/metrics p99 %v, want < 50 ms", p99)
	}
	if scrapeErrs > 0 {
		t.Errorf("%d scrapes failed", scrapeErrs)
	}
	qlen := len(heaps) / 4
	median := func(h []uint64) uint64 { h = slices.Clone(h); slices.Sort(h); return h[len(h)/2] }
	first, lastQ := median(heaps[:qlen]), median(heaps[len(heaps)-qlen:])
	// Flat: the last quarter within 1.5× (+8 MiB of GC slack) of the first.
	if lastQ > first*3/2+8<<20 {
		t.Errorf("HeapInuse grew: median %.1f MiB in the first quarter, %.1f MiB in the last", float64(first)/(1<<20), float64(lastQ)/(1<<20))
	}
	t.Logf("load %v: %d captures (one per %v), %d /metrics scrapes: p50 %v p99 %v max %v; backlog at most %d captures, all recorded %v after the last arrival; HeapInuse median %.1f MiB first quarter, %.1f MiB last",
		dur, n, every, len(lat), p(0.5).Round(10*time.Microsecond), p(0.99).Round(10*time.Microsecond), lat[len(lat)-1].Round(10*time.Microsecond),
		maxBacklog, catchUp.Round(time.Millisecond), float64(first)/(1<<20), float64(lastQ)/(1<<20))
}

// TestFaultsAnchors: the daemon logs the chain head every anchorEvery
// records (here 10, over 16 KiB rotated segments); for each anchor, the log
// cut after record seq verifies with Summary.Head equal to the anchored
// head (eventlog.Verify: prev_n = hex(SHA-256(line_{n-1})), FIPS 180-4).
// This is the auditor's check: anchors shipped elsewhere prove the log's
// history up to them; an altered record before an anchor breaks it.
func TestFaultsAnchors(t *testing.T) {
	s := newSite(t, "log_format: json\nlog:\n  max_bytes: 16384\n")
	rd := startDaemon(t, s, func(d *daemon) { d.anchorEvery = 10 })
	const n = 40
	for i := range n {
		dropCapture(t, filepath.Join(s.in, fmt.Sprintf("a%02d.ci8", i)), ci8Capture(uint64(600+i), i%3 == 0))
	}
	waitFor(t, 30*time.Second, "the captures", func() bool { return countCaptures(t, s.logPath) >= n })
	if err := rd.stop(); err != nil {
		t.Fatal(err)
	}
	segs, err := eventlog.Segments(s.logPath)
	if err != nil {
		t.Fatal(err)
	}
	sum, err := eventlog.Verify(segs...)
	if err != nil {
		t.Fatal(err)
	}
	var lines [][]byte // every record line, oldest first, across segments
	for _, seg := range segs {
		for l := range bytes.Lines(mustRead(t, seg)) {
			lines = append(lines, l)
		}
	}
	type anchor struct {
		Msg  string `json:"msg"`
		Seq  uint64 `json:"seq"`
		Head string `json:"head"`
	}
	var anchors []anchor
	prev := uint64(0)
	for l := range strings.Lines(rd.out.String()) {
		var a anchor
		if json.Unmarshal([]byte(l), &a) != nil || !strings.HasSuffix(a.Msg, "event log anchor") {
			continue
		}
		if a.Seq/10 <= prev/10 {
			t.Errorf("anchor at seq %d does not pass a multiple of 10 since the one at %d", a.Seq, prev)
		}
		prev = a.Seq
		anchors = append(anchors, a)
	}
	if want := int(sum.Records / 10); len(anchors) != want {
		t.Errorf("%d anchors over %d records, want %d (one per 10)", len(anchors), sum.Records, want)
	}
	cut := filepath.Join(t.TempDir(), "cut.jsonl")
	for _, a := range anchors {
		os.WriteFile(cut, bytes.Join(lines[:a.Seq], nil), 0o644)
		got, err := eventlog.Verify(cut)
		if err != nil || got.Records != a.Seq || got.Head != a.Head {
			t.Errorf("anchor seq %d head %s…: the log cut there verifies to %d records head %.16s… (%v)", a.Seq, a.Head[:16], got.Records, got.Head, err)
		}
	}
	// And the check has teeth: one byte changed in a record before the
	// first anchor no longer gives its head.
	if len(anchors) > 0 {
		a := anchors[0]
		bad := bytes.Clone(bytes.Join(lines[:a.Seq], nil))
		i := bytes.Index(bad, []byte(`"capture":"a`))
		bad[i+len(`"capture":"`)] = 'b'
		os.WriteFile(cut, bad, 0o644)
		if got, err := eventlog.Verify(cut); err == nil && got.Head == a.Head {
			t.Error("an altered record still matches the anchor")
		}
	}
	t.Logf("anchors: %d over %d records in %d segments, each matching eventlog.Verify of the log cut at its seq", len(anchors), sum.Records, len(segs))
}
