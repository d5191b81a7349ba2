package main

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"image"
	"image/color"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"quietband/detect"
	"quietband/ingest"
	"quietband/ingest/synth"
	"quietband/metrics/eventlog"
	"quietband/metrics/report"
)

// Truth of the report scenario (synth's own definitions: a tone at
// toneHz; a linear up-chirp from chirpLow to chirpHigh every chirpPeriod,
// starting at chirpStart, f(t) = low + (high − low)·frac((t − start)/P)).
const (
	reportFs    = 4e6
	toneHz      = 500e3
	chirpLow    = -1.5e6
	chirpHigh   = 1.5e6
	chirpPeriod = 0.05
	chirpStart  = 0.02
	reportDur   = 0.12
)

func writeReportScenario(t *testing.T, dir string) {
	t.Helper()
	s := synth.Scenario{Name: "report", SampleRate: reportFs, Format: "cf32_le", Captures: []synth.Capture{
		{Name: "a-clean", DurationS: 0.06},
		{Name: "b-clean", DurationS: 0.06, OffsetS: 60},
		{Name: "c-cw", DurationS: reportDur, OffsetS: 120, Emitters: []synth.Emitter{
			{Kind: synth.KindCW, Tones: []synth.Tone{{OffsetHz: toneHz, JNDB: 10}}}}},
		{Name: "d-chirp", DurationS: reportDur, OffsetS: 180, Emitters: []synth.Emitter{
			{Kind: synth.KindSwept, LowHz: chirpLow, HighHz: chirpHigh, PeriodS: chirpPeriod, Shape: "up", JNDB: 12, StartS: chirpStart}}},
	}}
	if _, err := synth.Write(&s, dir); err != nil {
		t.Fatal(err)
	}
}

func pngAt(t *testing.T, path string) image.Image {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	return img
}

func rgbOf(c color.Color) (float64, float64, float64) {
	r, g, b, _ := c.RGBA()
	return float64(r >> 8), float64(g >> 8), float64(b >> 8)
}

// lum is the relative luminance (ITU-R BT.709 weights); the report's
// colour ramp rises in it with power.
func lum(c color.Color) float64 {
	r, g, b := rgbOf(c)
	return 0.2126*r + 0.7152*g + 0.0722*b
}

func dist(c color.Color, k color.NRGBA) float64 {
	r, g, b := rgbOf(c)
	return math.Sqrt((r-float64(k.R))*(r-float64(k.R)) + (g-float64(k.G))*(g-float64(k.G)) + (b-float64(k.B))*(b-float64(k.B)))
}

func colourNear(img image.Image, x, y float64, k color.NRGBA) bool {
	for dy := -1; dy <= 1; dy++ {
		for dx := -1; dx <= 1; dx++ {
			if dist(img.At(int(math.Round(x))+dx, int(math.Round(y))+dy), k) < 40 {
				return true
			}
		}
	}
	return false
}

// brightestX is the column of the brightest pixel of row y inside the
// data area, skipping the colours of event boxes.
func brightestX(img image.Image, l report.Layout, y float64) float64 {
	best, bestL := -1.0, -1.0
	for x := math.Ceil(l.Left); x < l.Right; x++ {
		c := img.At(int(x), int(y))
		boxed := false
		for _, cl := range detect.Classes {
			if dist(c, report.ClassColor(cl)) < 60 {
				boxed = true
			}
		}
		if v := lum(c); !boxed && v > bestL {
			best, bestL = x, v
		}
	}
	return best
}

type reportJSON struct {
	Captures []struct {
		Capture  string          `json:"capture"`
		Events   int             `json:"events"`
		Pictures []report.Layout `json:"pictures"`
	} `json:"captures"`
}

func readReportJSON(t *testing.T, dir string) reportJSON {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(dir, "report.json"))
	if err != nil {
		t.Fatal(err)
	}
	var r reportJSON
	if err := json.Unmarshal(b, &r); err != nil {
		t.Fatal(err)
	}
	return r
}

