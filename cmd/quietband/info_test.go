package main

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"quietband/detect"
	"quietband/ingest"
)

// realDir holds the two off-the-air recordings (testdata/realdata/README.md).
var realDir = filepath.Join("..", "..", "testdata", "realdata")

func runQB(t *testing.T, args ...string) (int, string, string) {
	t.Helper()
	var out, errOut bytes.Buffer
	code := runMain(args, &out, &errOut)
	return code, out.String(), errOut.String()
}

// TestInfoRealRecordings describes both recordings as their README says
// they were made and checks what info prints: format, file rate and
// analysed rate, centre, IF and LO (LO = 1575.42 − 3 MHz = 1572.42 MHz,
// the README's LO), the 2-bit levels ±1, ±3 of the README, the
// occupancy-based level and no fault line.
func TestInfoRealRecordings(t *testing.T) {
	code, out, errOut := runQB(t, "info", "--format", "ri8", "--rate", "12e6", "--center", "1575.42e6", "--if", "3e6", "--lo-side", "low",
		filepath.Join(realDir, "L1_20211125_004000_12MHz_I.bin"))
	if code != 0 {
		t.Fatalf("exit %d: %s%s", code, out, errOut)
	}
	for _, want := range []string{
		"format     ri8 (real-valued): 1200000 samples at 12 MS/s in the file",
		"analysed   600000 complex samples at 6 MS/s",
		"IF         3 MHz, low-side LO at 1572.420000 MHz (RF = LO + IF, upright)",
		"centre     1575.420000 MHz",
		"duration   0.1 s",
		"levels     2-bit: levels ±1, ±3",
		"level      ", "from the magnitude bit's occupancy p = 0.",
		"clip       0.00e+00 of complex samples with a saturated real sample",
	} {
		if !strings.Contains(out, want) {
			t.Errorf("info lacks %q:\n%s", want, out)
		}
	}
	if strings.Contains(out, "fault") {
		t.Errorf("fault line for a clean recording:\n%s", out)
	}
	code, out, _ = runQB(t, "info", "--format", "ci8", "--rate", "4e6", filepath.Join(realDir, "L1_20211202_084700_4MHz_IQ.bin"))
	for _, want := range []string{"format     ci8 (complex): 2000000 samples at 4 MS/s", "centre     unknown", "levels     2-bit: levels ±1, ±3",
		"(the file's modification time less its duration)"} {
		if code != 0 || !strings.Contains(out, want) {
			t.Errorf("exit %d, info lacks %q:\n%s", code, want, out)
		}
	}
}

// TestInfoRefusals checks that info never fills in a rate, an IF or an
// LO side (DESIGN.md "Inputs": a raw file whose rate is not known is
// refused, never guessed): each BAD line names the file and the setting
// to give, and the exit status is 1; and that a dead front end gets its
// fault line.
func TestInfoRefusals(t *testing.T) {
	dir := t.TempDir()
	write := func(name string, data []byte) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, data, 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	noise := make([]byte, 4000)
	for i := range noise {
		noise[i] = byte(i*7919%251) - 125
	}
	ci16 := write("cap.ci16", noise)
	bin := write("cap.bin", noise)
	ri8 := write("real.ri8", noise)
	cases := []struct {
		args []string
		want []string
	}{
		{[]string{ci16}, []string{"BAD  " + ci16, "no sample rate", "--rate", "sample_rate"}},
		{[]string{bin}, []string{"BAD  " + bin, "neither SigMF nor a sample format", "--format"}},
		{[]string{"--format", "ci8", bin}, []string{"BAD  " + bin, "--rate"}},
		{[]string{"--rate", "12e6", ri8}, []string{"BAD  " + ri8, "IF is not known", "--if"}},
		{[]string{"--rate", "12e6", "--if", "3e6", ri8}, []string{"BAD  " + ri8, "LO side is not known", "--lo-side"}},
		{[]string{"--rate", "12e6", "--if", "1e6", "--lo-side", "high", ri8}, []string{"BAD  " + ri8, "0.2–0.3"}},
	}
	for _, tc := range cases {
		code, out, _ := runQB(t, append([]string{"info"}, tc.args...)...)
		if code != 1 {
			t.Errorf("%v: exit %d, want 1", tc.args, code)
		}
		for _, w := range tc.want {
			if !strings.Contains(out, w) {
				t.Errorf("%v: output lacks %q:\n%s", tc.args, w, out)
			}
		}
	}
	for _, bad := range [][]string{{"--rate", "-4e6"}, {"--rate", "fast"}, {"--lo-side", "upper"}, {"--pattern", "[x"}, {"--if", "-3e6"}, {"--format", "cs16"}} {
		code, _, errOut := runQB(t, append(append([]string{"info"}, bad...), ci16)...)
		if code == 0 || !strings.Contains(errOut, bad[0]) {
			t.Errorf("%v: exit %d, stderr %q", bad, code, errOut)
		}
	}
	dead := write("dead.ci16", make([]byte, 4000))
	_, out, _ := runQB(t, "info", "--rate", "1e6", dead)
	if !strings.Contains(out, "fault      dead: all 1000 samples are exactly zero") {
		t.Errorf("dead capture:\n%s", out)
	}
}

