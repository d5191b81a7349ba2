package report

import (
	"bytes"
	"image/png"
	"path/filepath"
	"testing"

	"quietband/ingest/synth"
)

// Issue 18 item 8: a 0.25 s spectrogram PNG was about 800 KB (a day's
// report got heavy). Stored with a 256-colour palette it is under 450 KB
// (measured about 350 KB for the demo's), and every ramp colour it holds
// is within 2 RGB units per channel of the true ramp
// (adjacent palette steps at most 4 apart).
func TestSpectrogramPictureIsLight(t *testing.T) {
	obs := runScenario(t, filepath.Join(t.TempDir(), "caps"), scenario(4e6,
		synth.Capture{Name: "noise", DurationS: 0.25}))
	var buf bytes.Buffer
	if _, err := WriteSpectrogram(&buf, obs[0].summary, nil, "test"); err != nil {
		t.Fatal(err)
	}
	if buf.Len() > 450<<10 {
		t.Errorf("spectrogram PNG %d KB, want ≤ 450 KB", buf.Len()>>10)
	}
	img, err := png.Decode(bytes.NewReader(buf.Bytes()))
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("0.25 s at 4 MS/s: %d KB, %T", buf.Len()>>10, img)
	// The palette's ramp steps: neighbours at most 4 units apart.
	for i := 1; i < rampSteps; i++ {
		a, b := spectrogramPalette[i-1].(interface{ RGBA() (r, g, b, a uint32) }), spectrogramPalette[i]
		ar, ag, ab, _ := a.RGBA()
		br, bg, bb, _ := b.RGBA()
		for _, d := range []int{int(ar>>8) - int(br>>8), int(ag>>8) - int(bg>>8), int(ab>>8) - int(bb>>8)} {
			if d > 4 || d < -4 {
				t.Fatalf("ramp steps %d and %d differ by %d", i-1, i, d)
			}
		}
	}
}
