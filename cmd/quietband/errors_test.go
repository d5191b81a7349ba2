package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// Issue 18 item 6: errors that said the wrong thing. Each case is what the
// user ran, what they saw before (in the name) and what the message must
// now say; every one exits non-zero except a replay of only bad captures,
// which already exits 1 (and must no longer open with "no interference
// found").
func TestErrorsSayWhatWentWrong(t *testing.T) {
	dir := t.TempDir()
	caps := filepath.Join(dir, "caps")
	writeScenario(t, caps)
	logPath := filepath.Join(dir, "events.jsonl")
	if out, code := runCmd(t, "replay", "--quiet", "--log", logPath, caps); code != 0 {
		t.Fatalf("replay: %d\n%s", code, out)
	}
	empty := filepath.Join(dir, "empty")
	bad := filepath.Join(dir, "bad")
	os.MkdirAll(empty, 0o755)
	os.MkdirAll(bad, 0o755)
	os.WriteFile(filepath.Join(bad, "x.ci8"), []byte("xyz"), 0o644)
	unitless := filepath.Join(dir, "settle.yaml")
	os.WriteFile(unitless, []byte("inputs:\n  - path: "+caps+"\n    settle: 2\n"), 0o644)
	elsewhere := t.TempDir() // a --captures that holds none of the log's captures

	for _, tc := range []struct {
		name   string
		args   []string
		want   []string
		unwant []string
	}{
		{"verify on a missing file said no files given", []string{"verify", filepath.Join(dir, "nope.jsonl")},
			[]string{"nope.jsonl", "no such file"}, []string{"no files given"}},
		{"report without --captures drew nothing and exited 0", []string{"report", logPath, "--captures", elsewhere, "--out", filepath.Join(dir, "rep")},
			[]string{"none of the 5 analysed capture(s)", elsewhere, "--captures"}, nil},
		{"replay on an empty folder said no interference found", []string{"replay", "--quiet", empty},
			[]string{"no captures found in " + empty}, []string{"no interference found"}},
		{"replay of only bad captures said no interference found", []string{"replay", "--quiet", bad},
			[]string{"no capture could be analysed: 1 quarantined"}, []string{"no interference found"}},
		{"settle: 2 gave a YAML type error", []string{"run", "--config", unitless},
			[]string{"2 is a duration without a unit", "2s"}, []string{"time.Duration"}},
		{"replay --spectrum sideways", []string{"replay", "--quiet", "--spectrum", "sideways", caps},
			[]string{"--spectrum", "sideways", "inverted"}, nil},
		{"replay --clock-range beyond the search", []string{"replay", "--quiet", "--clock-range", "60000", caps},
			[]string{"--clock-range", "clock_range_hz 60000", "45000"}, nil},
		{"bench --rate 0 complained about a synthesized emitter", []string{"bench", "--rate", "0"},
			[]string{"--rate 0", "sample rate"}, []string{"emitter"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			out, code := runCmd(t, tc.args...)
			if code == 0 {
				t.Errorf("exit 0\n%s", out)
			}
			for _, w := range tc.want {
				if !strings.Contains(out, w) {
					t.Errorf("output lacks %q:\n%s", w, out)
				}
			}
			for _, w := range tc.unwant {
				if strings.Contains(out, w) {
					t.Errorf("output says %q:\n%s", w, out)
				}
			}
		})
	}
}