// TestRawInputConfig checks the input keys of the configuration: no
// default rate or centre, real formats need if_hz and lo_side that the
// conversion can use, and bad values are errors naming the key.
func TestRawInputConfig(t *testing.T) {
	dir := t.TempDir()
	in := filepath.Join(dir, "in")
	load := func(input string) (*runConfig, error) {
		p := filepath.Join(t.TempDir(), "c.yaml")
		os.WriteFile(p, []byte("inputs:\n  - {path: "+in+input+"}\n"), 0o644)
		return loadRunConfig(p, runOverrides{})
	}
	cfg, err := load(", format: ri8, sample_rate: 12e6, center_hz: 1575.42e6, if_hz: 3e6, lo_side: low, pattern: '*.bin', spectrum: inverted")
	if err != nil {
		t.Fatal(err)
	}
	want := ingest.RawSettings{Format: ingest.RI8, SampleRate: 12e6, CenterHz: 1575.42e6, HasCenter: true, IFHz: 3e6, LOSide: ingest.LowSide, Pattern: "*.bin",
		Spectrum: ingest.OrientationInverted}
	if got := cfg.Inputs[0].rawSettings(); got != want {
		t.Errorf("raw settings %+v, want %+v", got, want)
	}
	cfg, err = load("")
	if err != nil || cfg.Inputs[0].rawSettings() != (ingest.RawSettings{}) {
		t.Errorf("no raw keys: %+v, %v (want no defaults)", cfg.Inputs[0].rawSettings(), err)
	}
	for _, tc := range []struct{ input, want string }{
		{", format: ri8, sample_rate: 12e6", "if_hz"},
		{", format: ri8, sample_rate: 12e6, if_hz: 3e6", "lo_side"},
		{", format: ri8, sample_rate: 12e6, if_hz: 5e6, lo_side: low", "0.2–0.3"},
		{", lo_side: upper", "lo_side"},
		{", if_hz: -1", "if_hz"},
		{", pattern: '[bin'", "pattern"},
		{", sample_rate: -4e6", "sample_rate"},
		{", format: cs16_le", "format"},
		{", spectrum: swapped", "spectrum"},
	} {
		if _, err := load(tc.input); err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%q: error %v, want one naming %q", tc.input, err, tc.want)
		}
	}
	// --watch carries the flags' settings.
	cfg, err = loadRunConfig("", runOverrides{watch: []string{in}, raw: want})
	if err != nil || cfg.Inputs[0].rawSettings() != want {
		t.Errorf("--watch: %+v, %v", cfg.Inputs[0].rawSettings(), err)
	}
}

// TestReplayQuarantinesRawWithoutRate: replay records a raw file without
// a rate as quarantined, with the reason naming the file and --rate, and
// analyses the real recording converted to complex baseband at 6 MS/s.
func TestReplayQuarantinesRawWithoutRate(t *testing.T) {
	dir := t.TempDir()
	os.WriteFile(filepath.Join(dir, "norate.ci8"), make([]byte, 2000), 0o644)
	code, out, errOut := runQB(t, "replay", "--json", "--quiet", "--workers", "1", filepath.Join(dir, "norate.ci8"))
	if code != 1 {
		t.Errorf("exit %d, want 1: %s", code, errOut)
	}
	var rec detect.CaptureRecord
	for _, line := range strings.Split(strings.TrimSpace(out), "\n") {
		if strings.Contains(line, `"kind":"capture"`) {
			json.Unmarshal([]byte(line), &rec)
		}
	}
	if rec.Status != detect.StatusQuarantined || !strings.Contains(rec.Error, "norate.ci8") || !strings.Contains(rec.Error, "--rate") {
		t.Errorf("record %+v, want quarantined naming the file and --rate\n%s", rec, out)
	}
}
