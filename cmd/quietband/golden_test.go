package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"quietband/ingest/synth"
	"quietband/metrics/monitor/monitortest"
)

// goldenDir holds the golden outputs (testdata/golden): what the code
// wrote for the same input when the file was last regenerated. It is
// absolute: TestGoldenReplay runs in a folder of its own.
var goldenDir = func() string {
	d, err := filepath.Abs(filepath.Join("..", "..", "testdata", "golden"))
	if err != nil {
		panic(err)
	}
	return d
}()

// checkGolden compares got with the golden file name byte for byte, or
// rewrites the file when QUIETBAND_GOLDEN=update. A golden file is only
// ever regenerated in a commit of its own that says why (a detector
// change in detect/): never to hide a change of behaviour.
func checkGolden(t *testing.T, name string, got []byte) {
	t.Helper()
	path := filepath.Join(goldenDir, name)
	if os.Getenv("QUIETBAND_GOLDEN") == "update" {
		if err := os.WriteFile(path, got, 0o644); err != nil {
			t.Fatal(err)
		}
		t.Logf("%s rewritten (%d bytes)", path, len(got))
		return
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (QUIETBAND_GOLDEN=update writes it)", err)
	}
	if bytes.Equal(got, want) {
		return
	}
	g, w := bytes.Split(got, []byte("\n")), bytes.Split(want, []byte("\n"))
	for i := range max(len(g), len(w)) {
		var gl, wl []byte
		if i < len(g) {
			gl = g[i]
		}
		if i < len(w) {
			wl = w[i]
		}
		if !bytes.Equal(gl, wl) {
			t.Fatalf("%s: line %d differs (%d lines, golden %d):\n got: %.600s\nwant: %.600s", path, i+1, len(g), len(w), gl, wl)
		}
	}
}

// TestGoldenDemo: the demo's event log is byte for byte the golden one
// (testdata/golden/demo-events.jsonl): the same captures (the synthesizer
// writes the same bytes, ingest/synth's golden test) give the same
// records, ids, stats and satellites, in the same order, and so the same
// hash chain. Its table names the scenario's events.
func TestGoldenDemo(t *testing.T) {
	dir := t.TempDir()
	out, code := runCmd(t, "demo", "--out", dir)
	if code != 0 {
		t.Fatalf("demo exit %d\n%s", code, out)
	}
	for _, want := range []string{"quay-0603.sigmf-meta  swept", "quay-0604.sigmf-meta  cw", "quay-0605.sigmf-meta  pulsed",
		"quay-0606.sigmf-meta  wideband_noise", "cn0_drop", "quay-0608.sigmf-meta  spoofing", "9 capture(s), 0 bad"} {
		if !strings.Contains(out, want) {
			t.Errorf("demo output lacks %q", want)
		}
	}
	checkGolden(t, "demo-events.jsonl", monitortest.MustRead(t, filepath.Join(dir, "events.jsonl")))
}

// writeGoldenCaptures lays out the test captures of TestGoldenReplay
// under the current folder: the short scenario of the replay tests, two
// of the demo's captures with satellites, a SigMF recording cut to an odd
// length and a raw file without a rate (both quarantined), and copies of
// the two real recordings (testdata/realdata) with a fixed modification
// time (a raw file's start is its modification time less its length).
func writeGoldenCaptures(t *testing.T, realAbs string) {
	t.Helper()
	writeScenario(t, "caps")
	s := synth.Demo()
	s.Captures = s.Captures[:2]
	for i := range s.Captures {
		s.Captures[i].DurationS = 0.12
	}
	if _, err := synth.Write(&s, filepath.Join("caps", "sky")); err != nil {
		t.Fatal(err)
	}
	os.MkdirAll(filepath.Join("caps", "bad"), 0o755)
	for _, ext := range []string{".sigmf-meta", ".sigmf-data"} {
		b := monitortest.MustRead(t, filepath.Join("caps", "c-cw"+ext))
		if ext == ".sigmf-data" {
			b = b[:len(b)-1]
		}
		if err := os.WriteFile(filepath.Join("caps", "bad", "odd"+ext), b, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	if err := os.WriteFile(filepath.Join("caps", "bad", "norate.ci8"), make([]byte, 2000), 0o644); err != nil {
		t.Fatal(err)
	}
	os.MkdirAll("real", 0o755)
	at := time.Date(2021, 12, 2, 8, 47, 1, 0, time.UTC)
	for _, name := range []string{"L1_20211202_084700_4MHz_IQ.bin", "L1_20211125_004000_12MHz_I.bin"} {
		p := filepath.Join("real", name)
		if err := os.WriteFile(p, monitortest.MustRead(t, filepath.Join(realAbs, name)), 0o644); err != nil {
			t.Fatal(err)
		}
		if err := os.Chtimes(p, at, at); err != nil {
			t.Fatal(err)
		}
	}
}

// TestGoldenReplay: a replay of the test captures (writeGoldenCaptures),
// then of each real recording with the settings of its README, appended
// to one event log, is byte for byte the golden one
// (testdata/golden/replay-events.jsonl), with one worker (satellites
// measured inside the spectral pass) and with two (on a read of their
// own). The replay runs in a temporary folder with relative paths, so
// that the quarantine reasons, which name the file, are the same
// everywhere.
func TestGoldenReplay(t *testing.T) {
	realAbs, err := filepath.Abs(realDir)
	if err != nil {
		t.Fatal(err)
	}
	t.Chdir(t.TempDir())
	writeGoldenCaptures(t, realAbs)
	var logs [][]byte
	for _, workers := range []string{"1", "2"} {
		log := "w" + workers + ".jsonl"
		runs := [][]string{
			{"caps"},
			{"--format", "ci8", "--rate", "4e6", "--center", "1575.42e6", filepath.Join("real", "L1_20211202_084700_4MHz_IQ.bin")},
			{"--format", "ri8", "--rate", "12e6", "--center", "1575.42e6", "--if", "3e6", "--lo-side", "low",
				filepath.Join("real", "L1_20211125_004000_12MHz_I.bin")},
		}
		for i, args := range runs {
			out, code := runCmd(t, append([]string{"replay", "--quiet", "--workers", workers, "--log", log}, args...)...)
			if want := map[bool]int{true: 1, false: 0}[i == 0]; code != want {
				t.Fatalf("replay %q: exit %d, want %d\n%s", args, code, want, out)
			}
		}
		logs = append(logs, monitortest.MustRead(t, log))
	}
	if !bytes.Equal(logs[0], logs[1]) {
		t.Errorf("the logs of 1 and 2 workers differ (%d and %d bytes)", len(logs[0]), len(logs[1]))
	}
	for _, want := range []string{`"status":"quarantined"`, `"prn":`, `"class":"cw"`, `"class":"pulsed"`} {
		if !bytes.Contains(logs[0], []byte(want)) {
			t.Errorf("the replay's log lacks %s: the golden input no longer covers it", want)
		}
	}
	checkGolden(t, "replay-events.jsonl", logs[0])
}
