package report

import (
	"bytes"
	"image"
	"image/color"
	"image/png"
	"io"
	"math"
	"os"
	"path/filepath"
	"testing"

	"quietband/detect"
	"quietband/ingest/synth"
)

// TestPictureSizes: every picture is a valid PNG (image/png decodes it)
// of its stated size, and its data area lies inside the image.
func TestPictureSizes(t *testing.T) {
	ob := runScenario(t, t.TempDir(), scenario(4e6, synth.Capture{Name: "mix", DurationS: 0.1, Emitters: []synth.Emitter{
		{Kind: synth.KindCW, Tones: []synth.Tone{{OffsetHz: 400e3, JNDB: 8}}},
		{Kind: synth.KindPulsed, Pulse: "rect", WidthS: 5e-6, PRIS: 300e-6, JNDB: 15, OffsetHz: -500e3}}}))[0]
	s, ev := ob.summary, ob.result.Events
	var tl timeline
	tl.add(ob.result.Record, ev)
	cases := []struct {
		name  string
		w, h  int
		draw  func(io.Writer) (Layout, error)
		share float64 // least fraction of the height the (first) data area takes
	}{
		{"spectrogram", SpectrogramWidth, SpectrogramHeight, func(w io.Writer) (Layout, error) { return WriteSpectrogram(w, s, ev, "t") }, 0.6},
		{"psd", PSDWidth, PSDHeight, func(w io.Writer) (Layout, error) { return WritePSD(w, s, ev, "t") }, 0.5},
		{"sk", SKWidth, SKHeight, func(w io.Writer) (Layout, error) { return WriteSK(w, s, "t") }, 0.5},
		{"envelope", EnvelopeWidth, EnvelopeHeight, func(w io.Writer) (Layout, error) { return WriteEnvelope(w, s, "t") }, 0.5},
		// The timeline's Layout is its first of four panels.
		{"timeline", TimelineWidth, TimelineHeight, tl.write, 0.15},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			var buf bytes.Buffer
			l, err := tc.draw(&buf)
			if err != nil {
				t.Fatal(err)
			}
			cfg, err := png.DecodeConfig(bytes.NewReader(buf.Bytes()))
			if err != nil {
				t.Fatal(err)
			}
			img, err := png.Decode(bytes.NewReader(buf.Bytes()))
			if err != nil {
				t.Fatal(err)
			}
			if cfg.Width != tc.w || cfg.Height != tc.h || img.Bounds() != image.Rect(0, 0, tc.w, tc.h) || l.Width != tc.w || l.Height != tc.h {
				t.Errorf("PNG %d×%d (bounds %v, layout %d×%d), want %d×%d", cfg.Width, cfg.Height, img.Bounds(), l.Width, l.Height, tc.w, tc.h)
			}
			if !(l.Left > 0 && l.Right < float64(tc.w) && l.Top > 0 && l.Bottom < float64(tc.h) && l.Right-l.Left > float64(tc.w)*0.7 && l.Bottom-l.Top > float64(tc.h)*tc.share) {
				t.Errorf("data area %.1f..%.1f × %.1f..%.1f is not a large part of the %d×%d image", l.Left, l.Right, l.Top, l.Bottom, tc.w, tc.h)
			}
		})
	}
}