// TestReplayReport runs replay with --report, --csv and --annotate over a
// CW capture and a slow chirp, then checks the pictures against the
// synthesizer's truth through the pictures' stated layouts (the tone's
// line at its frequency, the chirp's line at f(t) row by row, each event's
// box at its samples and band), the CSV against the log, the annotated
// metadata against the SigMF rules, and that 'quietband report' rebuilds
// byte-identical pictures from the log.
func TestReplayReport(t *testing.T) {
	dir := t.TempDir()
	caps := filepath.Join(dir, "caps")
	writeReportScenario(t, caps)
	rep := filepath.Join(dir, "report")
	csvPath := filepath.Join(dir, "events.csv")
	log := filepath.Join(dir, "events.jsonl")
	if out, code := runCmd(t, "replay", "--report", rep, "--csv", csvPath, "--annotate", "--log", log, caps); code != 0 {
		t.Fatalf("replay exit %d\n%s", code, out)
	}

	// The log's events, which the CSV must list one row each.
	var logged []detect.Event
	if err := eventlog.Scan(log, func(r eventlog.Record) error {
		if r.Kind == eventlog.KindEvent {
			var e detect.Event
			logged = append(logged, e)
			return r.Decode(&logged[len(logged)-1])
		}
		return nil
	}); err != nil {
		t.Fatal(err)
	}
	f, err := os.Open(csvPath)
	if err != nil {
		t.Fatal(err)
	}
	rows, err := csv.NewReader(f).ReadAll()
	f.Close()
	if err != nil {
		t.Fatal(err)
	}
	if len(logged) < 2 || len(rows) != 1+len(logged) || strings.Join(rows[0], ",") != strings.Join(report.CSVColumns, ",") {
		t.Fatalf("%d CSV rows (header %q) for %d logged events", len(rows)-1, rows[0], len(logged))
	}
	for i, e := range logged {
		if rows[i+1][1] != e.ID || rows[i+1][0] != e.Capture {
			t.Errorf("CSV row %d is %q, the log's event %d is %s in %s", i+1, rows[i+1][:2], i, e.ID, e.Capture)
		}
	}

	rj := readReportJSON(t, rep)
	spectro := map[string]report.Layout{}
	for _, c := range rj.Captures {
		for _, p := range c.Pictures {
			if strings.HasSuffix(p.File, "-spectrogram.png") {
				spectro[c.Capture] = p
			}
		}
	}
	for _, name := range []string{"c-cw.sigmf-meta", "d-chirp.sigmf-meta"} {
		l, ok := spectro[name]
		if !ok {
			t.Fatalf("no spectrogram of %s in report.json", name)
		}
		img := pngAt(t, filepath.Join(rep, l.File))
		if img.Bounds().Dx() != report.SpectrogramWidth || img.Bounds().Dy() != report.SpectrogramHeight {
			t.Fatalf("%s: %v", l.File, img.Bounds())
		}
		// Tolerance across: one grid column (512 columns over fs), the
		// chirp's travel over one grid row and one frame, and 2 px.
		pxPerHz := (l.Right - l.Left) / (l.XRight - l.XLeft)
		colPx := reportFs / 512 * pxPerHz
		var hits, rowsSeen int
		for y := l.YPixel(0.003); y < l.YPixel(reportDur-0.003); y += 5 {
			tSec := l.YTop + (y-l.Top)/(l.Bottom-l.Top)*(l.YBottom-l.YTop)
			want, tol := toneHz, colPx+2
			if name == "d-chirp.sigmf-meta" {
				if tSec < chirpStart+0.002 {
					continue
				}
				u := math.Mod(tSec-chirpStart, chirpPeriod) / chirpPeriod
				if u < 0.06 || u > 0.94 {
					continue // the flyback
				}
				want = chirpLow + (chirpHigh-chirpLow)*u
				rate := (chirpHigh - chirpLow) / chirpPeriod
				rowS := 3 * 1024 / reportFs // at most 3 frames per row here
				tol = colPx + rate*rowS*pxPerHz + 2
			}
			rowsSeen++
			if got := brightestX(img, l, y); math.Abs(got-l.XPixel(want)) <= tol {
				hits++
			}
		}
		if rowsSeen < 40 || hits < rowsSeen*9/10 {
			t.Errorf("%s: signal line where the truth puts it in %d of %d rows", name, hits, rowsSeen)
		}
		// Each event's box: left, right and bottom edges at its extent.
		for _, e := range logged {
			if e.Capture != name {
				continue
			}
			k := report.ClassColor(e.Class)
			x0, x1 := l.XPixel(e.OffsetHz-e.BandwidthHz/2), l.XPixel(e.OffsetHz+e.BandwidthHz/2)
			if x1-x0 < report.MinBoxPixels {
				m := (x0 + x1) / 2
				x0, x1 = m-report.MinBoxPixels/2, m+report.MinBoxPixels/2
			}
			x0, x1 = math.Max(x0, l.Left+1), math.Min(x1, l.Right-1)
			y0 := l.YPixel(float64(e.SampleStart) / reportFs)
			y1 := math.Min(l.YPixel(float64(e.SampleStart+e.SampleCount)/reportFs), l.Bottom-1)
			var on, n int
			for y := y0 + 22; y < y1-3; y += 3 {
				n += 2
				if colourNear(img, x0, y, k) {
					on++
				}
				if colourNear(img, x1, y, k) {
					on++
				}
			}
			for x := x0 + 2; x < x1-2; x += 2 {
				n++
				if colourNear(img, x, y1, k) {
					on++
				}
			}
			if n < 10 || on < n*95/100 {
				t.Errorf("%s %s box %.0f..%.0f × %.0f..%.0f: %d of %d edge samples in %v", name, e.Class, x0, x1, y0, y1, on, n, k)
			}
		}
	}

	// Annotated copies: under annotations/ with the capture's own name,
	// one annotation per event, SigMF core rules.
	for _, name := range []string{"c-cw.sigmf-meta", "d-chirp.sigmf-meta"} {
		mf, err := os.Open(filepath.Join(rep, "annotations", name))
		if err != nil {
			t.Fatal(err)
		}
		m, err := ingest.ParseMeta(mf)
		mf.Close()
		if err != nil {
			t.Fatal(err)
		}
		want := 0
		for _, e := range logged {
			if e.Capture == name {
				want++
			}
		}
		if len(m.Annotations) != want || want == 0 {
			t.Errorf("%s: %d annotations for %d events", name, len(m.Annotations), want)
		}
		for _, a := range m.Annotations {
			if a.SampleCount == nil || a.FreqLowerEdge == nil || a.FreqUpperEdge == nil || *a.FreqLowerEdge > *a.FreqUpperEdge ||
				len(a.Label) > report.MaxLabel || a.Generator != "quietband "+detect.Version {
				t.Errorf("%s: annotation %+v breaks the SigMF core rules", name, a)
			}
		}
	}
	if _, err := os.Stat(filepath.Join(rep, "annotations", "a-clean.sigmf-meta")); !os.IsNotExist(err) {
		t.Errorf("a capture without events got an annotated copy (%v)", err)
	}

	// 'quietband report' over the log rebuilds the same pictures.
	rep2 := filepath.Join(dir, "rebuilt")
	if out, code := runCmd(t, "report", log, "--captures", caps, "--out", rep2); code != 0 {
		t.Fatalf("report exit %d\n%s", code, out)
	}
	for _, l := range spectro {
		a, _ := os.ReadFile(filepath.Join(rep, l.File))
		b, err := os.ReadFile(filepath.Join(rep2, l.File))
		if err != nil || !bytes.Equal(a, b) {
			t.Errorf("%s: rebuilt picture differs from replay's (%v)", l.File, err)
		}
	}
	if r2 := readReportJSON(t, rep2); len(r2.Captures) != len(rj.Captures) {
		t.Errorf("rebuilt report lists %d captures, replay's %d", len(r2.Captures), len(rj.Captures))
	}
}

