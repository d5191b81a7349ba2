package main

import (
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestReportRedrawsRealIF: 'quietband report' redraws a raw real-IF
// capture (testdata/realdata's ri8 recording at 12 MS/s, IF 3 MHz,
// low-side LO; BSD 2-clause licence beside it) from the log replay wrote,
// reopening it with the IF, LO side, format and rate the record states:
// the capture is drawn, and its spectrogram spans the analysed complex
// stream (6 MS/s after the IF conversion: ±3 MHz about the centre, to
// within one grid column), not the file's 12 MS/s; the replay's own
// pictures of it are the same bytes.
func TestReportRedrawsRealIF(t *testing.T) {
	const name = "L1_20211125_004000_12MHz_I.bin"
	data, err := os.ReadFile(filepath.Join("..", "..", "testdata", "realdata", name))
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	caps := filepath.Join(dir, "caps")
	if err := os.MkdirAll(caps, 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(caps, name), data, 0o644); err != nil {
		t.Fatal(err)
	}
	log := filepath.Join(dir, "events.jsonl")
	first := filepath.Join(dir, "replay-report")
	if out, code := runCmd(t, "replay", "--format", "ri8", "--rate", "12e6", "--center", "1575.42e6", "--if", "3e6", "--lo-side", "low", "--pattern", "*.bin",
		"--report", first, "--report-all", "--log", log, caps); code != 0 {
		t.Fatalf("replay exit %d\n%s", code, out)
	}
	rep := filepath.Join(dir, "report")
	out, code := runCmd(t, "report", log, "--captures", caps, "--out", rep, "--all")
	if code != 0 || strings.Contains(out, "not redrawn") || !strings.Contains(out, "1 drawn, 0 not found") {
		t.Fatalf("report exit %d\n%s", code, out)
	}
	var spectro string
	for _, c := range readReportJSON(t, rep).Captures {
		for _, p := range c.Pictures {
			if strings.HasSuffix(p.File, "-spectrogram.png") {
				spectro = p.File
				// One column of the grid (at most 512 across the band).
				if math.Abs(p.XLeft+3e6) > 6e6/512 || math.Abs(p.XRight-3e6) > 6e6/512 {
					t.Errorf("spectrogram spans %g … %g Hz, want the analysed ±3 MHz", p.XLeft, p.XRight)
				}
			}
		}
	}
	if spectro == "" {
		t.Fatal("no spectrogram in report.json")
	}
	a, err := os.ReadFile(filepath.Join(first, spectro))
	if err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile(filepath.Join(rep, spectro))
	if err != nil {
		t.Fatal(err)
	}
	if string(a) != string(b) {
		t.Errorf("%s: the redrawn spectrogram differs from replay's", spectro)
	}
}