// TestSpectrogramGeometry draws a capture with a tone switched on
// part-way and three events of known extent, decodes the PNG and checks
// that the heat map fills the data area the Layout states, that the tone's
// bright line lies at its frequency, and that each box's edges lie at its
// event's times and band edges (widened to MinBoxPixels when narrower).
func TestSpectrogramGeometry(t *testing.T) {
	const (
		fs     = 4e6
		toneHz = -600e3
		onS    = 0.03
		dur    = 0.12
	)
	ob := runScenario(t, t.TempDir(), scenario(fs, synth.Capture{Name: "tone", DurationS: dur, Emitters: []synth.Emitter{
		{Kind: synth.KindCW, StartS: onS, Tones: []synth.Tone{{OffsetHz: toneHz, JNDB: 12}}}}}))[0]
	events := []detect.Event{
		{Class: detect.ClassNarrowbandNoise, SampleStart: int64(0.05 * fs), SampleCount: int64(0.04 * fs), OffsetHz: 700e3, BandwidthHz: 500e3},
		// Starting after the tone, so that its label (inside the box's
		// top-left corner) leaves the tone's switch-on in view.
		{Class: detect.ClassCW, SampleStart: int64((onS + 0.02) * fs), SampleCount: int64((dur - onS - 0.02) * fs), OffsetHz: toneHz, BandwidthHz: 300},
		{Class: detect.ClassPulsed, SampleStart: int64(0.01 * fs), SampleCount: int64(0.02 * fs), OffsetHz: 1.2e6, BandwidthHz: 200e3},
	}
	var buf bytes.Buffer
	l, err := WriteSpectrogram(&buf, ob.summary, events, "geometry")
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "s.png")
	if err := os.WriteFile(path, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	img := decodePNG(t, path)

	// The heat map fills the stated data area: pixels 2 px inside its
	// corners are painted, pixels 3 px above it and right of it are the
	// white background.
	for _, p := range [][2]float64{{l.Left + 2, l.Top + 2}, {l.Right - 2, l.Top + 2}, {l.Left + 2, l.Bottom - 2}, {l.Right - 2, l.Bottom - 2}} {
		if isWhite(img.At(int(p[0]), int(p[1]))) {
			t.Errorf("pixel (%.0f, %.0f) inside the data area is background", p[0], p[1])
		}
	}
	for _, p := range [][2]float64{{(l.Left + l.Right) / 2, l.Top - 3}, {l.Right + 3, (l.Top + l.Bottom) / 2}} {
		if !isWhite(img.At(int(p[0]), int(p[1]))) {
			t.Errorf("pixel (%.0f, %.0f) outside the data area is painted: %v", p[0], p[1], img.At(int(p[0]), int(p[1])))
		}
	}

	// The tone: in rows after its start, away from the boxes, the
	// brightest pixel (the ramp's luminance rises with power) is at the
	// tone's column; before its start it is not.
	xTone := l.XPixel(toneHz)
	colPx := float64(ob.summary.ColBins) * ob.summary.BinHz() / (l.XRight - l.XLeft) * (l.Right - l.Left)
	tol := math.Max(2, colPx) + 1
	nearClassColor := func(c color.Color) bool {
		for _, class := range detect.Classes {
			if colorDist(c, ClassColor(class)) < 60 {
				return true
			}
		}
		return false
	}
	hits, rows := 0, 0
	for y := l.YPixel(onS + 0.01); y < l.YPixel(dur-0.005); y += 7 {
		best, bestL := -1.0, -1.0
		for x := math.Ceil(l.Left); x < l.Right; x++ {
			c := img.At(int(x), int(y))
			if nearClassColor(c) {
				continue // an event's box
			}
			if lum := luminance(c); lum > bestL {
				best, bestL = x, lum
			}
		}
		rows++
		if math.Abs(best-xTone) <= tol {
			hits++
		}
	}
	if rows < 20 || hits < rows*9/10 {
		t.Errorf("tone line at x = %.1f ± %.1f in %d of %d rows", xTone, tol, hits, rows)
	}
	// Its switch-on: the first bright pixel down the tone's column is at
	// the row of onS, within a grid row (RowFrames·N/fs) and 2 px.
	rowPx := ob.summary.FrameSeconds() * float64(ob.summary.RowFrames) / (l.YBottom - l.YTop) * (l.Bottom - l.Top)
	first := -1.0
	for y := math.Ceil(l.Top); y < l.Bottom; y++ {
		if c := img.At(int(math.Round(xTone)), int(y)); luminance(c) > 200 && !nearClassColor(c) {
			first = y
			break
		}
	}
	if want := l.YPixel(onS); math.Abs(first-want) > rowPx+2 {
		t.Errorf("tone starts at row %.0f, want %.1f ± %.1f", first, want, rowPx+2)
	}

	for _, e := range events {
		c := ClassColor(e.Class)
		x0, x1 := l.XPixel(e.OffsetHz-e.BandwidthHz/2), l.XPixel(e.OffsetHz+e.BandwidthHz/2)
		if x1-x0 < MinBoxPixels {
			m := (x0 + x1) / 2
			x0, x1 = m-MinBoxPixels/2, m+MinBoxPixels/2
		}
		y0 := l.YPixel(float64(e.SampleStart) / fs)
		y1 := l.YPixel(float64(e.SampleStart+e.SampleCount) / fs)
		y1 = math.Min(y1, l.Bottom)
		// Left and right edges, below the label; the bottom edge.
		var onEdges, total int
		for y := y0 + 22; y < y1-3; y += 2 {
			total += 2
			if near(img, x0, y, 1, c, 40) {
				onEdges++
			}
			if near(img, x1, y, 1, c, 40) {
				onEdges++
			}
		}
		for x := x0 + 2; x < x1-2; x++ {
			total++
			if near(img, x, y1, 1, c, 40) {
				onEdges++
			}
		}
		if total == 0 || onEdges < total*95/100 {
			t.Errorf("%s box %.1f..%.1f × %.1f..%.1f: %d of %d edge samples in its colour", e.Class, x0, x1, y0, y1, onEdges, total)
		}
		// Nothing of that colour 8 px outside the box's sides.
		for y := y0 + 22; y < y1-3; y += 5 {
			if near(img, x0-8, y, 1, c, 40) || near(img, x1+8, y, 1, c, 40) {
				t.Errorf("%s colour outside its box at row %.0f", e.Class, y)
				break
			}
		}
	}
}

