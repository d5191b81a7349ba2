package main

import (
	"bytes"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"quietband/ingest"
	"quietband/metrics/eventlog"
	"quietband/metrics/monitor/monitortest"
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

// site is a folder tree and a configuration file for a daemon process:
// one input, "roof", of monitortest's raw ci8 captures.
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
`, s.in, monitortest.Rate, s.state) + extra
	if err := os.WriteFile(s.cfgPath, []byte(cfg), 0o644); err != nil {
		t.Fatal(err)
	}
	return s
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
		{"bad listen", "listen: 7461\n", "listen"},
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
		if cfg.Listen != "127.0.0.1:7461" || cfg.StateDir != defaultStateDir ||
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
	out  *monitortest.Buffer
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
	out := &monitortest.Buffer{}
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
			t.Logf("daemon output:\n%s", monitortest.Tail(out.String(), 40))
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
			monitortest.Drop(t, filepath.Join(s.in, fmt.Sprintf("c%03d.ci8", i)), monitortest.CI8(uint64(1000+i), tone(i)))
		}
	}()
	monitortest.WaitFor(t, 30*time.Second, "a first part of the burst recorded", func() bool { return monitortest.CountCaptures(t, s.logPath) >= 25 })
	if err := p.cmd.Process.Signal(syscall.SIGKILL); err != nil {
		t.Fatal(err)
	}
	p.wait(t, 10*time.Second)
	atKill := monitortest.CountCaptures(t, s.logPath)
	if atKill >= n {
		t.Fatalf("all %d captures were done before the kill; the test did not kill mid-burst", n)
	}
	t.Logf("killed after %d of %d captures", atKill, n)

	p = startProcess(t, "run", "--config", s.cfgPath)
	monitortest.WaitFor(t, 40*time.Second, "the rest of the burst", func() bool { return monitortest.CountCaptures(t, s.logPath) >= n })
	// SIGHUP reopens the log and reloads; the daemon carries on.
	os.WriteFile(s.cfgPath, bytes.Replace(monitortest.MustRead(t, s.cfgPath), []byte("log_level: debug"), []byte("log_level: info"), 1), 0o644)
	p.cmd.Process.Signal(syscall.SIGHUP)
	monitortest.WaitFor(t, 10*time.Second, "the reload", func() bool { return strings.Contains(p.out.String(), "log level changed") })
	monitortest.Drop(t, filepath.Join(s.in, "after-hup.ci8"), monitortest.CI8(5000, false))
	monitortest.WaitFor(t, 20*time.Second, "a capture after SIGHUP", func() bool { return monitortest.CountCaptures(t, s.logPath) >= n+1 })
	// SIGTERM: a clean stop, exit status 0.
	p.cmd.Process.Signal(syscall.SIGTERM)
	if code := p.wait(t, 20*time.Second); code != 0 {
		t.Errorf("exit status %d after SIGTERM, want 0", code)
	}

	recs := monitortest.CheckLog(t, s.logPath)
	caps := monitortest.CaptureRecords(recs)
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