// TestReplayAnnotateInPlace: --annotate --in-place rewrites the captures'
// own metadata; a second run replaces, not adds; a capture the log
// cannot find is listed by 'report' without pictures.
func TestReplayAnnotateInPlace(t *testing.T) {
	dir := t.TempDir()
	caps := filepath.Join(dir, "caps")
	writeReportScenario(t, caps)
	meta := filepath.Join(caps, "c-cw.sigmf-meta")
	count := func() int {
		f, err := os.Open(meta)
		if err != nil {
			t.Fatal(err)
		}
		defer f.Close()
		m, err := ingest.ParseMeta(f)
		if err != nil {
			t.Fatal(err)
		}
		return len(m.Annotations)
	}
	var counts []int
	for i := 0; i < 2; i++ {
		if out, code := runCmd(t, "replay", "--annotate", "--in-place", caps); code != 0 {
			t.Fatalf("replay exit %d\n%s", code, out)
		}
		counts = append(counts, count())
	}
	if counts[0] == 0 || counts[1] != counts[0] {
		t.Errorf("annotations after two in-place runs: %v", counts)
	}
	for _, args := range [][]string{{"--annotate"}, {"--in-place"}, {"--report-all"}} {
		if out, code := runCmd(t, append(append([]string{"replay"}, args...), caps)...); code == 0 {
			t.Errorf("replay %v: exit 0, want an error\n%s", args, out)
		}
	}

	log := filepath.Join(dir, "events.jsonl")
	if out, code := runCmd(t, "replay", "--log", log, caps); code != 0 {
		t.Fatalf("replay exit %d\n%s", code, out)
	}
	if err := os.Remove(filepath.Join(caps, "d-chirp.sigmf-data")); err != nil {
		t.Fatal(err)
	}
	rep := filepath.Join(dir, "report")
	out, code := runCmd(t, "report", "--out", rep, "--captures", caps, log)
	if code != 0 || !strings.Contains(out, "d-chirp.sigmf-meta: not redrawn") {
		t.Fatalf("report exit %d\n%s", code, out)
	}
	page, _ := os.ReadFile(filepath.Join(rep, "index.html"))
	if !strings.Contains(string(page), "not redrawn") || !strings.Contains(string(page), "c-cw.sigmf-meta") {
		t.Error("the page does not say which capture could not be redrawn")
	}
	for _, c := range readReportJSON(t, rep).Captures {
		if c.Capture == "d-chirp.sigmf-meta" && (len(c.Pictures) != 0 || c.Events == 0) {
			t.Errorf("missing capture: %d pictures, %d events", len(c.Pictures), c.Events)
		}
		if c.Capture == "c-cw.sigmf-meta" && len(c.Pictures) != 4 {
			t.Errorf("c-cw: %d pictures, want 4", len(c.Pictures))
		}
	}
}