// TestPalette: the ramp's luminance (ITU-R BT.709 weights) rises
// monotonically, and every class colour stands at least 60 RGB units from
// every ramp colour, so boxes are told from the heat map by colour alone.
func TestPalette(t *testing.T) {
	prev := -1.0
	for i := 0; i <= 1000; i++ {
		c := blend(float64(i)/1000, 1)
		lum := luminance(c)
		if lum < prev-0.75 { // rounding to 8 bits moves Y by < 0.75
			t.Fatalf("ramp luminance falls at %.3f: %.2f after %.2f", float64(i)/1000, lum, prev)
		}
		prev = math.Max(prev, lum)
	}
	if first, last := luminance(blend(0, 1)), luminance(blend(1, 1)); !(last-first > 200) {
		t.Errorf("ramp spans luminance %.0f..%.0f; want a range over 200", first, last)
	}
	for _, class := range detect.Classes {
		k := ClassColor(class)
		for i := 0; i <= 1000; i++ {
			if d := colorDist(blend(float64(i)/1000, 1), k); d < 60 {
				t.Errorf("%s colour %v is %.0f from the ramp at %.3f", class, k, d, float64(i)/1000)
				break
			}
		}
		for _, other := range detect.Classes {
			if other != class && colorDist(ClassColor(other), k) < 60 {
				t.Errorf("%s and %s colours are too close", class, other)
			}
		}
	}
	// The ColorMap refuses values outside its range and maps its ends to
	// the first and last stop.
	r := newRamp(-80, -20)
	if _, err := r.At(-81); err == nil {
		t.Error("At below the range: no error")
	}
	for _, c := range []struct {
		v    float64
		want color.NRGBA
	}{{-80, rampStops[0]}, {-20, rampStops[len(rampStops)-1]}, {-50, rampStops[2]}} {
		got, err := r.At(c.v)
		if err != nil || got != c.want {
			t.Errorf("At(%g) = %v, %v; want %v", c.v, got, err, c.want)
		}
	}
}
