package report

import (
	"context"
	"image"
	"image/color"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"testing"

	"quietband/detect"
	"quietband/ingest"
	"quietband/ingest/synth"
)

// observed is one synthesized capture run through the pipeline with an
// Observer.
type observed struct {
	truth   synth.Truth
	capture *ingest.Capture
	result  *detect.Result
	summary *Summary
}

// runScenario writes s into dir and analyses its captures in order with
// one pipeline (so later captures have a baseline), each with a fresh
// Observer.
func runScenario(t *testing.T, dir string, s synth.Scenario) []observed {
	t.Helper()
	truths, err := synth.Write(&s, dir)
	if err != nil {
		t.Fatal(err)
	}
	pipe := detect.NewPipeline(detect.Config{}, nil)
	var out []observed
	for _, tr := range truths {
		c, err := ingest.Open(filepath.Join(dir, tr.Capture), ingest.RawSettings{})
		if err != nil {
			t.Fatal(err)
		}
		o := NewObserver()
		res, err := pipe.Process(context.Background(), c, tr.Capture, detect.WithObserver(o))
		if err != nil {
			t.Fatal(err)
		}
		out = append(out, observed{truth: tr, capture: c, result: res, summary: o.Summary()})
	}
	return out
}

// scenario is a quick scenario without satellites (no GNSS work).
func scenario(fs float64, caps ...synth.Capture) synth.Scenario {
	for i := range caps {
		caps[i].OffsetS = float64(i) * 60
	}
	return synth.Scenario{Name: "report-test", SampleRate: fs, Format: "cf32_le", Captures: caps}
}

func decodePNG(t *testing.T, path string) image.Image {
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

func rgb(c color.Color) (r, g, b float64) {
	R, G, B, _ := c.RGBA()
	return float64(R >> 8), float64(G >> 8), float64(B >> 8)
}

// luminance is the relative luminance with the ITU-R BT.709 weights.
func luminance(c color.Color) float64 {
	r, g, b := rgb(c)
	return 0.2126*r + 0.7152*g + 0.0722*b
}

func colorDist(a color.Color, b color.NRGBA) float64 {
	r1, g1, b1 := rgb(a)
	return math.Sqrt(sq(r1-float64(b.R)) + sq(g1-float64(b.G)) + sq(b1-float64(b.B)))
}

func sq(x float64) float64 { return x * x }

// near reports whether a pixel within ±win of (x, y) has colour c
// (within tol RGB units).
func near(img image.Image, x, y float64, win int, c color.NRGBA, tol float64) bool {
	cx, cy := int(math.Round(x)), int(math.Round(y))
	for dy := -win; dy <= win; dy++ {
		for dx := -win; dx <= win; dx++ {
			if colorDist(img.At(cx+dx, cy+dy), c) <= tol {
				return true
			}
		}
	}
	return false
}

func isWhite(c color.Color) bool {
	r, g, b := rgb(c)
	return r > 250 && g > 250 && b > 250
}
