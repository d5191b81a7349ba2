package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"unicode/utf8"

	"quietband/ingest/synth"
)

// TestSynthDuration: `synth --duration D` writes what the synthesizer's
// own ScaleDuration makes of the scenario (every time within a capture
// scaled by D over its length): each truth's samples are D·rate and each
// emitter's start and end those of the scaled scenario (computed: the
// built-in scenario through ScaleDuration, then Normalize as Write does).
// A negative, infinite or NaN duration is refused naming the flag.
func TestSynthDuration(t *testing.T) {
	const d = 0.05
	for _, name := range []string{"demo", "recorder-faults", "jam-then-spoof"} {
		t.Run(name, func(t *testing.T) {
			dir := t.TempDir()
			if out, code := runCmd(t, "synth", "--scenario", name, "--duration", "0.05", "--out", dir); code != 0 {
				t.Fatalf("synth exit %d\n%s", code, out)
			}
			want, err := synth.Builtin(name)
			if err != nil {
				t.Fatal(err)
			}
			want.ScaleDuration(d)
			if err := want.Normalize(); err != nil {
				t.Fatal(err)
			}
			for i, c := range want.Captures {
				tb, err := os.ReadFile(filepath.Join(dir, c.Name+".truth.json"))
				if err != nil {
					t.Fatal(err)
				}
				var tr synth.Truth
				if err := json.Unmarshal(tb, &tr); err != nil {
					t.Fatal(err)
				}
				if n := int64(math.Round(d * tr.SampleRate)); tr.Samples != n {
					t.Errorf("capture %d: %d samples, want %d", i, tr.Samples, n)
				}
				if len(tr.Emitters) != len(c.Emitters) {
					t.Fatalf("capture %d: %d emitters, scenario %d", i, len(tr.Emitters), len(c.Emitters))
				}
				for j, e := range c.Emitters {
					got := tr.Emitters[j]
					if math.Abs(got.StartS-e.StartS) > 1e-12 || math.Abs(got.EndS-e.EndS) > 1e-12 {
						t.Errorf("capture %d emitter %d: %g–%g s, scaled scenario %g–%g s", i, j, got.StartS, got.EndS, e.StartS, e.EndS)
					}
				}
			}
		})
	}
	for _, bad := range []string{"-1", "Inf", "NaN"} {
		out, code := runCmd(t, "synth", "--scenario", "clean", "--duration", bad, "--out", t.TempDir())
		if code == 0 || !strings.Contains(out, "--duration") {
			t.Errorf("--duration %s: exit %d, %q", bad, code, out)
		}
	}
}

// TestSynthList: `synth --list` names every built-in scenario in a column
// as wide as the longest name, the description after it.
func TestSynthList(t *testing.T) {
	out, code := runCmd(t, "synth", "--list")
	if code != 0 {
		t.Fatalf("exit %d\n%s", code, out)
	}
	names := synth.BuiltinNames()
	width := 0
	for _, n := range names {
		width = max(width, utf8.RuneCountInString(n))
	}
	lines := strings.Split(strings.TrimSuffix(out, "\n"), "\n")
	if len(lines) != len(names) {
		t.Fatalf("%d lines for %d scenarios", len(lines), len(names))
	}
	for i, l := range lines {
		if !strings.HasPrefix(l, names[i]+" ") || strings.IndexFunc(l[len(names[i]):], func(r rune) bool { return r != ' ' })+len(names[i]) != width+2 {
			t.Errorf("line %q: want the name %q then the description from column %d", l, names[i], width+2)
		}
	}
}
